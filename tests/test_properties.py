"""Property tests: random valid designs, random edits and random bytes, value round trips,
save/load round trips, and numerical extremes.

What each test checks against is named beside it:

* [INV] an invariant of the library's own contract (finite results, only the project's
  error type, determinism, exact round trips);
* [IND] an independent recomputation in this file (the crossing read off the sampled
  gain curve, poles by ``numpy.roots``, an ABCD chain-matrix evaluation of an LC ladder);
* [CF] a closed form: first-order RC corner 1/(2 pi R C); equal-part Sallen-Key low-pass
  Q = 1/(3 - K) (Karki, TI SLOA024, from memory, not confirmed) and its peak
  Q^2 / (1 - 1/(4 Q^2)) (derived from |H|^2 = K^2 / ((1 - x^2)^2 + x^2/Q^2));
  doubly terminated Butterworth ladder, equal terminations, g_k = 2 sin((2k-1) pi / 2n),
  |H|^2 = (1/4) / (1 + (f/fc)^2n) (standard ladder tables, from memory; the response is
  also checked against the ABCD recomputation);
* [SCIPY] scipy.signal.freqs as the reference for a polynomial transfer function.

Example counts are in :data:`EXAMPLES` (quoted by the README); every hypothesis run is
derandomized with no example database, so a run is repeatable.
"""
from __future__ import annotations

import copy
import json
import math
import os
import re
import subprocess
import sys
import tempfile
import traceback
from collections import Counter
from decimal import Decimal
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from scipy import signal

from tolspread import designfile
from tolspread.design import INTERVALS, Design, design_from_dict
from tolspread.designfile import FORMAT_TAG, VERSION, dumps, load, loads, save
from tolspread.engine import compile_design, stage_coefficients
from tolspread.errors import InputError, ValidationError
from tolspread.evaluate import evaluate
from tolspread.grades import DISTRIBUTIONS, builtin_catalog
from tolspread.mask import Span
from tolspread.sampling import METHODS
from tolspread.topologies import TOPOLOGIES, build
from tolspread.values import _E_INT, format_rkm, format_value, parse_value

ROOT = Path(__file__).resolve().parents[1]

EXAMPLES = {
    "random_designs_finite": 400,      # property 1
    "random_edits": 1200,              # property 3
    "random_edits_loaded": 600,        # property 3, designs that load: save, reload, evaluate
    "random_bytes": 800,               # property 4 (each example: loads and load)
    "value_round_trip_1e-15_1e12": 3000,   # property 5
    "value_round_trip_negative": 500,      # property 5
    "value_round_trip_full_range": 1000,   # property 5
    "save_load_random_designs": 200,   # property 6
    "save_load_demo_mutations": 200,   # property 6
}


def _settings(key: str, **extra):
    return settings(max_examples=EXAMPLES[key], deadline=None, database=None, derandomize=True,
                    suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large], **extra)


# --- strategies: valid designs --------------------------------------------------------------

CATALOG = builtin_catalog()
# The ranges, SI units; op-amp parts carry their gain-bandwidth in Hz.
RANGES = {"R": (1.0, 1e8), "C": (1e-12, 1.0), "L": (1e-9, 10.0), "opamp": (1e5, 1e9)}
UNITS = {"R": "\u03a9", "C": "F", "L": "H", "opamp": "Hz"}
BUILTIN_GRADES = {k: [g.name for g in CATALOG.for_kind(k)] for k in RANGES}


def log_uniform(lo: float, hi: float) -> st.SearchStrategy[float]:
    """Log-uniform floats in [lo, hi]."""
    return st.floats(math.log10(lo), math.log10(hi)).map(lambda e: min(hi, max(lo, 10.0 ** e)))


_RC_OPTIONS = st.fixed_dictionaries({}, optional={
    "sections": st.integers(1, 4), "source": st.booleans(), "load": st.booleans()})
_SK_OPTIONS = st.fixed_dictionaries({}, optional={"gain": st.sampled_from(["unity", "resistors"])})
OPTION_STRATEGIES = {
    "rc_lowpass": _RC_OPTIONS,
    "rc_highpass": _RC_OPTIONS,
    "lc_lowpass": st.fixed_dictionaries({}, optional={
        "order": st.integers(2, 5), "first": st.sampled_from(["shunt", "series"])}),
    "sallen_key_lowpass": _SK_OPTIONS,
    "sallen_key_highpass": _SK_OPTIONS,
    "mfb_lowpass": st.just({}),
    "mfb_highpass": st.just({}),
    "mfb_bandpass": st.just({}),
    "notch_lowpass": st.just({}),
    "notch_highpass": st.just({}),
    "notch": st.just({}),
}


@st.composite
def value_entries(draw, kind: str):
    """A part value as a design file may hold it: a number, or text in several notations."""
    x = draw(log_uniform(*RANGES[kind]))
    forms = ["number", "text", "exact", "unit"] + (["rkm"] if kind != "opamp" else [])
    form = draw(st.sampled_from(forms))
    if form == "number":
        return x
    if form == "text":
        return format_value(x, digits=draw(st.integers(1, 6)))
    if form == "exact":
        return format_value(x, digits=17)
    if form == "unit":
        return format_value(x, UNITS[kind], digits=draw(st.integers(1, 6)))
    return format_rkm(x, kind, digits=draw(st.integers(2, 4)))


@st.composite
def custom_grades(draw, index: int):
    """One valid grade of the design's own (round trips only; never evaluated)."""
    kind = draw(st.sampled_from(["R", "C", "L", "opamp", "any"]))
    dist = draw(st.sampled_from(DISTRIBUTIONS))
    tol = draw(st.floats(0.1 if dist == "binned" else 0.0, 99.0))
    g = {"name": f"G{index}-own", "kind": kind, "tolerance_pct": tol, "distribution": dist}
    if dist == "binned":
        g["bin_inner_pct"] = tol * draw(st.floats(0.05, 0.95))
    g.update(draw(st.fixed_dictionaries({}, optional={
        "coverage": st.floats(0.5, 6.0), "truncate": st.booleans(),
        "tempco_ppm": st.floats(-2000, 2000), "tempco_spread_ppm": st.floats(0, 2000),
        "drift_pct": st.floats(0, 50), "cost": st.floats(0, 100),
        "technology": st.text(max_size=12)})))
    if dist == "normal" and g.get("truncate") is False and tol / g.get("coverage", 2.0) * 8 >= 100:
        g["truncate"] = True  # untruncated, 8 standard deviations must stay above zero (tolspread.grades)
    return g


