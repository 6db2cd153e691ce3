"""Speed and memory figures quoted in README.md; run ``python benchmarks/engine.py``.

Not run by CI (timings are not tests). Each figure is repeated after a warm-up and
printed as the median wall time and the median CPU time (all threads of the process,
``time.process_time``); a shared machine's wall times scatter, CPU times much less, so
ratios are given for both. Compared figures are measured side by side in the same run,
interleaved. The per-sample loop is the same work done one board at a time with
``scipy.signal.freqs``, for comparison; each engine round beside it is timed after one
untimed engine call (a second of the loop leaves the caches cold and the threads asleep,
which the engine's first call after it pays: 112 ms instead of 23 on the idle machine).

Issue 13's workload is "the demo at 25 °C": the demo with its operating range and service
life removed (as the demo was when the issue was filed). The demo over its range (judged
at -40, 25 and 85 °C) has rows of its own.

``--quick`` skips the runs of 1,000,000 boards, ``--no-gui`` the window, ``--only GROUP``
prints one group of figures. ``--compare REV`` times git revision ``REV``'s engine against
the work tree's (``REV`` exported with ``git archive``, never checked out), alternating
child processes old, new, old, new ... (``--rounds``), so both share the machine's load
alike and each has its own memory settings: medians of wall and CPU time per workload.
"""
from __future__ import annotations

import argparse
import json
import math
import os
import resource
import subprocess
import sys
import time
from dataclasses import dataclass
from dataclasses import replace as dc_replace
from pathlib import Path

import numpy as np
from scipy import optimize, signal

ROOT = Path(__file__).resolve().parents[1]
if str(ROOT) not in sys.path:
    sys.path.insert(0, str(ROOT))

from tolspread.design import design_from_dict  # noqa: E402
from tolspread.designfile import load, load_demo  # noqa: E402
from tolspread.engine import compile_design, stage_coefficients  # noqa: E402
from tolspread.evaluate import evaluate, frequency_grid, prepare  # noqa: E402

# the tolspread program's own memory setting, made at its start (an older revision under
# --compare may not have it)
getattr(__import__("tolspread.evaluate", fromlist=["x"]), "reuse_freed_memory", lambda: False)()

EXAMPLE = ROOT / "assets" / "examples" / "ultrasonic_bandpass.json"
AT_25C = "the demo at 25 °C"  # issue 13's workload: see demo_at_25c()
OVER_RANGE = "the demo over its range"


def demo_at_25c():
    """The demo with its operating range and service life removed: judged at 25 °C only,
    the workload of issue 13 as filed."""
    return load_demo().with_analysis(operating_range_c=None, judge_at_c=(), service_hours=0.0)


def demo_over_range():
    """The demo as shipped, judged over its operating range (-40, 25 and 85 °C) and after
    its service life."""
    return load_demo()


@dataclass
class Timing:
    """Medians over the repeats: ``wall`` and ``cpu`` (s); ``best`` wall (s)."""

    best: float
    wall: float
    cpu: float

    def text(self) -> str:
        return f"median {self.wall * 1e3:.1f} ms wall (best {self.best * 1e3:.1f}), {self.cpu * 1e3:.1f} ms CPU"


def side_by_side(fns: list, repeats: int = 15, warmup: int = 2, settle: tuple[int, ...] = (),
                 raw: bool = False) -> list:
    """Time each of ``fns`` ``repeats`` times, interleaved (one of each per round); the
    ``settle`` ones (indexes) are called once, untimed, right before each timed call.
    Returns a :class:`Timing` each, or with ``raw`` {"wall": [...], "cpu": [...]} (s)."""
    for fn in fns:
        for _ in range(warmup):
            fn()
    walls: list[list[float]] = [[] for _ in fns]
    cpus: list[list[float]] = [[] for _ in fns]
    for _ in range(repeats):
        for k, fn in enumerate(fns):
            if k in settle:
                fn()
            c, t = time.process_time(), time.perf_counter()
            fn()
            walls[k].append(time.perf_counter() - t)
            cpus[k].append(time.process_time() - c)
    if raw:
        return [{"wall": w, "cpu": c} for w, c in zip(walls, cpus)]
    return [Timing(min(w), float(np.median(w)), float(np.median(c))) for w, c in zip(walls, cpus)]


