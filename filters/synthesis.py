"""Filter synthesis: from a response family, an order and a cutoff to a buildable design.

:func:`synthesize` takes the prototype (:mod:`tolspread.prototypes`) to the requested
cutoff (low-pass, high-pass or band-pass), picks one topology per section, chooses the
component values (:mod:`tolspread.component_values`: capacitors from a preferred-value
series, resistors solved exactly and snapped to their series), picks among each
section's snapped candidates for the whole cascade, and returns the
:class:`~tolspread.design.Design` with a :class:`~tolspread.synthesis_result.SynthesisResult`:
what snapping did to every section's f0 and Q and to the cutoff, the errors against the
ideal response (:mod:`tolspread.ideal_response`) and the op-amp check
(:mod:`tolspread.opamp_check`).

Units: frequencies in Hz, resistors in ohm, capacitors in F, op-amp gain-bandwidth in Hz.
"""
from __future__ import annotations

import math
from typing import Any

import numpy as np

from .component_values import ROLES, SectionChoice, section_choices, section_coeffs, stage_options
from .design import Analysis, Design, design_from_dict
from .designfile import design_to_dict
from .engine import gain2_at
from .errors import InputError
from .grades import builtin_catalog
from .ideal_response import ErrorLimits, IdealResponse, error_checks, starting_mask, stop_grid
from .nominal_measure import measure_cutoff, stage_fq, stage_notches
from .opamp_check import GbwWarning, gbw_warnings
from .prototypes import (MAX_ORDER, RESPONSES, RIPPLES_DB, STOPBAND_DB, STOPBAND_RESPONSES, TWO_PI,
                         check_family, omega_edges, pair_sections, target_zpk)
from .topologies import NOTCHES
from .synthesis_result import KIND_LABEL, SectionReport, SynthesisResult, hz_text
from .values import E_SERIES

__all__ = [
    "HALF_POWER_DB",
    "LR_CROSSOVER_DB",
    "RESPONSES",
    "KINDS",
    "RIPPLES_DB",
    "STOPBAND_DB",
    "MAX_ORDER",
    "TOPOLOGY_CHOICES",
    "NOTCH_FOR",
    "ErrorLimits",
    "SynthesisResult",
    "synthesize",
]

HALF_POWER_DB = 10 * math.log10(2)   # 3.0103 dB: |H|^2 halves
LR_CROSSOVER_DB = 20 * math.log10(2)  # 6.0206 dB: |H| halves (Linkwitz-Riley crossover)

KINDS = ("lowpass", "highpass", "bandpass", "bandstop")
TOPOLOGY_CHOICES = {
    "lowpass": ("sallen_key_lowpass", "mfb_lowpass"),
    "highpass": ("sallen_key_highpass", "mfb_highpass"),
    "bandpass": ("mfb_bandpass",),
    "bandstop": ("notch",),
}
#: The notch section a response with zeros (elliptic, inverse Chebyshev, any band-stop) uses.
NOTCH_FOR = {"lowpass": "notch_lowpass", "highpass": "notch_highpass", "bandstop": "notch"}
_LABEL = {"butterworth": "Butterworth", "chebyshev": "Chebyshev", "bessel": "Bessel",
          "linkwitz_riley": "Linkwitz-Riley", "elliptic": "Elliptic", "inverse_chebyshev": "Inverse Chebyshev"}


def _cross(rel: np.ndarray, f: np.ndarray, level: float, rising: bool) -> np.ndarray:
    """Per row of ``rel`` (rows, F) in dB on ascending ``f`` (Hz): where it crosses
    ``level`` (rising: the first crossing from below; else the last from above), by
    log-linear interpolation; clipped to the window's ends."""
    mask = rel >= level
    n = f.size
    j = np.argmax(mask, axis=1) - 1 if rising else n - 1 - np.argmax(mask[:, ::-1], axis=1)
    a = np.clip(j, 0, n - 2)
    rows = np.arange(rel.shape[0])
    ya, yb = rel[rows, a], rel[rows, a + 1]
    with np.errstate(divide="ignore", invalid="ignore"):
        t = np.clip(np.nan_to_num((level - ya) / (yb - ya)), 0.0, 1.0)
    lf = np.log(f)
    return np.exp(lf[a] + t * (lf[a + 1] - lf[a]))