@st.composite
def analysis_dicts(draw):
    """Analysis settings over up to 8 decades: f_start 1e-2..1e5 Hz, 20-200 samples."""
    f_start = draw(log_uniform(1e-2, 1e5))
    f_stop = f_start * 10.0 ** draw(st.floats(1.0, 8.0))
    d = {"samples": draw(st.integers(20, 200)), "f_start": f_start, "f_stop": f_stop}
    temps = st.tuples(st.floats(-55, 150), st.floats(-55, 150)).map(lambda t: sorted(t))
    d.update(draw(st.fixed_dictionaries({}, optional={
        "seed": st.integers(0, 2**63 - 1), "points": st.integers(20, 400),
        "method": st.sampled_from(METHODS), "cutoff_db": st.floats(0.1, 20.0),
        "temperature_c": temps, "lot_share": st.floats(0.0, 1.0),
        "interval": st.sampled_from(INTERVALS), "confidence": st.floats(0.5, 0.9999)})))
    return d


@st.composite
def spans(draw, f_start: float, f_stop: float):
    """One valid mask span inside [f_start, f_stop]."""
    t1, t2 = sorted(draw(st.tuples(st.floats(0, 1), st.floats(0, 1))))
    ratio = f_stop / f_start
    f1 = max(f_start, f_start * ratio ** t1)
    f2 = min(f_stop, f_start * ratio ** t2)
    if not f1 < f2:
        f1, f2 = f_start, f_stop
    quantity = draw(st.sampled_from(["gain", "phase", "delay"]))
    s = {"quantity": quantity, "f1": f1, "f2": f2}
    if quantity == "delay":
        s.update(kind="variation", limit1=draw(log_uniform(1e-9, 10.0)))
    else:
        lim = st.floats(-120, 20) if quantity == "gain" else st.floats(-720, 720)
        s.update(kind=draw(st.sampled_from(["floor", "ceiling"])), limit1=draw(lim))
        if draw(st.booleans()):
            s["limit2"] = draw(lim)
        if quantity == "gain":
            s["relative"] = draw(st.booleans())
    if draw(st.booleans()):
        s["name"] = draw(st.text(max_size=10))
    return s


def unique_span_labels(mask: list[dict]) -> list[dict]:
    """Span dicts renamed where their labels repeat: a valid design's span labels are unique
    (the loader refuses twins, which would share one margin name)."""
    seen = set()
    for i, s in enumerate(mask):
        while Span.from_dict(s).label in seen:
            s["name"] = f"{s.get('name', '')} {i}"
        seen.add(Span.from_dict(s).label)
    return mask


@st.composite
def design_dicts(draw, *, own_grades: bool = False, max_spans: int = 3):
    """A valid design dict: 1-3 buffered stages of any topology, parts from the issue's
    ranges with built-in grades of their kind (and, for round trips, grades of its own)."""
    grades = [draw(custom_grades(i)) for i in range(draw(st.integers(0, 2)))] if own_grades else []
    names = {k: BUILTIN_GRADES[k] + [g["name"] for g in grades if g["kind"] in (k, "any")] for k in RANGES}
    stages, parts = [], []
    for k in range(1, draw(st.integers(1, 3)) + 1):
        topology = draw(st.sampled_from(sorted(TOPOLOGIES)))
        options = draw(OPTION_STRATEGIES[topology])
        topo = build(topology, options)
        roles = dict(topo.roles)
        if topo.optional_roles and draw(st.booleans()):
            roles.update(topo.optional_roles)
        stage = {"topology": topology}
        if options or draw(st.booleans()):
            stage["options"] = options
        if draw(st.booleans()):
            stage["name"] = draw(st.text(max_size=12))
        stage["parts"] = {role: f"S{k}{role}" for role in roles}
        stages.append(stage)
        for role, kind in roles.items():
            part = {"ref": f"S{k}{role}", "value": draw(value_entries(kind)),
                    "grade": draw(st.sampled_from(names[kind]))}
            if own_grades and draw(st.integers(0, 4)) == 0:
                part["tolerance_pct"] = draw(st.floats(0, 99.0))
            parts.append(part)
    analysis = draw(analysis_dicts())
    mask = unique_span_labels([draw(spans(analysis["f_start"], analysis["f_stop"]))
                               for _ in range(draw(st.integers(0, max_spans)))])
    d = {"format": FORMAT_TAG, "version": VERSION, "parts": draw(st.permutations(parts)),
         "stages": stages, "analysis": analysis, "mask": mask}
    if grades:
        d["grades"] = grades
    if draw(st.booleans()):
        d["name"] = draw(st.text(max_size=20))
    if draw(st.booleans()):
        d["description"] = draw(st.text(max_size=40))
    return d


def test_every_topology_has_an_option_strategy():
    """[INV] the random-design strategy covers the whole topology library."""
    assert set(OPTION_STRATEGIES) == set(TOPOLOGIES)
    for name in OPTION_STRATEGIES:
        assert build(name, {}).roles  # every topology builds with its default options


# --- property 1: random valid designs evaluate to finite responses --------------------------

_NAN_CROSSINGS = ("cutoff_hz", "lower_hz", "upper_hz", "bandwidth_hz", "centre_hz")
_POLE_KEY = re.compile(r"^s(\d+)\.(?:p(\d+)\.)?(f0_hz|q)$")


def _response_kind(design: Design) -> str:
    kinds = {build(s.topology, s.options).kind for s in design.stages}
    return kinds.pop() if len(kinds) == 1 else "bandpass"


def _complex_pairs(den_row: np.ndarray) -> int:
    """Complex pole pairs of one denominator (ascending powers), by numpy.roots, counting a
    root as complex only when clearly so (|Im| > 1e-6 |root|: looser than the library)."""
    roots = np.roots(den_row[::-1])
    return int(np.sum(roots.imag > 1e-6 * np.abs(roots)))