def ratio(slow: Timing, fast: Timing) -> str:
    return f"{slow.wall / fast.wall:.1f} x wall, {slow.cpu / fast.cpu:.1f} x CPU"


# --- the per-sample loop --------------------------------------------------------------------

def loop_reference(design, samples: int, exact_cutoff: bool):
    """A function doing magnitude (dB), continuous phase and the -3 dB cutoff per sample with
    scipy.signal.freqs in a loop over samples; ``exact_cutoff`` refines the cutoff by root
    finding on |H(jw)| (scipy.optimize.brentq), as the engine does, else it is
    interpolated on the grid."""
    ens = evaluate(design, samples=samples, curves=False)
    circuit = compile_design(design)
    coeffs = stage_coefficients(circuit, ens.values)
    num = den = None
    for c in coeffs:
        n, d = c.unscaled()
        num = n if num is None else np.array([np.polymul(a[::-1], b[::-1])[::-1] for a, b in zip(num, n)])
        den = d if den is None else np.array([np.polymul(a[::-1], b[::-1])[::-1] for a, b in zip(den, d)])
    freqs = frequency_grid(design)
    w = 2 * np.pi * freqs

    def run() -> None:
        for k in range(samples):
            b, a = num[k][::-1], den[k][::-1]
            _, h = signal.freqs(b, a, worN=w)
            mag = 20 * np.log10(np.abs(h))
            np.unwrap(np.angle(h))
            level = mag[0] - 3.0
            below = np.flatnonzero(mag < level)
            if below.size:
                i = below[0]
                if exact_cutoff:
                    def gap(lw: float, b=b, a=a, level=level) -> float:
                        s = 1j * np.exp(lw)
                        return 20 * np.log10(abs(np.polyval(b, s) / np.polyval(a, s))) - level
                    optimize.brentq(gap, np.log(w[i - 1]), np.log(w[i]), xtol=1e-12)
                else:
                    np.interp(level, [mag[i], mag[i - 1]], [np.log(freqs[i]), np.log(freqs[i - 1])])

    return run


# --- designs for the scaling table -------------------------------------------------------------

def _design(parts, stages, fc: float, f_stop: float = 1e5, stop_factor: float = 4.0):
    """A design of the given parts ([(ref, value, grade)]) and stages, with a passband floor
    up to fc / 4 and a stopband ceiling from ``stop_factor`` x fc, both relative to the
    passband (invented figures for timing)."""
    return design_from_dict({
        "format": "tolspread-design", "version": 2,
        "parts": [{"ref": r, "value": v, "grade": g} for r, v, g in parts],
        "stages": stages,
        "mask": [{"kind": "floor", "f1": 10.0, "f2": fc / 4, "limit1": -3.0, "relative": True},
                 {"kind": "ceiling", "f1": stop_factor * fc, "f2": f_stop, "limit1": -20.0, "relative": True}],
        "analysis": {"f_start": 10.0, "f_stop": f_stop, "points": 400}})


def cascade_12th_order(fc: float = 1e3):
    """Twelve poles: six unity-gain Sallen-Key sections with Butterworth Qs,
    Q_k = 1 / (2 sin((2k - 1) pi / 24)), R1 = R2 = 10 kOhm."""
    parts, stages = [], []
    for k in range(1, 7):
        q = 1 / (2 * math.sin((2 * k - 1) * math.pi / 24))
        c0 = 1 / (2 * math.pi * 10e3 * fc)
        refs = {"R1": f"R{2 * k - 1}", "R2": f"R{2 * k}", "C1": f"C{2 * k - 1}", "C2": f"C{2 * k}"}
        parts += [(refs["R1"], 10e3, "R-thick-1"), (refs["R2"], 10e3, "R-thick-1"),
                  (refs["C1"], c0 * 2 * q, "C-C0G-5"), (refs["C2"], c0 / (2 * q), "C-C0G-5")]
        stages.append({"topology": "sallen_key_lowpass", "options": {}, "parts": refs})
    return _design(parts, stages, fc)