def _refine_jointly(stages: list[dict[str, Any]], choices: list[list["SectionChoice"]],
                    ideal: "IdealResponse", limits: "ErrorLimits", fc: float, bw: float | None,
                    passes: int = 4) -> list[int]:
    """Which candidate of every section to build: coordinate descent over the sections,
    starting from each section's own best, on the whole cascade's worst error relative to
    its limit (cutoff or centre and bandwidth from interpolated crossings, passband shape
    and ripple against ``ideal``, each section's own f0, Q and notch frequency error, and
    any rise above the stopband an elliptic or inverse Chebyshev response guarantees). Responses come from
    the engine on one frequency grid per section candidate; each step evaluates one
    section's candidates together (no loop over candidates). Per-section choices alone let
    every section err the same way (a Bessel order 6 cutoff 2 % low)."""
    n = len(stages)
    if all(len(c) == 1 for c in choices):
        return [0] * n
    kind, level = ideal.kind, -ideal.cutoff_db
    pas = ideal.passband[::8]
    if kind == "lowpass":
        ref_f, windows = np.array([fc * 1e-3]), [np.geomspace(0.7 * fc, 1.4 * fc, 161)]
    elif kind == "highpass":
        ref_f, windows = np.array([fc * 1e3]), [np.geomspace(fc / 1.4, fc / 0.7, 161)]
    elif kind == "bandstop":
        assert bw is not None
        lo, hi = omega_edges(fc, bw, 1.0)
        ref_f = np.array([ideal.f[0]])
        windows = [np.geomspace(lo / 1.1, lo * 1.1, 161), np.geomspace(hi / 1.1, hi * 1.1, 161)]
    else:
        assert bw is not None
        lo, hi = omega_edges(fc, bw, 1.0)
        ref_f = np.empty(0)
        windows = [np.geomspace(lo / 1.1, lo * 1.1, 161), np.geomspace(hi / 1.1, hi * 1.1, 161)]
    stop = stop_grid(ideal.stop)[::10] if ideal.stop is not None else np.empty(0)
    f = np.concatenate([ref_f, pas, *windows, stop])
    sl_pas = slice(ref_f.size, ref_f.size + pas.size)
    sl_win = [slice(ref_f.size + pas.size + k * 161, ref_f.size + pas.size + (k + 1) * 161)
              for k in range(len(windows))]
    sl_stop = slice(f.size - stop.size, f.size)
    sec_db, sec_err = [], []
    for st, cs in zip(stages, choices):
        roles = ROLES[st["topology"]]
        _, coeffs = section_coeffs(st["topology"], roles, np.array([[c.values[r] for r in roles] for c in cs]))
        g2 = gain2_at(coeffs, np.broadcast_to(f, (len(cs), f.size)))
        # one more column: minus the candidate's designed (exact-value) gain at the reference
        # frequency, so the cascade's reference is held against the gain its sections were
        # designed for, as error_checks does (a notch section's is not 0 dB: C3 is a series value)
        designed = np.zeros((len(cs), 1))
        if kind != "bandpass":
            _, exact = section_coeffs(st["topology"], roles, np.array([[c.exact[r] for r in roles] for c in cs]))
            designed[:, 0] = 10 * np.log10(np.maximum(gain2_at(exact, np.broadcast_to(ref_f, (len(cs), 1))), 1e-300))[:, 0]
        sec_db.append(np.concatenate([10 * np.log10(np.maximum(g2, 1e-300)), -designed], axis=1))
        f0t, qt, fzt = st["target"]
        sec_err.append(np.array([max(abs(c.f0_hz / f0t - 1) / limits.cutoff,
                                     0.0 if qt is None or c.q is None else abs(c.q / qt - 1) / limits.q,
                                     0.0 if fzt is None or c.fz_hz is None else abs(c.fz_hz / fzt - 1) / limits.cutoff)
                                 for c in cs]))
    ideal_db = 10 * np.log10(np.maximum(ideal.g2(f), 1e-300) / ideal.ref2)
    c_ideal, b_ideal = ideal.cutoff()

    def objective(total: np.ndarray, sec_worst: np.ndarray) -> np.ndarray:
        ref = np.max(total[:, ref_f.size:f.size], axis=1) if kind == "bandpass" else total[:, 0]
        rel = total - ref[:, None]
        p = rel[:, sl_pas]
        terms = [np.max(np.abs(p - ideal_db[sl_pas]), axis=1) / limits.gain_db,
                 np.abs(np.ptp(p, axis=1) - np.ptp(ideal_db[sl_pas])) / limits.gain_db, sec_worst]
        if stop.size:  # the guaranteed stopband: only a rise above its level counts
            terms.append(np.maximum(0.0, np.max(rel[:, sl_stop], axis=1) - ideal.stop_db) / limits.gain_db)
        if kind in ("bandpass", "bandstop"):
            lower = _cross(rel[:, sl_win[0]], windows[0], level, rising=kind == "bandpass")
            upper = _cross(rel[:, sl_win[1]], windows[1], level, rising=kind == "bandstop")
            terms += [np.abs(np.sqrt(lower * upper) / c_ideal - 1) / limits.cutoff,
                      np.abs((upper - lower) / b_ideal - 1) / limits.bandwidth]  # type: ignore[operator]
            if kind == "bandstop":
                terms.append(np.abs(ref + total[:, f.size]) / limits.gain_db)
        else:
            c = _cross(rel[:, sl_win[0]], windows[0], level, rising=kind == "highpass")
            terms += [np.abs(c / c_ideal - 1) / limits.cutoff, np.abs(ref + total[:, f.size]) / limits.gain_db]
        t = np.stack(terms)
        return np.max(t, axis=0) + 1e-3 * np.sum(t * t, axis=0)

    choice = [0] * n
    total = np.sum([d[0] for d in sec_db], axis=0)
    best = float(objective(total[None, :], np.array([max(e[0] for e in sec_err)]))[0])
    for _ in range(passes):
        improved = False
        for i in range(n):
            if len(choices[i]) == 1:
                continue
            rows = (total - sec_db[i][choice[i]])[None, :] + sec_db[i]
            others = max([sec_err[j][choice[j]] for j in range(n) if j != i], default=0.0)
            o = objective(rows, np.maximum(others, sec_err[i]))
            k = int(np.argmin(o))
            if o[k] < best - 1e-12:
                choice[i], total, best, improved = k, rows[k], float(o[k]), True
        if not improved:
            break
    return choice