def check_metrics(design: Design, metrics: dict[str, np.ndarray], gain_db: np.ndarray,
                  freqs: np.ndarray, values: np.ndarray) -> None:
    """Every metric finite, except a NaN that the curve or the poles show is by design."""
    kind = _response_kind(design)
    assert ("centre_hz" in metrics) == (kind in ("bandpass", "bandstop"))
    ref = metrics["reference_db"]
    level = ref - design.analysis.cutoff_db
    tol = 1e-6  # dB: the library compares |H|^2 against the level, this file dB values
    dens = None
    for name, arr in metrics.items():
        arr = np.asarray(arr, dtype=float)
        assert arr.shape == (gain_db.shape[0],), name
        assert not np.any(np.isinf(arr)), (name, arr[np.isinf(arr)])
        bad = np.flatnonzero(np.isnan(arr))
        if name in _NAN_CROSSINGS and not (kind == "bandpass" and name == "cutoff_hz"):
            ok = ~np.isnan(arr)
            if name == "bandwidth_hz":  # [INV] upper - lower, both found: a positive width
                assert np.all(arr[ok] > 0), name
            else:  # [IND] a crossing found lies inside the grid
                assert np.all(arr[ok] >= freqs[0] * (1 - 1e-9)) and np.all(arr[ok] <= freqs[-1] * (1 + 1e-9)), name
            for i in bad:
                g, lv = gain_db[i], level[i]
                if name == "cutoff_hz" and kind == "lowpass":
                    # no falling crossing: the last point is still at the level, or none reaches it
                    assert g[-1] >= lv - tol or g.max() < lv + tol, (name, i, lv, g[[0, -1]], g.max())
                elif name == "cutoff_hz":
                    assert g[0] >= lv - tol or g.max() < lv + tol, (name, i, lv, g[[0, -1]], g.max())
                elif name in ("lower_hz", "upper_hz") and kind == "bandstop":
                    # no stop band on the grid, or no point at the level on that side of the notch
                    side = freqs < freqs[np.argmin(g)] if name == "lower_hz" else freqs > freqs[np.argmin(g)]
                    assert g.min() >= lv - tol or np.all(g[side] < lv + tol), (name, i)
                elif name == "lower_hz":
                    left = freqs < freqs[np.argmax(g)]  # left of the peak (centre_hz needs both edges)
                    assert np.all(g[left] >= lv - tol), (name, i)
                elif name == "upper_hz":
                    right = freqs > freqs[np.argmax(g)]
                    assert np.all(g[right] >= lv - tol), (name, i)
            if name in ("bandwidth_hz", "centre_hz"):  # both from the two band edges
                assert np.array_equal(np.isnan(arr),
                                      np.isnan(metrics["lower_hz"]) | np.isnan(metrics["upper_hz"]))
            continue
        m = _POLE_KEY.match(name)
        if m and bad.size:
            if dens is None:
                circuit = compile_design(design)
                dens = [sc.den for sc in stage_coefficients(circuit, values)]
            den = dens[int(m.group(1)) - 1]
            assert den.shape[1] - 1 > 2, f"{name}: a second-order stage's f0 and Q must be finite"
            need = int(m.group(2) or 1)  # NaN p<j> means fewer than j pairs; NaN best pair: none
            for i in bad:
                assert _complex_pairs(den[i]) < need, (name, i, np.roots(den[i][::-1]))
            continue
        assert bad.size == 0, (name, bad[:5], values[bad[:1]])


def check_ensemble(design: Design, ens) -> None:
    n, f = design.analysis.samples, ens.freqs_hz.size
    assert ens.gain_db.shape == ens.phase_deg.shape == ens.delay_s.shape == (n, f)
    assert np.all(np.isfinite(ens.values)) and np.all(ens.values > 0)
    assert np.all(np.isfinite(ens.gain_db)), "gain_db"
    assert np.all(np.isfinite(ens.phase_deg)), "phase_deg"
    assert np.all(np.isfinite(ens.delay_s)), "delay_s"
    assert ens.margins.shape == (n, len(design.mask))
    assert not np.any(np.isnan(ens.margins)), "margins"
    check_metrics(design, ens.metrics, ens.gain_db, ens.freqs_hz, ens.values)
    nom = ens.nominal
    assert np.all(np.isfinite(nom.response.gain2)) and np.all(np.isfinite(nom.margins))
    check_metrics(design, {k: np.array([v]) for k, v in nom.metrics.items()},
                  nom.response.gain_db, ens.freqs_hz, nom.values[None, :])


def test_random_valid_designs_evaluate_to_finite_responses():
    """[INV] evaluate raises InputError or returns finite curves and metrics; NaN metrics
    are checked [IND] against the sampled curve and numpy.roots."""
    seen: Counter = Counter()

    @_settings("random_designs_finite")
    @given(design_dicts())
    def run(d):
        design = design_from_dict(d)  # a valid design is accepted
        try:
            ens = evaluate(design, curves=True, delay=True)
        except InputError as exc:
            assert exc.reason
            seen["input_error"] += 1
            return
        check_ensemble(design, ens)
        seen["evaluated"] += 1

    run()
    print("random designs:", dict(seen))
    # Not a vacuous property: most random designs do evaluate.
    assert seen["evaluated"] >= EXAMPLES["random_designs_finite"] // 2, seen


def _sallen_key_q(q: float, samples: int = 200) -> Design:
    """Equal-part Sallen-Key low-pass, K = 1 + RF/RG = 3 - 1/Q, f0 = 1/(2 pi 10k 10n)."""
    rf = 10e3 * (2 - 1 / q)
    d = {"format": FORMAT_TAG, "version": VERSION,
         "parts": [{"ref": "R1", "value": "10k", "grade": "R-thin-0.1"},
                   {"ref": "R2", "value": "10k", "grade": "R-thin-0.1"},
                   {"ref": "C1", "value": "10n", "grade": "C-C0G-1"},
                   {"ref": "C2", "value": "10n", "grade": "C-C0G-1"},
                   {"ref": "RF", "value": rf, "grade": "R-thin-0.1"},
                   {"ref": "RG", "value": "10k", "grade": "R-thin-0.1"}],
         "stages": [{"topology": "sallen_key_lowpass", "options": {"gain": "resistors"},
                     "parts": {"R1": "R1", "R2": "R2", "C1": "C1", "C2": "C2", "RF": "RF", "RG": "RG"}}],
         "analysis": {"samples": samples, "seed": 5, "f_start": 10.0, "f_stop": 1e5, "points": 400}}
    return design_from_dict(d)


@pytest.mark.parametrize("q", [0.7071067811865476, 2.0, 10.0, 30.0, 50.0])
def test_sallen_key_high_q_is_finite_and_matches_closed_form(q):
    """[CF] equal-part Sallen-Key: Q = 1/(3 - K), peak Q^2/(1 - 1/(4Q^2)) at
    f0 sqrt(1 - 1/(2Q^2)); every sampled board finite [INV]."""
    design = _sallen_key_q(q)
    f0 = 1 / (2 * math.pi * 10e3 * 10e-9)
    f_peak = f0 * math.sqrt(1 - 1 / (2 * q * q)) if q > 1 / math.sqrt(2) + 1e-9 else None
    ens = evaluate(design, extra_freqs=[f_peak] if f_peak else [], delay=True)
    check_ensemble(design, ens)
    m = ens.nominal.metrics
    assert m["s1.q"] == pytest.approx(q, rel=1e-9)
    assert m["s1.f0_hz"] == pytest.approx(f0, rel=1e-9)
    k = 3 - 1 / q
    assert m["reference_db"] == pytest.approx(20 * math.log10(k), abs=1e-9)
    if f_peak:
        assert m["peaking_db"] == pytest.approx(10 * math.log10(q * q / (1 - 1 / (4 * q * q))), abs=1e-7)
    # per board: Q from the board's own values, equal-part formula generalised
    # (Q = sqrt(R1 R2 C1 C2) / (R1 C2 + R2 C2 + R1 C1 (1 - K)))
    r1, r2, c1, c2, rf, rg = ens.values.T
    kk = 1 + rf / rg
    q_board = np.sqrt(r1 * r2 * c1 * c2) / (r1 * c2 + r2 * c2 + r1 * c1 * (1 - kk))
    np.testing.assert_allclose(ens.metrics["s1.q"], q_board, rtol=1e-9)