def lc_ladder_5th_order(fc: float = 1e3, r0: float = 50.0):
    """A doubly terminated Butterworth LC ladder, shunt C first, g_k = 2 sin((2k - 1) pi / 10)."""
    wc = 2 * math.pi * fc
    parts = [("RS", r0, "R-thick-1"), ("RL", r0, "R-thick-1")]
    roles = {"RS": "RS", "RL": "RL"}
    for k in range(1, 6):
        g = 2 * math.sin((2 * k - 1) * math.pi / 10)
        ref = f"C{k}" if k % 2 else f"L{k}"
        parts.append((ref, g / (r0 * wc) if k % 2 else g * r0 / wc, "C-C0G-5" if k % 2 else "L-5"))
        roles[ref] = ref
    return _design(parts, [{"topology": "lc_lowpass", "options": {"order": 5, "first": "shunt"},
                            "parts": roles}], fc)


def rc_ladder_4_sections():
    """Four RC low-pass sections in one passive ladder (R_k = 1 kOhm (1 + 0.7k),
    C_k = 100 nF / (1 + 0.3k))."""
    parts, roles = [], {}
    for k in range(1, 5):
        parts += [(f"R{k}", 1e3 * (1 + 0.7 * k), "R-thick-1"), (f"C{k}", 100e-9 / (1 + 0.3 * k), "C-C0G-5")]
        roles.update({f"R{k}": f"R{k}", f"C{k}": f"C{k}"})
    return _design(parts, [{"topology": "rc_lowpass", "options": {"sections": 4}, "parts": roles}], 150.0, stop_factor=10.0)


def scaling_designs() -> list[tuple[str, object]]:
    return [("demo at 25 °C (4th order, 2 Sallen-Key)", demo_at_25c()),
            ("12th-order cascade (6 Sallen-Key)", cascade_12th_order()),
            ("5th-order LC ladder", lc_ladder_5th_order()),
            ("4-section RC ladder", rc_ladder_4_sections()),
            ("band-pass example (2 MFB, op-amp GBW)", load(str(EXAMPLE)))]


def order_of(design) -> int:
    """Total denominator degree of the design's H(s) (poles)."""
    circuit = compile_design(design)
    return sum(st.tf.den_degree for st in circuit.stages)


# --- the figures --------------------------------------------------------------------------------

def engine_vs_loop(design, n: int) -> None:
    freqs = frequency_grid(design)
    bare = dc_replace(design, mask=())  # the loop does no judging either
    prep = prepare(bare)
    loop_exact = loop_reference(design, n, exact_cutoff=True)
    loop_grid = loop_reference(design, n, exact_cutoff=False)

    def vec() -> None:
        evaluate(bare, samples=n, curves=True, phase=True, prepared=prep)

    # each engine round after one untimed engine call: the loop's second before it leaves the
    # caches cold and the pool's threads asleep, which is not the engine's own cost
    t_vec, t_loop = side_by_side([vec, loop_exact], repeats=5, warmup=1, settle=(0,))
    t_vec2, t_grid = side_by_side([vec, loop_grid], repeats=3, warmup=0, settle=(0,))
    print(f"full evaluation of {AT_25C} (sampling, gain dB, phase, cutoff, stage f0/Q), {n:,} boards x "
          f"{freqs.size} freqs: {t_vec.text()} (interleaved with the loop, each round after one untimed "
          f"engine call)")
    print(f"  per-sample scipy.signal.freqs loop, same work (cutoff by root finding): {t_loop.text()}"
          f"  -> engine {ratio(t_loop, t_vec)} faster")
    print(f"  per-sample loop with the cutoff only interpolated on the grid: {t_grid.text()}"
          f"  -> engine {ratio(t_grid, t_vec2)} faster")
    t_many = side_by_side([vec], repeats=21)[0]
    print(f"  full evaluation alone, 21 repeats: {t_many.text()}  -> the exact loop is {ratio(t_loop, t_many)} "
          f"this")


