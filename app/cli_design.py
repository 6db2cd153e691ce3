"""``tolspread design``: synthesize a filter and write it as a design file.

::

    tolspread design --response butterworth --order 4 --cutoff 2k -o lowpass.json
    tolspread design --response chebyshev --ripple 1 --order 5 --cutoff 10k --gbw 1M -o cheb.json
    tolspread design --response bessel --order 2 --kind bandpass --cutoff 1k --bandwidth 200 -o bp.json
    tolspread design --response elliptic --ripple 0.5 --stopband 40 --order 5 --cutoff 1k -o cauer.json
    tolspread design --response inverse_chebyshev --stopband 40 --order 4 --cutoff 1k -o ic.json
    tolspread design --response butterworth --order 2 --kind bandstop --cutoff 50 --bandwidth 20 -o hum.json

Frequencies (``--cutoff``, ``--bandwidth``, ``--gbw``, in Hz) may be written with SI
prefixes ("2k", "1.5MHz"). The command prints every stage's f0 and Q before and after
snapping the resistors, and the errors of the built design against the ideal response
(cutoff or centre, bandwidth, every section's f0, Q and notch frequency, passband gain,
shape and ripple, and the stopband an elliptic or inverse Chebyshev response guarantees),
then saves the design. When an error exceeds its limit (``--max-cutoff-error`` 2 %,
``--max-bandwidth-error`` 5 %, ``--max-q-error`` 5 %, ``--max-gain-error`` 0.5 dB) it
warns in words, writes nothing and exits with :data:`EXIT_OUT_OF_LIMITS` (4), unless
``--accept-error`` is given. Bad input (also a cutoff or bandwidth no impedance level can
build from the practical part ranges) raises :class:`filters.errors.InputError` whose
path names the option (exit 2).
"""
from __future__ import annotations

import argparse
import math
import sys
from dataclasses import replace
from typing import Any

from ..designfile import save
from ..errors import InputError
from ..safeio import check_output_path
from ..synthesis import KINDS, RESPONSES, STOPBAND_DB, ErrorLimits, synthesize
from ..values import format_value, parse_decibels, parse_value

# synthesize() argument -> command-line option, for error messages
_OPTION = {"response": "--response", "order": "--order", "cutoff_hz": "--cutoff", "kind": "--kind",
           "bandwidth_hz": "--bandwidth", "topology": "--topology", "series": "--series",
           "cap_series": "--cap-series", "gbw_hz": "--gbw", "ripple_db": "--ripple", "stopband_db": "--stopband",
           "limits.cutoff": "--max-cutoff-error", "limits.bandwidth": "--max-bandwidth-error",
           "limits.q": "--max-q-error", "limits.gain_db": "--max-gain-error"}
EXIT_OUT_OF_LIMITS = 4  # the built design strays from the ideal response beyond a limit
_DEFAULTS = ErrorLimits()


def add_parser(subparsers: Any) -> argparse.ArgumentParser:
    """Register the ``design`` subcommand on ``subparsers`` (from ``add_subparsers``)."""
    d = subparsers.add_parser(
        "design", help="synthesize a Butterworth, Chebyshev, Bessel, Linkwitz-Riley, elliptic or inverse "
                       "Chebyshev filter into a design file",
        description="Synthesize a filter: one section per pole pair (lowest Q first; with its nearest "
                    "zero pair in a notch section for elliptic, inverse Chebyshev and band-stop), capacitors from "
                    "--cap-series, resistors solved and snapped to --series. Prints f0 and Q of every "
                    "stage before and after snapping, and saves the design (with a starting mask to edit).")
    d.add_argument("--response", required=True, metavar="NAME",
                   help=f"{', '.join(RESPONSES)} (Linkwitz-Riley: even orders, cutoff = -6 dB crossover)")
    d.add_argument("--order", required=True, metavar="N", help="filter order, 1 to 10")
    d.add_argument("--cutoff", required=True, metavar="HZ",
                   help="cutoff in Hz (-3 dB point; band-pass and band-stop: centre frequency), e.g. 2k")
    d.add_argument("--kind", default="lowpass", metavar="KIND", help=f"{' | '.join(KINDS)} (default lowpass)")
    d.add_argument("--bandwidth", metavar="HZ",
                   help="band-pass and band-stop only: bandwidth between the -3 dB edges, Hz")
    d.add_argument("--topology", metavar="NAME",
                   help="second-order sections: sallen_key_lowpass (default), mfb_lowpass, "
                        "sallen_key_highpass (default), mfb_highpass, mfb_bandpass; elliptic, inverse "
                        "Chebyshev and band-stop sections are notch sections (notch_lowpass, "
                        "notch_highpass, notch)")
    d.add_argument("--series", default="E24", help="resistor series (default E24)")
    d.add_argument("--cap-series", default="E12", dest="cap_series", help="capacitor series (default E12)")
    d.add_argument("--gbw", metavar="HZ", help="add an op-amp part with this gain-bandwidth (Hz) to every active stage")
    d.add_argument("--ripple", metavar="DB", help="Chebyshev and elliptic passband ripple: 0.1, 0.5, 1, 2 or 3 dB")
    d.add_argument("--stopband", metavar="DB",
                   help=f"elliptic and inverse Chebyshev: stopband attenuation below the passband's peak, "
                        f"{STOPBAND_DB[0]:g} to {STOPBAND_DB[1]:g} dB (the starting mask holds it from the "
                        "stopband edge on)")
    d.add_argument("-o", "--output", required=True, metavar="DESIGN", help="design file to write (JSON)")
    d.add_argument("--max-cutoff-error", metavar="PCT", dest="max_cutoff_error",
                   help=f"limit for the cutoff (centre) and each section's f0, percent "
                        f"(default {100 * _DEFAULTS.cutoff:g})")
    d.add_argument("--max-bandwidth-error", metavar="PCT", dest="max_bandwidth_error",
                   help=f"limit for a band-pass bandwidth, percent (default {100 * _DEFAULTS.bandwidth:g})")
    d.add_argument("--max-q-error", metavar="PCT", dest="max_q_error",
                   help=f"limit for each section's Q, percent (default {100 * _DEFAULTS.q:g})")
    d.add_argument("--max-gain-error", metavar="DB", dest="max_gain_error",
                   help=f"limit for the passband gain, shape and ripple, dB (default {_DEFAULTS.gain_db:g})")
    d.add_argument("--accept-error", action="store_true", dest="accept_error",
                   help="write the design and exit 0 even when an error exceeds its limit (still warns)")
    return d