# --- property 2: determinism ---------------------------------------------------------------

_HASH_SRC = '''
import hashlib
import numpy as np
def ensemble_hash(ens):
    h = hashlib.sha256()
    arrays = [("values", ens.values), ("freqs", ens.freqs_hz), ("gain_db", ens.gain_db),
              ("phase_deg", ens.phase_deg), ("delay_s", ens.delay_s), ("margins", ens.margins)]
    arrays += [("m:" + k, ens.metrics[k]) for k in sorted(ens.metrics)]
    for name, arr in arrays:
        a = np.ascontiguousarray(arr, dtype=np.float64)
        h.update(name.encode()); h.update(repr(a.shape).encode()); h.update(a.tobytes())
    return h.hexdigest()
'''
_ns: dict = {}
exec(_HASH_SRC, _ns)  # the same function runs here and in the child processes
ensemble_hash = _ns["ensemble_hash"]

_CHILD_SRC = _HASH_SRC + '''
import sys
from tolspread.designfile import load
from tolspread.evaluate import evaluate
print(ensemble_hash(evaluate(load(sys.argv[1]), samples=int(sys.argv[2]), delay=True)))
'''


def _mixed_design() -> Design:
    """Three stages of three topologies (a band-pass overall), op-amp bandwidths, sobol."""
    d = {"format": FORMAT_TAG, "version": VERSION,
         "parts": [{"ref": "RA", "value": "1k", "grade": "R-thick-5"},
                   {"ref": "CA", "value": "100n", "grade": "C-X7R-20"},
                   {"ref": "RB", "value": "22k", "grade": "R-thick-1"},
                   {"ref": "RC", "value": "22k", "grade": "R-thick-1"},
                   {"ref": "CB", "value": "1n", "grade": "C-C0G-5"},
                   {"ref": "CC", "value": "1n", "grade": "C-C0G-5"},
                   {"ref": "U1", "value": "1MHz", "grade": "OPAMP-GBW-50"},
                   {"ref": "RS", "value": "50", "grade": "R-thick-1"},
                   {"ref": "L1", "value": "1m", "grade": "L-10"},
                   {"ref": "C2", "value": "100n", "grade": "C-C0G-5"},
                   {"ref": "L3", "value": "1m", "grade": "L-10"},
                   {"ref": "RL", "value": "50", "grade": "R-thick-1"}],
         "stages": [{"topology": "rc_highpass", "parts": {"R1": "RA", "C1": "CA"}},
                    {"topology": "sallen_key_lowpass",
                     "parts": {"R1": "RB", "R2": "RC", "C1": "CB", "C2": "CC", "U1": "U1"}},
                    {"topology": "lc_lowpass", "options": {"order": 3, "first": "series"},
                     "parts": {"RS": "RS", "L1": "L1", "C2": "C2", "L3": "L3", "RL": "RL"}}],
         "analysis": {"samples": 100, "seed": 77, "f_start": 1.0, "f_stop": 1e7, "points": 300,
                      "method": "sobol", "temperature_c": [-40, 85], "lot_share": 0.3},
         "mask": [{"quantity": "gain", "kind": "floor", "f1": 100, "f2": 1000, "limit1": -3, "relative": True},
                  {"quantity": "delay", "kind": "variation", "f1": 100, "f2": 1000, "limit1": 1e-3},
                  {"quantity": "phase", "kind": "ceiling", "f1": 10, "f2": 1e4, "limit1": 180}]}
    return design_from_dict(d)


_DETERMINISM_CASES = {"demo": (designfile.load_demo, 3000), "mixed": (_mixed_design, 2500)}


@pytest.mark.parametrize("case", sorted(_DETERMINISM_CASES))
def test_evaluation_is_deterministic_in_process_and_across_processes(case, tmp_path):
    """[INV] same design, seed and samples: identical arrays twice in this process, and the
    same sha256 of the arrays in fresh processes with different hash seeds."""
    make, samples = _DETERMINISM_CASES[case]
    design = make()
    a = evaluate(design, samples=samples, delay=True)
    b = evaluate(design, samples=samples, delay=True)
    for name in ("values", "freqs_hz", "gain_db", "phase_deg", "delay_s", "margins"):
        x, y = getattr(a, name), getattr(b, name)
        assert x.tobytes() == y.tobytes(), name
    assert sorted(a.metrics) == sorted(b.metrics)
    for k in a.metrics:
        assert a.metrics[k].tobytes() == b.metrics[k].tobytes(), k
    here = ensemble_hash(a)
    assert here == ensemble_hash(b)
    path = tmp_path / "design.json"
    save(design, path)
    assert load(path) == design
    for hash_seed in ("0", "4242"):
        env = {**os.environ, "PYTHONHASHSEED": hash_seed}
        out = subprocess.run([sys.executable, "-c", _CHILD_SRC, str(path), str(samples)],
                             capture_output=True, text=True, timeout=300, cwd=str(ROOT), env=env)
        assert out.returncode == 0, out.stderr
        assert out.stdout.strip() == here, (hash_seed, out.stderr)


def test_evaluation_does_not_depend_on_chunking_or_batches():
    """[INV] evaluate's documented promises: results do not depend on the chunking, and a
    run of N boards is a prefix of a run of more (same seed). Values are drawn identically;
    responses are compared to 1e-9 (the per-batch frequency scaling may differ in the last
    bits)."""
    design = _mixed_design()
    whole = evaluate(design, samples=1500, delay=True)
    chunked = evaluate(design, samples=1500, delay=True, chunk=97)
    prefix = evaluate(design, samples=500, delay=True)
    later = evaluate(design, samples=1000, start=500, delay=True)
    assert whole.values.tobytes() == chunked.values.tobytes()
    assert whole.values[:500].tobytes() == prefix.values.tobytes()
    assert whole.values[500:].tobytes() == later.values.tobytes()
    for other, rows in ((chunked, slice(None)), (prefix, slice(0, 500)), (later, slice(500, None))):
        np.testing.assert_allclose(other.gain_db, whole.gain_db[rows], rtol=1e-9, atol=1e-9)
        np.testing.assert_allclose(other.phase_deg, whole.phase_deg[rows], rtol=1e-9, atol=1e-9)
        for k in whole.metrics:
            np.testing.assert_allclose(other.metrics[k], whole.metrics[k][rows], rtol=1e-9, err_msg=k)


# --- property 3: random edits of a valid design file -----------------------------------------