# --- synthesis -------------------------------------------------------------------------

def _positive(x: Any, path: str) -> float:
    if isinstance(x, bool) or not isinstance(x, (int, float, np.floating)) or not math.isfinite(x) or x <= 0:
        raise InputError(f"must be a finite frequency above 0 Hz, not {x!r}", path)
    return float(x)


def _check_grade(name: str, kind: str, path: str) -> None:
    cat = builtin_catalog()
    if name not in cat or not cat[name].fits(kind):
        raise InputError(f"unknown {kind} grade {name!r}; use one of "
                         f"{', '.join(g.name for g in cat.for_kind(kind))}", path)



def synthesize(response: str, order: int, cutoff_hz: float, kind: str = "lowpass",
               bandwidth_hz: float | None = None, topology: str | None = None,
               series: str = "E24", cap_series: str = "E12", gbw_hz: float | None = None,
               ripple_db: float | None = None, snap: bool = True,
               resistor_grade: str = "R-thick-1", capacitor_grade: str = "C-C0G-5",
               opamp_grade: str = "OPAMP-GBW-50", limits: ErrorLimits | None = None,
               stopband_db: float | None = None) -> SynthesisResult:
    """Build a design realising ``response`` of ``order`` at ``cutoff_hz`` (Hz).

    ``kind``: "lowpass", "highpass" or "bandpass". A low-pass or high-pass cutoff is the
    -3 dB point (|H|^2 half the passband reference, see :func:`~tolspread.prototypes.prototype_sections`;
    Linkwitz-Riley: the -6 dB crossover). A band-pass is the low-pass prototype moved by
    ``scipy.signal.lp2bp_zpk`` to centre ``cutoff_hz`` (geometric mean of the band edges)
    with ``bandwidth_hz`` between the edges; an order-N band-pass has 2N poles and is
    built as N multiple-feedback band-pass sections, one per pole pair, each with midband
    gain magnitude enough to make up its own loss at the centre, at most Q^2 (so the
    overall gain at the centre is about 0 dB unless low-Q sections of a wide band cannot
    reach it; the report then says so; the mask is relative). Linkwitz-Riley is for low-pass and high-pass only.
    A band-stop ("bandstop") is the prototype moved by ``scipy.signal.lp2bs_zpk`` (the
    -3 dB edges ``bandwidth_hz`` apart, their geometric mean at ``cutoff_hz``); every
    section is a notch section ("notch"). Elliptic and inverse Chebyshev responses
    (``stopband_db``, and ``ripple_db`` for elliptic) are low-pass, high-pass or band-stop:
    each complex pole pair is built with its nearest zero pair as a notch section
    ("notch_lowpass", "notch_highpass", "notch"; see
    :func:`~tolspread.prototypes.pair_sections`), and the starting mask holds the stopband
    the response guarantees.

    ``topology``: the second-order section type: low-pass "sallen_key_lowpass" (default)
    or "mfb_lowpass"; high-pass "sallen_key_highpass" (default) or "mfb_highpass";
    band-pass "mfb_bandpass". Sallen-Key sections are unity gain; multiple-feedback
    sections have passband gain -1. An odd order's first-order section is a passive
    "rc_lowpass"/"rc_highpass" with one section. **Assumption:** like every stage, it is
    taken as buffered (it drives a high-impedance input); a Sallen-Key input is not one,
    so on the board put a follower after the RC (or keep the RC's resistance far below the
    next stage's input resistance).

    Component values: see :func:`~tolspread.component_values.section_values`. Capacitors come from ``cap_series``;
    resistors are solved exactly and, with ``snap`` (default), snapped to ``series``.
    Grades: ``resistor_grade``, ``capacitor_grade``. With ``gbw_hz`` (Hz) every active
    stage gets an op-amp part U1, U2 ... (value ``gbw_hz``, grade ``opamp_grade``) on its
    role U1. Reference designators R1.., C1.., U1.. run across the whole design.

    Analysis range: cutoff/100 to cutoff x 100 Hz, 400 points (band-pass: wide enough for
    the band edges too); ``cutoff_db`` set so the analysis measures the same cutoff as the
    target (3.01 dB; Linkwitz-Riley 6.02 dB; an even-order Chebyshev band-pass
    3.01 + ripple dB below its peak). Mask: a **starting point** for the user to edit,
    implied by the ideal response (see :func:`~tolspread.ideal_response.starting_mask`), with a passband ceiling.

    Part values stay in the practical range (``component_values.R_MIN``..``R_MAX``,
    ``C_MIN``..``C_MAX``; see :func:`~tolspread.component_values.section_choices`), else :class:`InputError`
    naming ``cutoff_hz``, ``bandwidth_hz`` or ``order``. Snapping keeps the best few
    candidates per section and picks among them for the whole cascade
    (:func:`_refine_jointly`). ``limits`` (default :class:`ErrorLimits`) are what the
    result's :attr:`SynthesisResult.checks` are held against: errors of the snapped design
    (ideal op-amps, the engine) against the ideal ``scipy.signal`` response.

    Parameters
    ----------
    response : str
        Response family (:data:`~tolspread.prototypes.RESPONSES`: ``"butterworth"``,
        ``"chebyshev"``, ``"bessel"``, ``"linkwitz_riley"``, ``"elliptic"``,
        ``"inverse_chebyshev"``).
    order : int
        Filter order.
    cutoff_hz : float
        Cutoff (low-pass, high-pass) or centre (band-pass) in Hz.
    kind : str
        ``"lowpass"``, ``"highpass"``, ``"bandpass"`` or ``"bandstop"``.
    bandwidth_hz : float, optional
        Bandwidth between the band edges (band-pass, band-stop), Hz.
    topology : str, optional
        Second-order section type (default: Sallen-Key; band-pass: multiple feedback).
    series : str
        E-series the resistors are snapped to.
    cap_series : str
        E-series the capacitors come from.
    gbw_hz : float, optional
        Op-amp gain-bandwidth in Hz (adds an op-amp part per active stage).
    ripple_db : float, optional
        Passband ripple in dB (Chebyshev, elliptic).
    snap : bool
        Snap the resistors to ``series``.
    resistor_grade : str
        Grade of every resistor.
    capacitor_grade : str
        Grade of every capacitor.
    opamp_grade : str
        Grade of every op-amp part.
    limits : ErrorLimits, optional
        Limits the checks against the ideal response are held to.
    stopband_db : float, optional
        Stopband attenuation in dB (elliptic, inverse Chebyshev).

    Returns
    -------
    SynthesisResult
        The design, its sections with ideal and built f0 and Q, and the checks against the
        ideal ``scipy.signal`` response.
    """
    check_family(response, order, ripple_db, stopband_db)
    limits = (limits or ErrorLimits()).checked()
    if kind not in KINDS:
        raise InputError(f"must be one of {', '.join(KINDS)}, not {kind!r}", "kind")
    if kind == "bandpass" and response in STOPBAND_RESPONSES:
        raise InputError(f"an {_LABEL[response].lower()} response is built as a low-pass, high-pass or "
                         "band-stop, not a band-pass", "kind")
    fc = _positive(cutoff_hz, "cutoff_hz")
    if not 1e-3 <= fc <= 1e10:
        raise InputError(f"must be from 1 mHz to 10 GHz, not {fc:g} Hz", "cutoff_hz")
    if kind in ("bandpass", "bandstop"):
        if response == "linkwitz_riley":
            raise InputError("a Linkwitz-Riley response is a low-pass or high-pass crossover", "kind")
        if bandwidth_hz is None:
            raise InputError(f"a {KIND_LABEL[kind]} needs its bandwidth in Hz", "bandwidth_hz")
        bw = _positive(bandwidth_hz, "bandwidth_hz")
        if not 1e-3 * fc <= bw <= 10 * fc:
            raise InputError(f"must be from 1/1000 of the centre frequency to 10 times it, not {bw:g} Hz",
                             "bandwidth_hz")
    else:
        if bandwidth_hz is not None:
            raise InputError("a bandwidth applies to a band-pass or band-stop only", "bandwidth_hz")
        bw = None
    allowed = (NOTCH_FOR[kind],) if response in STOPBAND_RESPONSES or kind == "bandstop" else TOPOLOGY_CHOICES[kind]
    topo = topology or allowed[0]
    if topo not in allowed:
        what = (f"an {_LABEL[response].lower()} {KIND_LABEL[kind]}" if response in STOPBAND_RESPONSES
                else f"a {KIND_LABEL[kind]}")
        raise InputError(f"{what} is built from {' or '.join(allowed)}, not {topo!r}", "topology")
    for name, path in ((series, "series"), (cap_series, "cap_series")):
        if name not in E_SERIES:
            raise InputError(f"unknown series {name!r}; use one of {', '.join(E_SERIES)}", path)
    _check_grade(resistor_grade, "R", "resistor_grade")
    _check_grade(capacitor_grade, "C", "capacitor_grade")
    if gbw_hz is not None:
        gbw_hz = _positive(gbw_hz, "gbw_hz")
        if not 1e3 <= gbw_hz <= 1e12:
            raise InputError(f"must be from 1 kHz to 1 THz, not {gbw_hz:g} Hz", "gbw_hz")
        _check_grade(opamp_grade, "opamp", "opamp_grade")

    # Target: poles moved to the cutoff, paired into sections with their zeros (Hz).
    zeros, poles, _ = target_zpk(response, order, fc, kind, bw, ripple_db, stopband_db)
    targets = [(w / TWO_PI, q, None if wz is None else wz / TWO_PI) for w, q, wz in pair_sections(zeros, poles)]

    # Cutoff level and analysis range.
    if response == "linkwitz_riley":
        cutoff_db = LR_CROSSOVER_DB
    elif kind == "bandpass" and response == "chebyshev" and order % 2 == 0:
        assert ripple_db is not None
        cutoff_db = HALF_POWER_DB + ripple_db
    else:
        cutoff_db = HALF_POWER_DB
    if kind in ("bandpass", "bandstop"):
        assert bw is not None
        f_hi = 0.5 * bw + math.sqrt(0.25 * bw * bw + fc * fc)
        f_lo = fc * fc / f_hi
        f_start, f_stop = min(fc / 100, f_lo / 10), max(fc * 100, f_hi * 10)
    else:
        f_start, f_stop = fc / 100, fc * 100
    if f_stop / f_start > 1e12:
        raise InputError("the band is too wide for the analysed range (at most 12 decades)", "bandwidth_hz")

    # Stages: values in the practical range, snapped to keep f0 and Q (choose_values).
    stages: list[dict[str, Any]] = []
    refusals: list[tuple[float, InputError]] = []
    choices: list[list[SectionChoice]] = []
    for i, (f0, q, fz) in enumerate(targets, 1):
        if q is None:
            t = "rc_lowpass" if kind == "lowpass" else "rc_highpass"
            gain = 1.0
            name = f"S{i} first order, fc {hz_text(f0)}"
        else:
            t = topo if fz is not None or topo not in NOTCHES else TOPOLOGY_CHOICES[kind][0]
            gain = _bandpass_section_gain(f0, q, fc) if t == "mfb_bandpass" else 1.0
            name = f"S{i} f0 {hz_text(f0)}, Q {q:.3f}" + (f", notch {hz_text(fz)}" if fz is not None else "")
        try:
            choices.append(section_choices(i, t, f0, q, kind, series, cap_series, gain, snap, fz))
        except InputError as exc:  # name the hardest section (highest Q), not the first
            refusals.append((q or 0.0, exc))
            continue
        stages.append({"topology": t, "name": name, "target": (f0, q, fz)})
    if refusals:
        raise max(refusals, key=lambda r: r[0])[1]
    ideal = IdealResponse.of(response, order, fc, kind, bw, ripple_db, cutoff_db,
                             Analysis(f_start=f_start, f_stop=f_stop), stopband_db)
    picks = _refine_jointly(stages, choices, ideal, limits, fc, bw)
    for st, cs, k in zip(stages, choices, picks):
        st["exact"], st["values"] = cs[k].exact, cs[k].values

    label = (_LABEL[response] + (f" {ripple_db:g} dB" if ripple_db is not None else "")
             + (f", stopband {stopband_db:g} dB" if stopband_db is not None else ""))
    title = (f"{label} {KIND_LABEL[kind]}, order {order}, "
             + (f"centre {hz_text(fc)}, bandwidth {hz_text(bw)}" if bw is not None else f"cutoff {hz_text(fc)}")
             + " (synthesized)")
    analysis = {"samples": 5000, "seed": 1, "f_start": f_start, "f_stop": f_stop, "points": 400,
                "cutoff_db": cutoff_db}
    grades = {"R": resistor_grade, "C": capacitor_grade, "opamp": opamp_grade}

    exact = _build(stages, "exact", grades, None, analysis, title, "")
    snapped = _build(stages, "values", grades, None, analysis, title, "")
    exact_m = stage_fq(exact)
    snapped_m = stage_fq(snapped)
    exact_z, snapped_z = stage_notches(exact), stage_notches(snapped)
    reports = tuple(
        SectionReport(st["name"], st["topology"], st["target"][0], st["target"][1],
                      exact_m[i][0], exact_m[i][1], snapped_m[i][0], snapped_m[i][1],
                      st["target"][2], exact_z[i], snapped_z[i])
        for i, st in enumerate(stages))

    c_exact, b_exact = measure_cutoff(exact)
    c_snap, b_snap = measure_cutoff(snapped)
    checks = error_checks(snapped, ideal, reports, limits, exact)

    description = (
        f"Synthesized: {label} {KIND_LABEL[kind]} prototype (scipy.signal poles and zeros), one section per "
        "pole pair (with its nearest zero pair in a notch section), lowest Q first. Capacitors from "
        + cap_series + ", resistors "
        + (f"chosen from {series}" if snap else "exact") + ". Stages are taken as buffered; a first-order "
        "RC section needs a high-impedance load (a follower) on the board. The mask is a starting "
        "point: edit it to your specification.")
    final = _build(stages, "values", grades, gbw_hz, analysis, title, description)
    final = final.with_mask(starting_mask(ideal, kind, ripple_db, fc, bw))
    final = design_from_dict(design_to_dict(final))  # checked like a loaded file
    c_gbw = None
    rows: tuple[GbwWarning, ...] = ()
    if gbw_hz is not None:
        c_gbw = measure_cutoff(final)[0]
        rows = tuple(gbw_warnings(final))
    return SynthesisResult(final, response, kind, order, ripple_db, cutoff_db, reports, fc, c_exact,
                           c_snap, bw, b_exact, b_snap, c_gbw, rows, series, cap_series, snap,
                           checks, limits, stopband_db)