def _order(text: Any) -> int:
    if isinstance(text, int) and not isinstance(text, bool):
        return text
    try:
        return int(str(text).strip())
    except ValueError:
        raise InputError(f"must be a whole number from 1 to 10, not {text!r}", "--order") from None


def _value(text: Any, option: str) -> float | None:
    return None if text is None else parse_value(text, option)


def _limit(text: Any, option: str, percent: bool) -> float | None:
    """A limit option: a number above 0 (percent options may end in "%"), as a fraction or dB."""
    if text is None:
        return None
    s = str(text).strip()
    if percent:
        s = s.removesuffix("%").strip()
    try:
        v = float(s)
    except ValueError:
        v = math.nan
    if not (math.isfinite(v) and v > 0):
        unit = "a percentage such as 2 or 2%" if percent else "a number of dB such as 0.5"
        raise InputError(f"must be {unit}, above 0; not {text!r}", option)
    return v / 100 if percent else v


def _limits(args: argparse.Namespace) -> ErrorLimits:
    got = {"cutoff": _limit(getattr(args, "max_cutoff_error", None), "--max-cutoff-error", True),
           "bandwidth": _limit(getattr(args, "max_bandwidth_error", None), "--max-bandwidth-error", True),
           "q": _limit(getattr(args, "max_q_error", None), "--max-q-error", True),
           "gain_db": _limit(getattr(args, "max_gain_error", None), "--max-gain-error", False)}
    return replace(_DEFAULTS, **{k: v for k, v in got.items() if v is not None})


def run(args: argparse.Namespace) -> int:
    """Synthesize from parsed ``args``, print the report, save; returns 0, or
    :data:`EXIT_OUT_OF_LIMITS` (nothing written) when an error exceeds its limit and
    ``--accept-error`` was not given."""
    check_output_path(args.output, "--output")  # issue 11: '' or a device refused before any work
    response = str(args.response).strip().lower().replace("-", "_")
    order = _order(args.order)
    cutoff = _value(args.cutoff, "--cutoff")
    bandwidth = _value(getattr(args, "bandwidth", None), "--bandwidth")
    gbw = _value(getattr(args, "gbw", None), "--gbw")
    ripple = _value(getattr(args, "ripple", None), "--ripple")
    stopband_text = getattr(args, "stopband", None)
    stopband = None if stopband_text is None else parse_decibels(stopband_text, "--stopband")
    kind = str(getattr(args, "kind", None) or "lowpass").strip().lower().replace("-", "")
    limits = _limits(args)
    try:
        result = synthesize(response, order, cutoff, kind=kind, bandwidth_hz=bandwidth,
                            topology=getattr(args, "topology", None), series=getattr(args, "series", "E24"),
                            cap_series=getattr(args, "cap_series", "E12"), gbw_hz=gbw, ripple_db=ripple,
                            limits=limits, stopband_db=stopband)
    except InputError as exc:
        if exc.path in _OPTION:
            raise InputError(exc.reason, _OPTION[exc.path]) from None
        raise
    out = sys.stdout
    out.write(result.text_report() + "\n")
    slow = [w for w in result.gbw if w.too_low]
    for w in slow:
        out.write(f"warning: {w.stage}: op-amp gain-bandwidth {format_value(w.gbw_hz or 0.0, 'Hz')} is below "
                  f"the {format_value(w.required_gbw_hz, 'Hz')} the rule GBW >= 100 G Q f0 asks for\n")
    warning = result.warning_text()
    if warning and not getattr(args, "accept_error", False):
        sys.stderr.write(f"tolspread: {warning}\ntolspread: nothing written; give --accept-error to write "
                         f"{args.output} anyway, or widen the limits (--max-...-error)\n")
        return EXIT_OUT_OF_LIMITS
    save(result.design, args.output)
    out.write(f"wrote {args.output}" + (" (with errors beyond the limits, accepted)" if warning else "") + "\n")
    return 0
