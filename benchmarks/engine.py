"""Speed and memory figures quoted in README.md; run ``python benchmarks/engine.py``.

Not run by CI (timings are not tests). Timings are repeated after a warm-up and printed
as best and median, because a shared machine's timings scatter; the per-sample loop is
the same work done one board at a time with ``scipy.signal.freqs``, for comparison, and
the ratio is taken median to median.
"""
from __future__ import annotations

import argparse
import resource
import sys
import time
import tracemalloc

import numpy as np
from scipy import optimize, signal

from filters.designfile import load_demo
from filters.engine import compile_design, stage_coefficients
from filters.evaluate import evaluate, frequency_grid


def timings(fn, repeats: int = 15, warmup: int = 2) -> tuple[float, float]:
    """(best, median) wall time in s of ``fn()`` over ``repeats`` runs after ``warmup``."""
    for _ in range(warmup):
        fn()
    times = []
    for _ in range(repeats):
        t = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t)
    times.sort()
    return times[0], times[len(times) // 2]


def ms(pair: tuple[float, float]) -> str:
    return f"best {pair[0] * 1e3:.1f} ms, median {pair[1] * 1e3:.1f} ms"


def loop_reference(design, samples: int, exact_cutoff: bool, repeats: int = 3) -> tuple[float, float]:
    """Magnitude (dB), continuous phase and the -3 dB cutoff per sample with
    scipy.signal.freqs in a loop over samples.

    ``exact_cutoff`` refines the cutoff by root finding on |H(jw)| (scipy.optimize.brentq),
    which is what the vectorized engine does; otherwise it is interpolated on the grid.
    Returns (best, median) in s over ``repeats`` runs.
    """
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

    return timings(run, repeats, warmup=0)


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__)
    ap.add_argument("--quick", action="store_true", help="skip the 1,000,000-sample run")
    ap.add_argument("--no-gui", action="store_true", help="skip the window latency figure")
    args = ap.parse_args()
    design = load_demo()
    n = 10_000
    freqs = frequency_grid(design)
    print(f"demo design: {len(design.parts)} parts, {len(design.stages)} stages, {freqs.size} frequencies")
    from dataclasses import replace as dc_replace

    bare = dc_replace(design, mask=())  # the loop below does no judging either
    t_vec = timings(lambda: evaluate(bare, samples=n, curves=True, phase=True))
    print(f"engine: sampling + magnitude (dB) + phase + cutoff + stage f0/Q, {n} samples x "
          f"{freqs.size} freqs: {ms(t_vec)}")
    t_loop = loop_reference(design, n, exact_cutoff=True)
    print(f"per-sample scipy.signal.freqs loop, same work (cutoff by root finding): {ms(t_loop)}"
          f"  -> engine {t_loop[1] / t_vec[1]:.0f} x faster (medians)")
    t_grid = loop_reference(design, n, exact_cutoff=False)
    print(f"per-sample loop with the cutoff only interpolated on the grid: {ms(t_grid)}"
          f"  -> engine {t_grid[1] / t_vec[1]:.0f} x faster (medians)")
    t_y = yield_pipeline(design, n)
    print(f"sampling + response + judging + yield, {n} samples x {freqs.size} freqs: {ms(t_y)}")
    if not args.no_gui:
        drag, release = slider_latency()
        for name, ts in (("while dragging (preview on the first 1000 boards)", drag),
                         ("on release (all 5000 boards)", release)):
            print(f"window, 5000-board design: slider to redrawn plots and yield {name}: "
                  f"median {ts[len(ts) // 2] * 1e3:.0f} ms, worst {ts[-1] * 1e3:.0f} ms")
    if not args.quick:
        big = 1_000_000
        tracemalloc.start()
        t = time.perf_counter()
        evaluate(design, samples=big, curves=False)
        elapsed = time.perf_counter() - t
        _, peak = tracemalloc.get_traced_memory()
        tracemalloc.stop()
        rss = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
        print(f"{big} samples in chunks, metrics only: {elapsed:.1f} s, "
              f"peak traced numpy/Python memory {peak / 2**20:.0f} MiB (process peak RSS {rss:.0f} MiB)")
    return 0



def yield_pipeline(design, samples: int) -> tuple[float, float]:
    """Sampling + response + judging + yield for ``samples`` boards (curves kept)."""
    from filters.evaluate import prepare
    from filters.stats import yield_estimate

    prep = prepare(design)

    def run() -> None:
        ens = evaluate(design, samples=samples, curves=True, phase=False, prepared=prep)
        yield_estimate(ens.passed)

    return timings(run)


def slider_latency(samples: int = 5000, moves: int = 15) -> tuple[list[float], list[float]]:
    """Times (s) from a tolerance-slider move to the redrawn window: while dragging (the
    preview on the first boards) and on release (every board), for a design of
    ``samples`` boards. The clock stops after the window has drawn the new result."""
    import os

    os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
    from dataclasses import replace as dc_replace

    from PySide6.QtCore import QEventLoop
    from PySide6.QtWidgets import QApplication

    from app.qt_main import make_window

    app = QApplication.instance() or QApplication([])
    window = make_window(None)
    d = window.session.design
    window.session.replace_design(dc_replace(d, analysis=dc_replace(d.analysis, samples=samples)), None)
    window.resize(1600, 950)
    window.show()
    window.session.evaluate_now()
    app.processEvents()
    loop = QEventLoop()
    window.session.view_ready.connect(lambda _v: loop.quit())  # runs after the window has drawn
    row = window.parts.rows["C2"]
    drag, release = [], []
    for k in range(moves):
        t0 = time.perf_counter()
        row.slider.setSliderDown(True)
        row.slider.setValue(600 + 10 * (k % 20))
        loop.exec()  # wait in the event loop, as the window does
        window.plots.canvas.viewport().repaint()
        window.results.repaint()
        drag.append(time.perf_counter() - t0)
        t0 = time.perf_counter()
        row.slider.setSliderDown(False)
        row.slider.sliderReleased.emit()
        loop.exec()
        window.plots.canvas.viewport().repaint()
        window.results.repaint()
        release.append(time.perf_counter() - t0)
    window.session.undo_stack.setClean()
    window.close()
    return sorted(drag), sorted(release)

if __name__ == "__main__":
    sys.exit(main())
