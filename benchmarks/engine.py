"""Speed and memory figures quoted in README.md; run ``python benchmarks/engine.py``.

Not run by CI (timings are not tests). Each figure is the best of several repeats on
this machine; the per-sample loop is the same work done one board at a time with
``scipy.signal.freqs``, for comparison.
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


def best_of(fn, repeats: int = 5) -> float:
    fn()
    times = []
    for _ in range(repeats):
        t = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t)
    return min(times)


def loop_reference(design, samples: int, exact_cutoff: bool) -> float:
    """Magnitude (dB), continuous phase and the -3 dB cutoff per sample with
    scipy.signal.freqs in a loop over samples.

    ``exact_cutoff`` refines the cutoff by root finding on |H(jw)| (scipy.optimize.brentq),
    which is what the vectorized engine does; otherwise it is interpolated on the grid.
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

    t = time.perf_counter()
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
                def gap(lw: float) -> float:
                    return 20 * np.log10(abs(np.polyval(b, 1j * np.exp(lw)) / np.polyval(a, 1j * np.exp(lw)))) - level
                optimize.brentq(gap, np.log(w[i - 1]), np.log(w[i]), xtol=1e-12)
            else:
                np.interp(level, [mag[i], mag[i - 1]], [np.log(freqs[i]), np.log(freqs[i - 1])])
    return time.perf_counter() - t


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__)
    ap.add_argument("--quick", action="store_true", help="skip the 1,000,000-sample run")
    args = ap.parse_args()
    design = load_demo()
    n = 10_000
    freqs = frequency_grid(design)
    print(f"demo design: {len(design.parts)} parts, {len(design.stages)} stages, {freqs.size} frequencies")
    t_vec = best_of(lambda: evaluate(design, samples=n, curves=True, phase=True))
    print(f"engine: magnitude + phase + cutoff, {n} samples x {freqs.size} freqs: {t_vec * 1e3:.1f} ms")
    t_loop = loop_reference(design, n, exact_cutoff=True)
    print(f"per-sample scipy.signal.freqs loop, same work (cutoff by root finding): {t_loop * 1e3:.0f} ms"
          f"  -> engine {t_loop / t_vec:.0f} x faster")
    t_grid = loop_reference(design, n, exact_cutoff=False)
    print(f"per-sample loop with the cutoff only interpolated on the grid:          {t_grid * 1e3:.0f} ms"
          f"  -> engine {t_grid / t_vec:.0f} x faster")
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


if __name__ == "__main__":
    sys.exit(main())