def pass_fail_vs_full(design, n: int) -> None:
    prep = prepare(design)
    full, metrics_only, fast = side_by_side([
        lambda: evaluate(design, samples=n, curves=True, phase=True, prepared=prep),
        lambda: evaluate(design, samples=n, curves=False, prepared=prep),
        lambda: evaluate(design, samples=n, curves=False, metrics=False, prepared=prep)], repeats=21)
    print(f"judged {AT_25C}, {n:,} boards: full evaluation (curves, phase, every metric, margins): "
          f"{full.text()}")
    print(f"  metrics and margins, no curves (analyze): {metrics_only.text()}")
    print(f"  pass/fail and margins only (recommend): {fast.text()}  -> {ratio(full, fast)} faster than "
          f"the full evaluation, {ratio(metrics_only, fast)} faster than metrics without curves")


def over_range(n: int) -> None:
    """The demo over its range: the full evaluation with the boards judged at each judged
    temperature too (metrics at each, as analyze does), and pass/fail over the range (what
    recommend reads)."""
    from tolspread.temperature import judge_over_range, judged_ensemble, judged_temperatures

    design = demo_over_range()
    temps = judged_temperatures(design.analysis)
    prep = prepare(design)

    def full() -> None:
        ens = evaluate(design, samples=n, curves=True, phase=True, prepared=prep)
        judge_over_range(design, prep, ens)

    def pass_fail() -> None:
        ens = evaluate(design, samples=n, curves=False, metrics=False, prepared=prep)
        judged_ensemble(design, prep, ens)

    t_full, t_fast = side_by_side([full, pass_fail], repeats=9, warmup=1)
    where = ", ".join(f"{t:g}" for t in temps) or "no range in the demo file"
    print(f"{OVER_RANGE} (judged at {where} °C), {n:,} boards: full evaluation (curves, phase, every "
          f"metric) and judged at each temperature (metrics at each): {t_full.text()}")
    print(f"  pass/fail and margins over the range (recommend): {t_fast.text()}  -> {ratio(t_full, t_fast)} "
          f"faster")


def recommend_times() -> None:
    from tolspread.recommend import recommend

    for name, design, target in ((AT_25C, demo_at_25c(), 0.99), (AT_25C, demo_at_25c(), 0.95),
                                 (EXAMPLE.name, load(str(EXAMPLE)), 0.85),
                                 (OVER_RANGE, demo_over_range(), 0.99)):
        c, t = time.process_time(), time.perf_counter()
        r = recommend(design, target)
        wall, cpu = time.perf_counter() - t, time.process_time() - c
        print(f"recommend {name} at {target}: {wall:.2f} s wall, {cpu:.2f} s CPU, {r.evaluations} sets "
              f"evaluated ({design.analysis.samples:,} boards each), chosen {'yes' if r.chosen else 'no'}")


def million(design_name: str = "demo", samples: int = 1_000_000) -> None:
    """Run in a child process: elapsed time and the process's peak RSS for ``samples``
    boards, metrics and margins only (no curves)."""
    design = demo_at_25c() if design_name == "demo" else load(design_name)
    c, t = time.process_time(), time.perf_counter()
    ens = evaluate(design, samples=samples, curves=False)
    wall, cpu = time.perf_counter() - t, time.process_time() - c
    rss = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    print(json.dumps({"wall": wall, "cpu": cpu, "rss_mib": rss, "passed": int(ens.passed.sum())}))