DEMO = json.loads(designfile.demo_text())
_SPECIAL_TEXT = ["", " ", "4k7x", "4k7", "4.7k", "1e400", "-1e400", "nan", "inf", "-1", "0", "0.0",
                 "R", "k", "1meg", "10 k\u03a9", "\ud800", "\udfff", "\x00", "\u00e9", "\U0001f642",
                 "R-thick-1", "C-C0G-5", "EXACT", "OPAMP-GBW-50", "sallen_key_lowpass", "lc_lowpass",
                 "random", "sobol", "wilson", "exact", "gain", "phase", "delay", "floor", "ceiling",
                 "variation", FORMAT_TAG, "unity", "resistors", "series", "shunt", "R1", "C1"]
_SPECIAL_NUM = [0, -1, 1, 2, 3, 20, 2**31, 2**53 + 1, 2**63, 2**64, 10**308, 10**309, 10**400,
                -10**400, 0.0, -0.0, 0.5, 1e-320, 5e-324, 1.7976931348623157e308, math.nan,
                math.inf, -math.inf, 1e12, 1e13, 99.99999, 100, 0.9999, 60, 60.0000001]
_text = st.text(st.characters(exclude_categories=()), max_size=12)  # surrogates included
_scalars = st.one_of(st.none(), st.booleans(), st.integers(), st.floats(), st.sampled_from(_SPECIAL_NUM),
                     _text, st.sampled_from(_SPECIAL_TEXT))


def _nest(depth: int, kind: str):
    v: object = 1
    for _ in range(depth):
        v = [v] if kind == "list" else {"a": v}
    return v


json_values = st.one_of(
    st.sampled_from(_SPECIAL_NUM), st.sampled_from(_SPECIAL_TEXT),
    st.recursive(_scalars, lambda c: st.lists(c, max_size=4) | st.dictionaries(_text, c, max_size=4),
                 max_leaves=12),
    st.builds(_nest, st.integers(1, 60), st.sampled_from(["list", "dict"])),
)
_KEYS = st.one_of(_text, st.sampled_from(
    ["ref", "value", "grade", "tolerance_pct", "options", "parts", "topology", "name", "limit2",
     "quantity", "relative", "samples", "grades", "mask", "temperature_c", "kind", "f1", "f2",
     "limit1", "format", "version", "analysis", "stages", "U1", "RF", "RG", "gain", "order",
     "sections", "source", "load", "first", "truncate", "bin_inner_pct", "tolerance_pct"]))


def _paths(obj, prefix=()):
    yield prefix
    if isinstance(obj, dict):
        for k, v in obj.items():
            yield from _paths(v, prefix + (k,))
    elif isinstance(obj, list):
        for i, v in enumerate(obj):
            yield from _paths(v, prefix + (i,))


def _get(obj, path):
    for k in path:
        obj = obj[k]
    return obj


def _apply_edit(draw, doc):
    """One random edit: replace a value, delete a key or item, or add a key or item."""
    paths = list(_paths(doc))
    leaves = [p for p in paths if not isinstance(_get(doc, p), (dict, list))]
    pool = leaves if leaves and draw(st.integers(0, 3)) else paths  # mostly leaves
    path = draw(st.sampled_from(pool))
    op = draw(st.sampled_from(["replace", "delete", "add"]))
    if op == "replace" or (op == "delete" and not path):
        value = draw(json_values)
        if not path:
            return value
        _get(doc, path[:-1])[path[-1]] = value
    elif op == "delete":
        del _get(doc, path[:-1])[path[-1]]
    else:
        target = _get(doc, path)
        value = draw(json_values)
        if isinstance(target, dict):
            target[draw(_KEYS)] = value
        elif isinstance(target, list):
            target.insert(draw(st.integers(0, len(target))), value)
        elif path:
            _get(doc, path[:-1])[path[-1]] = value
        else:
            return value
    return doc


@st.composite
def edited_demo_texts(draw, max_edits: int = 4):
    """The demo's file text after 1..max_edits random edits (allow_nan: NaN and Infinity
    appear)."""
    doc = copy.deepcopy(DEMO)
    for _ in range(draw(st.integers(1, max_edits))):
        doc = _apply_edit(draw, doc)
    return json.dumps(doc, allow_nan=True)


def check_input_error(exc: InputError) -> None:
    """[INV] an error names what is wrong: every problem has a reason (and a text path)."""
    assert isinstance(exc.reason, str) and exc.reason.strip(), repr(exc)
    assert isinstance(exc.path, str)
    assert str(exc)
    if isinstance(exc, ValidationError):
        assert exc.problems, "a ValidationError with no problems"
        for p in exc.problems:
            assert isinstance(p, InputError)
            assert isinstance(p.reason, str) and p.reason.strip(), repr(p)
            assert isinstance(p.path, str)
            assert p.path or p.reason
        assert len(designfile.problems_text(exc)) == len(exc.problems)


def _only_input_errors(fn, *args, **kwargs):
    """Call ``fn``; return its result or the InputError; fail on any other exception."""
    try:
        return fn(*args, **kwargs)
    except InputError as exc:
        check_input_error(exc)
        return exc
    except KeyboardInterrupt:
        raise
    except BaseException:
        pytest.fail(f"{getattr(fn, '__name__', fn)} raised something other than InputError:\n"
                    f"{traceback.format_exc()}")


def test_random_edits_of_a_design_file_raise_only_input_errors():
    """[INV] edited demo files load or raise InputError/ValidationError, never any other
    exception; every problem has a reason and a text path."""
    seen: Counter = Counter()

    @_settings("random_edits")
    @given(edited_demo_texts())
    def run(text):
        got = _only_input_errors(loads, text)
        seen["error" if isinstance(got, InputError) else "design"] += 1
        assert isinstance(got, (Design, InputError))

    run()
    assert seen["error"] and seen["design"], seen  # both outcomes occur


def test_edited_files_that_load_also_save_reload_and_evaluate():
    """[INV] a design that loads from an edited file writes back (dumps, save), reloads
    equal, and evaluates or raises InputError: nothing a file may hold breaks later."""
    seen: Counter = Counter()
    folder = Path(tempfile.mkdtemp(prefix="tolspread-props-"))

    @_settings("random_edits_loaded")
    @given(edited_demo_texts(max_edits=1))  # one edit: more of them still load
    def run(text):
        try:
            got = loads(text)
        except InputError:
            return
        seen["design"] += 1
        again = _only_input_errors(loads, _only_input_errors(dumps, got))
        assert again == got, "a loaded design must reload equal from its own text"
        target = folder / "edited.json"
        _only_input_errors(save, got, target)
        assert _only_input_errors(load, target) == got
        _only_input_errors(evaluate, got, samples=20, curves=False)

    try:
        run()
    finally:
        for p in folder.iterdir():
            p.unlink()
        folder.rmdir()
    assert seen["design"] >= EXAMPLES["random_edits_loaded"] // 20, seen  # 54 of 600 today