def _build(stages: list[dict[str, Any]], key: str, grades: dict[str, str],
           gbw_hz: float | None, analysis: dict[str, Any], name: str, description: str) -> Design:
    """The design with every stage's values ``stages[i][key]`` (ohm, F)."""
    counters = {"R": 0, "C": 0, "U": 0}
    parts: list[dict[str, Any]] = []
    out_stages: list[dict[str, Any]] = []
    for st in stages:
        roles: dict[str, str] = {}
        for role, v in st[key].items():
            kind = role[0]
            counters[kind] += 1
            ref = f"{kind}{counters[kind]}"
            parts.append({"ref": ref, "value": float(v), "grade": grades[kind]})
            roles[role] = ref
        if gbw_hz is not None and not st["topology"].startswith("rc_"):
            for role in (("U1", "U2", "U3") if st["topology"] in NOTCHES else ("U1",)):
                counters["U"] += 1
                ref = f"U{counters['U']}"
                parts.append({"ref": ref, "value": gbw_hz, "grade": grades["opamp"]})
                roles[role] = ref
        options = stage_options(st["topology"])
        d: dict[str, Any] = {"topology": st["topology"], "name": st["name"], "parts": roles}
        if options:
            d["options"] = options
        out_stages.append(d)
    data: dict[str, Any] = {"format": "tolspread-design", "version": 1, "name": name,
                            "parts": parts, "stages": out_stages, "analysis": dict(analysis)}
    if description:
        data["description"] = description
    return design_from_dict(data)



def _bandpass_section_gain(f0_hz: float, q: float, centre_hz: float) -> float:
    """Midband gain magnitude of one multiple-feedback band-pass section: enough to make up
    its own loss at the filter's centre (a stagger-tuned section is off its peak there), so
    the cascade is near 0 dB at the centre, but at most Q^2 (the section needs
    gain < 2 Q^2; Q^2 keeps R2 in a practical ratio)."""
    x = centre_hz / f0_hz - f0_hz / centre_hz
    loss = math.sqrt(1.0 + (q * x) ** 2)   # |H(centre)| = gain / loss for a second-order band-pass
    return min(loss, q * q)