def million_in_child(samples: int = 1_000_000) -> dict:
    out = subprocess.run([sys.executable, __file__, "--child-million", str(samples)], capture_output=True,
                         text=True, check=True)
    return json.loads(out.stdout.strip().splitlines()[-1])


def scaling_table(sizes: list[int]) -> None:
    print("scaling: metrics and margins, no curves (evaluate(curves=False)); CPU ns per board x frequency "
          "(wall ns in parentheses), and at 10,000 boards the CPU ns per board x frequency x section "
          "(section = 2 poles, rounded up) against the demo's")
    print(f"  {'design':40s} {'poles':>5s} {'freqs':>5s} " + " ".join(f"{n:>15,d}" for n in sizes)
          + "   per section at 10,000")
    demo_per_section = None
    for name, design in scaling_designs():
        prep = prepare(design)
        f = prep.freqs_hz.size
        poles = order_of(design)
        sections = math.ceil(poles / 2)
        cells = []
        tail = ""
        for n in sizes:
            reps = 7 if n <= 10_000 else (3 if n <= 100_000 else 1)
            t = side_by_side([lambda: evaluate(design, samples=n, curves=False, prepared=prep)],
                             repeats=reps, warmup=1 if n < 1_000_000 else 0)[0]
            cells.append(f"{t.cpu / (n * f) * 1e9:6.1f} ({t.wall / (n * f) * 1e9:5.1f})")
            if n == 10_000:
                per_section = t.cpu / (n * f * sections) * 1e9
                demo_per_section = demo_per_section or per_section
                tail = f"   {per_section:5.2f} ns, {per_section / demo_per_section:.2f} x the demo's"
        print(f"  {name:40s} {poles:5d} {f:5d} " + " ".join(f"{c:>15s}" for c in cells) + tail)


def engine_workloads(n: int = 10_000, repeats: int = 9) -> dict:
    """Run in a child process (``--compare``): each engine workload ``repeats`` times,
    interleaved, after a warm-up; name -> {"wall": [...], "cpu": [...]} (s) and the
    package's path."""
    import tolspread

    design, over = demo_at_25c(), demo_over_range()
    prep, prep_over, bare = prepare(design), prepare(over), dc_replace(design, mask=())
    prep_bare = prepare(bare)

    def over_full() -> None:
        from tolspread.temperature import judge_over_range

        judge_over_range(over, prep_over, evaluate(over, samples=n, curves=True, phase=True, prepared=prep_over))

    def over_pass_fail() -> None:
        from tolspread.temperature import judged_ensemble

        judged_ensemble(over, prep_over, evaluate(over, samples=n, curves=False, metrics=False, prepared=prep_over))

    work = {
        "full evaluation (curves, phase, every metric, margins)":
            lambda: evaluate(design, samples=n, curves=True, phase=True, prepared=prep),
        "the loop's work (full evaluation, no mask)":
            lambda: evaluate(bare, samples=n, curves=True, phase=True, prepared=prep_bare),
        "metrics and margins, no curves": lambda: evaluate(design, samples=n, curves=False, prepared=prep),
        "pass/fail and margins only": lambda: evaluate(design, samples=n, curves=False, metrics=False, prepared=prep),
        "over the range: full, judged at each temperature": over_full,
        "over the range: pass/fail": over_pass_fail,
    }
    times = side_by_side(list(work.values()), repeats=repeats, warmup=2, raw=True)
    return {"package": tolspread.__file__, "times": dict(zip(work, times))}