@pytest.mark.parametrize("path, value", [
    (("parts", 0, "value"), 1e-320),                  # a subnormal resistance
    (("parts", 0, "value"), 1e200),
    (("parts", 3, "value"), 1e200),                   # a capacitor
    (("parts", 1, "value"), 1.7976931348623157e308),  # the largest float
    (("parts", 3, "value"), 1e-300),
    (("mask", 0, "limit1"), 2**31),                   # a floor of 2e9 dB
    (("mask", 3, "limit1"), -1e6),
], ids=["R=1e-320", "R=1e200", "C=1e200", "R=max-float", "C=1e-300", "limit=2^31dB", "limit=-1e6dB"])
def test_extreme_values_a_file_may_hold_evaluate_or_raise_input_error(path, value):
    """[INV] numbers a design file may hold (positive finite part values, finite limits):
    loading and evaluating give a finite result or InputError, never a numpy warning or
    another exception (found by the random edits above; kept as fixed cases)."""
    doc = copy.deepcopy(DEMO)
    _get(doc, path[:-1])[path[-1]] = value
    design = _only_input_errors(loads, json.dumps(doc))
    if isinstance(design, InputError):
        return
    ens = _only_input_errors(evaluate, design, samples=50)
    if not isinstance(ens, InputError):
        assert np.all(np.isfinite(ens.gain_db)) and np.all(np.isfinite(ens.phase_deg))
        assert not np.any(np.isnan(ens.margins))


@pytest.mark.parametrize("grade, analysis", [
    ({"name": "R-wide", "kind": "R", "tolerance_pct": 90, "coverage": 0.5, "truncate": False}, {}),
    ({"name": "R-wide", "kind": "R", "tolerance_pct": 1, "tempco_ppm": -1500},
     {"temperature_c": [25, 999]}),
], ids=["untruncated-normal", "tempco-at-999C"])
def test_valid_grades_sample_only_positive_part_values(grade, analysis):
    """[INV] a grade and temperature range are either refused at load (naming the field) or
    sample only part values above 0 (a resistance of -2 kohm has no meaning and its
    f0 = sqrt(negative) is NaN)."""
    from tolspread.sampling import draw_scores, part_values

    doc = copy.deepcopy(DEMO)
    doc["grades"] = [grade]
    doc["parts"][0]["grade"] = "R-wide"
    doc["analysis"].update(analysis)
    try:
        design = loads(json.dumps(doc))
    except InputError as exc:  # refused at load with the field named: also a valid answer
        assert exc.path
        return
    scores = draw_scores(1, len(design.parts), 0, 4000)
    values = part_values([p.value for p in design.parts], design.part_grades(), scores,
                         design.analysis.conditions)
    assert np.all(values > 0), (values.min(axis=0), np.sum(values <= 0, axis=0))


# --- property 4: random bytes ----------------------------------------------------------------

DEMO_BYTES = designfile.demo_text().encode("utf-8")


@st.composite
def mutated_demo_bytes(draw):
    b = bytearray(DEMO_BYTES)
    how = draw(st.sampled_from(["flip", "truncate", "insert", "splice"]))
    if how == "truncate":
        return bytes(b[:draw(st.integers(0, len(b)))])
    for _ in range(draw(st.integers(1, 8))):
        i = draw(st.integers(0, len(b) - 1))
        if how == "flip":
            b[i] = draw(st.integers(0, 255))
        elif how == "insert":
            b[i:i] = draw(st.binary(min_size=1, max_size=8))
        else:
            j = draw(st.integers(0, len(b) - 1))
            b[i:i] = b[j:j + draw(st.integers(1, 40))]
    return bytes(b)


random_bytes = st.one_of(
    st.binary(max_size=600), mutated_demo_bytes(),
    st.sampled_from([b"", b"\xef\xbb\xbf" + DEMO_BYTES, b"null", b"[]", b"{}", b'"x"', b"1" * 5000,
                     b"-" + b"9" * 4400, b'{"format": "tolspread-design", "version": ' + b"9" * 5000 + b"}",
                     b"[" * 100000, b'{"a":' * 50000, b"\x00" * 64, b'{"a": NaN}', b"\xff\xfe{\x00}\x00",
                     b'{"format": "tolspread-design", "version": 1e400}',
                     b'{"format": "tolspread-design", "version": 1, "name": "\\ud800"}']),
)


def test_random_bytes_raise_only_input_errors():
    """[INV] loads(bytes decoded with replacement) and load(file of the bytes) give a
    Design or InputError, nothing else."""
    folder = Path(tempfile.mkdtemp(prefix="tolspread-bytes-"))
    target = folder / "random.json"

    @_settings("random_bytes")
    @given(random_bytes)
    def run(raw):
        a = _only_input_errors(loads, raw.decode("utf-8", errors="replace"))
        target.write_bytes(raw)
        b = _only_input_errors(load, target)
        assert isinstance(a, (Design, InputError)) and isinstance(b, (Design, InputError))
        try:
            raw.decode("utf-8")
        except UnicodeDecodeError:
            assert isinstance(b, InputError)  # load refuses bytes that are not UTF-8
        else:
            assert type(a) is type(b)  # valid UTF-8: both read the same text

    try:
        run()
    finally:
        target.unlink(missing_ok=True)
        folder.rmdir()


@pytest.mark.parametrize("case", ["missing", "folder", "oversize", "not_utf8", "huge_int", "deep"])
def test_hostile_files_raise_input_error(case, tmp_path):
    """[INV] files that are missing, folders, too large, not UTF-8, with a number of more
    digits than Python converts, or nested 100000 deep: InputError naming the file."""
    p = tmp_path / "x.json"
    if case == "folder":
        p.mkdir()
    elif case == "oversize":
        p.write_bytes(b" " * (designfile.MAX_BYTES + 1))
    elif case == "not_utf8":
        p.write_bytes(b"\xff\xfe\x00{")
    elif case == "huge_int":
        p.write_text('{"format": "tolspread-design", "version": 1, "analysis": {"samples": '
                     + "7" * 5000 + "}}", encoding="utf-8")
    elif case == "deep":
        p.write_text("[" * 100000 + "]" * 100000, encoding="utf-8")
    got = _only_input_errors(load, p)
    assert isinstance(got, InputError)
    assert got.path  # names the file (or the field)


# --- property 5: value text round trips ------------------------------------------------------

@_settings("value_round_trip_1e-15_1e12")
@given(st.floats(min_value=1e-15, max_value=1e12))
def test_parse_format_round_trip_is_exact(x):
    """[INV] parse_value(format_value(x, digits=17)) == x, 1e-15..1e12."""
    assert parse_value(format_value(x, digits=17)) == x