def compare(rev: str, rounds: int) -> None:
    """Revision ``rev``'s engine against the work tree's, alternating child processes."""
    import statistics
    import tempfile

    from window import _export  # benchmarks/window.py: a revision as an importable package

    got: dict = {"old": {}, "new": {}}
    with tempfile.TemporaryDirectory(prefix="tolspread-old-") as tmp:
        old_path = str(_export(rev, Path(tmp)))
        for _ in range(rounds):
            for which, path in (("old", old_path), ("new", None)):
                env = dict(os.environ, PYTHONPATH=path) if path else None
                out = subprocess.run([sys.executable, __file__, "--child-engine"], env=env, check=True,
                                     capture_output=True, text=True, cwd=str(ROOT))
                res = json.loads(out.stdout.strip().splitlines()[-1])
                if (which == "old") != res["package"].startswith(old_path):
                    raise RuntimeError(f"the {which} child imported {res['package']}")
                for name, t in res["times"].items():
                    for key in ("wall", "cpu"):
                        got[which].setdefault(name, {}).setdefault(key, []).extend(t[key])
    print(f"{AT_25C} and {OVER_RANGE}, 10,000 boards, {rev} against the work tree, {rounds} alternating "
          f"child processes each: medians of wall / CPU time (ms)")
    med = {w: {name: {k: statistics.median(v) * 1e3 for k, v in t.items()} for name, t in got[w].items()}
           for w in got}
    for name in med["new"]:
        o, n = med["old"][name], med["new"][name]
        print(f"  {name:50s} {rev}: {o['wall']:7.1f} / {o['cpu']:7.1f}   work tree: {n['wall']:7.1f} / "
              f"{n['cpu']:7.1f}   ({o['wall'] / n['wall']:.2f} x wall, {o['cpu'] / n['cpu']:.2f} x CPU)")
    for w, label in (("old", rev), ("new", "work tree")):
        full, fast = med[w]["full evaluation (curves, phase, every metric, margins)"], \
            med[w]["pass/fail and margins only"]
        print(f"  {label}: pass/fail {full['wall'] / fast['wall']:.2f} x wall, {full['cpu'] / fast['cpu']:.2f} x CPU "
              f"faster than the full evaluation")


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__)
    ap.add_argument("--quick", action="store_true", help="skip the 1,000,000-board runs")
    ap.add_argument("--no-gui", action="store_true", help="skip the window latency figure")
    ap.add_argument("--only", choices=("loop", "passfail", "range", "recommend", "window", "million", "scaling"),
                    help="print only this group of figures")
    ap.add_argument("--child-million", type=int, help=argparse.SUPPRESS)
    ap.add_argument("--child-engine", action="store_true", help=argparse.SUPPRESS)
    ap.add_argument("--compare", metavar="REV", help="time git revision REV's engine against the work tree")
    ap.add_argument("--rounds", type=int, default=4, help="alternations old/new with --compare")
    args = ap.parse_args()
    if args.child_million:
        million("demo", args.child_million)
        return 0
    if args.child_engine:
        print(json.dumps(engine_workloads()))
        return 0
    if args.compare:
        compare(args.compare, args.rounds)
        return 0
    design = demo_at_25c()
    n = 10_000
    freqs = frequency_grid(design)

    def want(group: str) -> bool:
        return args.only in (None, group)

    print(f"{AT_25C} (range and service life removed): {len(design.parts)} parts, {len(design.stages)} "
          f"stages, {freqs.size} frequencies")
    if want("loop"):
        engine_vs_loop(design, n)
    if want("passfail"):
        pass_fail_vs_full(design, n)
    if want("range"):
        over_range(n)
    if want("recommend"):
        recommend_times()
    if want("window") and not args.no_gui:
        from window import report as window_report  # benchmarks/window.py, beside this file

        window_report()
    if want("million") and not args.quick:
        r = million_in_child()
        print(f"1,000,000 boards of {AT_25C}, metrics and margins only, in chunks (own process): "
              f"{r['wall']:.2f} s wall, {r['cpu']:.2f} s CPU, peak RSS {r['rss_mib']:.0f} MiB")
    if want("scaling"):
        scaling_table([1_000, 10_000, 100_000] + ([] if args.quick else [1_000_000]))
    return 0


if __name__ == "__main__":
    sys.exit(main())