@_settings("value_round_trip_negative")
@given(st.floats(min_value=-1e12, max_value=-1e-15))
def test_parse_format_round_trip_is_exact_for_negative_values(x):
    """[INV] the same for negative values (format_value writes the sign)."""
    assert parse_value(format_value(x, digits=17)) == x


@_settings("value_round_trip_full_range")
@given(st.floats(min_value=5e-324, max_value=1.7976931348623157e308))
def test_parse_format_round_trip_is_exact_over_all_positive_floats(x):
    """[INV] the same over every positive finite float, subnormals included."""
    assert parse_value(format_value(x, digits=17)) == x


def _decade_texts(series: str) -> list[str]:
    """Every value of ``series`` times 1, 10, 100 with every prefix f..T, as plain text."""
    mants, scale = _E_INT[series]
    out = []
    for m in mants:
        for j in range(3):
            s = format(Decimal(m).scaleb(j - scale), "f")
            s = s.rstrip("0").rstrip(".") if "." in s else s
            out += [s + pre for pre in ("f", "p", "n", "u", "m", "", "k", "M", "G", "T")]
    return out


@pytest.mark.parametrize("series", ["E24", "E96"])
def test_preferred_values_format_back_to_the_same_text(series):
    """[INV] format_value(parse_value(t)) == t for every E24/E96 value times every decade
    f..T (e.g. "4.7k"); and format_rkm writes codes that parse back to the same value."""
    texts = _decade_texts(series)
    assert len(texts) == len(_E_INT[series][0]) * 30 and "100T" in texts and "1f" in texts
    assert {"E24": "4.7k", "E96": "4.75k"}[series] in texts
    wrong = [(t, format_value(parse_value(t))) for t in texts if format_value(parse_value(t)) != t]
    assert not wrong, wrong[:10]
    for t in texts:
        v = parse_value(t)
        kinds = [k for k, (lo, hi) in RANGES.items() if k != "opamp" and lo <= v <= hi]
        for kind in kinds:
            assert parse_value(format_rkm(v, kind)) == v, (t, kind, format_rkm(v, kind))


# --- property 6: save and load round trips ---------------------------------------------------

def _round_trip(d: dict, folder: Path) -> None:
    design = design_from_dict(d)
    assert loads(json.dumps(d, ensure_ascii=False)) == design
    assert design_from_dict(designfile.design_to_dict(design)) == design
    target = folder / "design.json"
    save(design, target)
    back = load(target)
    assert back == design
    assert dumps(back) == dumps(design)
    assert target.read_text(encoding="utf-8") == dumps(design)
    save(back, target)  # saving over it keeps the previous text as .bak
    assert (folder / "design.json.bak").read_text(encoding="utf-8") == dumps(design)
    assert load(target) == design


def _round_trips(name: str, designs) -> None:
    """:func:`_round_trip` for every design dict the strategy ``designs`` draws (settings
    ``name``), in one temporary folder removed afterwards."""
    with tempfile.TemporaryDirectory(prefix="tolspread-rt-") as tmp:
        folder = Path(tmp)

        @_settings(name)
        @given(designs)
        def run(d):
            _round_trip(d, folder)

        run()


def test_random_designs_save_and_load_identically():
    """[INV] save, load: == original; dumps(load(x)) == dumps(x), text identical."""
    _round_trips("save_load_random_designs", design_dicts(own_grades=True, max_spans=4))


@st.composite
def demo_mutations(draw):
    """The demo with valid new values, grades and mask spans."""
    d = copy.deepcopy(DEMO)
    kinds = {p["ref"]: ("R" if p["ref"].startswith("R") else "C") for p in d["parts"]}
    for p in d["parts"]:
        kind = kinds[p["ref"]]
        if draw(st.booleans()):
            p["value"] = draw(value_entries(kind))
        if draw(st.booleans()):
            p["grade"] = draw(st.sampled_from(BUILTIN_GRADES[kind]))
    a = d["analysis"]
    for s in d["mask"]:
        if draw(st.booleans()):
            s.update(draw(spans(a["f_start"], a["f_stop"])))
            if s["quantity"] != "gain":
                s.pop("relative", None)
            if s["kind"] == "variation":
                s.pop("limit2", None)
    unique_span_labels(d["mask"])
    return d


def test_demo_mutations_save_and_load_identically():
    """[INV] the same round trip for the demo with changed values, grades and spans."""
    _round_trips("save_load_demo_mutations", demo_mutations())


# --- property 7: numerical extremes ----------------------------------------------------------

HALF_POWER_DB = 10 * math.log10(2)


def _rc_design(r: str, c: str, f_start: float, f_stop: float, cutoff_db: float) -> Design:
    return design_from_dict({
        "format": FORMAT_TAG, "version": VERSION,
        "parts": [{"ref": "R1", "value": r, "grade": "R-thick-1"}, {"ref": "C1", "value": c, "grade": "C-X7R-20"}],
        "stages": [{"topology": "rc_lowpass", "parts": {"R1": "R1", "C1": "C1"}}],
        "analysis": {"samples": 500, "seed": 3, "f_start": f_start, "f_stop": f_stop, "points": 400,
                     "cutoff_db": cutoff_db, "temperature_c": [-40, 125]}})


@pytest.mark.parametrize("r, c, f_start, f_stop", [
    ("1", "1", 1e-3, 1e5),           # fc ~ 0.16 Hz
    ("100M", "1p", 1.0, 1e8),        # fc ~ 1.6 kHz
    ("1", "1p", 1e7, 1e15),          # fc ~ 160 GHz
    ("100M", "1", 1e-12, 1e-4),      # fc ~ 1.6 nHz
])
@pytest.mark.parametrize("cutoff_db", [HALF_POWER_DB, 3.0])
def test_rc_extremes_cutoff_matches_closed_form(r, c, f_start, f_stop, cutoff_db):
    """[CF] first-order RC over an 8-decade grid: corner 1/(2 pi R C) per board, from its
    own sampled values, to 1e-9; at 3 dB the crossing is fc sqrt(10^0.3 - 1) = 0.99763 fc."""
    design = _rc_design(r, c, f_start, f_stop, cutoff_db)
    ens = evaluate(design, delay=True)
    check_ensemble(design, ens)
    scale = math.sqrt(10 ** (cutoff_db / 10) - 1)
    rv, cv = parse_value(r), parse_value(c)
    fc = 1 / (2 * math.pi * rv * cv)
    assert ens.nominal.metrics["cutoff_hz"] == pytest.approx(fc * scale, rel=1e-9)
    assert ens.nominal.metrics["s1.fc_hz"] == pytest.approx(fc, rel=1e-9)
    board_fc = 1 / (2 * math.pi * ens.values[:, 0] * ens.values[:, 1])
    np.testing.assert_allclose(ens.metrics["cutoff_hz"], board_fc * scale, rtol=1e-9)
    np.testing.assert_allclose(ens.metrics["s1.fc_hz"], board_fc, rtol=1e-9)
    # [CF] the whole nominal curve: |H|^2 = 1 / (1 + (f/fc)^2)
    expect = 1 / (1 + (ens.freqs_hz / fc) ** 2)
    np.testing.assert_allclose(ens.nominal.response.gain2[0], expect, rtol=1e-9)


def _butterworth_g(n: int) -> list[float]:
    return [2 * math.sin((2 * k - 1) * math.pi / (2 * n)) for k in range(1, n + 1)]


def _ladder_abcd_gain2(rs, rl, elements, freqs):
    """[IND] |Vout/Vin|^2 of a ladder by chain (ABCD) matrices in complex arithmetic:
    series RS, then the elements in order, loaded by RL."""
    s = 2j * np.pi * np.asarray(freqs)
    a, b, c, d = np.ones_like(s), np.full_like(s, rs), np.zeros_like(s), np.ones_like(s)
    for kind, v in elements:
        if kind == "L":  # series impedance sL: [[1, Z], [0, 1]]
            b = a * s * v + b
            d = c * s * v + d
        else:            # shunt admittance sC: [[1, 0], [Y, 1]]
            a = a + b * s * v
            c = c + d * s * v
    return np.abs(1 / (a + b / rl)) ** 2


def _ladder_design(rs, rl, elements, first, f_start, f_stop, cutoff_db=HALF_POWER_DB) -> Design:
    parts = [{"ref": "RS", "value": rs, "grade": "R-thin-0.1"}, {"ref": "RL", "value": rl, "grade": "R-thin-0.1"}]
    roles = {"RS": "RS", "RL": "RL"}
    for k, (kind, v) in enumerate(elements, 1):
        parts.append({"ref": f"{kind}{k}", "value": v, "grade": "L-2" if kind == "L" else "C-C0G-1"})
        roles[f"{kind}{k}"] = f"{kind}{k}"
    return design_from_dict({
        "format": FORMAT_TAG, "version": VERSION, "parts": parts,
        "stages": [{"topology": "lc_lowpass", "options": {"order": len(elements), "first": first},
                    "parts": roles}],
        "analysis": {"samples": 300, "seed": 9, "f_start": f_start, "f_stop": f_stop, "points": 400,
                     "cutoff_db": cutoff_db}})


@pytest.mark.parametrize("n", [2, 3, 4, 5])
@pytest.mark.parametrize("first", ["shunt", "series"])
@pytest.mark.parametrize("extreme", ["smallest L = 1 nH", "largest L = 10 H"])
def test_lc_butterworth_ladder_extremes(n, first, extreme):
    """[CF] doubly terminated Butterworth ladder scaled so its smallest inductor is 1 nH
    (10 ohm, GHz) or its largest 10 H (100 kohm, kHz), over 8 decades: |H|^2 and the
    half-power cutoff match the closed form to 1e-9, and the ABCD recomputation [IND]."""
    g = _butterworth_g(n)
    kinds = ["C" if (k % 2 == 1) == (first == "shunt") else "L" for k in range(1, n + 1)]
    g_l = [gk for gk, kind in zip(g, kinds) if kind == "L"]
    if extreme.startswith("smallest"):
        r0 = 10.0
        wc = min(g_l) * r0 / 1e-9
    else:
        r0 = 1e5
        wc = max(g_l) * r0 / 10.0
    elements = [(kind, gk * r0 / wc if kind == "L" else gk / (r0 * wc)) for gk, kind in zip(g, kinds)]
    ls = [v for kind, v in elements if kind == "L"]
    assert math.isclose(min(ls) if extreme.startswith("smallest") else max(ls),
                        1e-9 if extreme.startswith("smallest") else 10.0, rel_tol=1e-12)
    for kind, v in elements:
        lo, hi = RANGES[kind]
        assert lo * (1 - 1e-12) <= v <= hi * (1 + 1e-12)
    fc = wc / (2 * math.pi)
    design = _ladder_design(r0, r0, elements, first, fc * 1e-4, fc * 1e4)
    ens = evaluate(design, delay=True)
    check_ensemble(design, ens)
    f = ens.freqs_hz
    nominal = ens.nominal.response.gain2[0]
    np.testing.assert_allclose(nominal, 0.25 / (1 + (f / fc) ** (2 * n)), rtol=1e-9)
    np.testing.assert_allclose(nominal, _ladder_abcd_gain2(r0, r0, elements, f), rtol=1e-9)
    assert ens.nominal.metrics["reference_db"] == pytest.approx(10 * math.log10(0.25), abs=1e-9)
    assert ens.nominal.metrics["cutoff_hz"] == pytest.approx(fc, rel=1e-9)


@pytest.mark.parametrize("rs, l1, c2, l3, rl", [
    (1.0, 1e-9, 1.0, 10.0, 1e8),
    (1e8, 10.0, 1e-12, 1e-9, 1.0),
    (1.0, 1e-9, 1e-12, 1e-9, 1.0),
    (1e8, 10.0, 1.0, 10.0, 1e8),
])
def test_lc_ladder_mixed_extremes_match_abcd_and_scipy(rs, l1, c2, l3, rl):
    """Third-order series-first ladder with 1 nH / 10 H and 1 pF / 1 F, 1 ohm / 100 Mohm,
    8 decades around its natural frequency: finite [INV]; nominal |H|^2 matches the ABCD
    recomputation [IND] and scipy.signal.freqs of the polynomial from the same chain [SCIPY]."""
    elements = [("L", l1), ("C", c2), ("L", l3)]
    f_mid = 1 / (2 * math.pi * math.sqrt(max(l1, l3) * c2))
    design = _ladder_design(rs, rl, elements, "series", f_mid * 1e-4, f_mid * 1e4)
    try:
        ens = evaluate(design, delay=True)
    except InputError as exc:  # only a passband too weak to judge may be refused
        assert "passband" in exc.reason
        return
    check_ensemble(design, ens)
    f = ens.freqs_hz
    nominal = ens.nominal.response.gain2[0]
    np.testing.assert_allclose(nominal, _ladder_abcd_gain2(rs, rl, elements, f), rtol=1e-9)
    # H = RL / (A RL + B) with the chain's A, B as polynomials in s (descending powers)
    a, b = np.poly1d([1.0]), np.poly1d([rs])
    c, d = np.poly1d([0.0]), np.poly1d([1.0])
    for kind, v in elements:
        if kind == "L":
            b, d = a * np.poly1d([v, 0]) + b, c * np.poly1d([v, 0]) + d
        else:
            a, c = a + b * np.poly1d([v, 0]), c + d * np.poly1d([v, 0])
    den = (a * rl + b).coeffs
    _, h = signal.freqs([rl], den, worN=2 * np.pi * f)
    np.testing.assert_allclose(nominal, np.abs(h) ** 2, rtol=1e-7)
