"""Speed of circuit stages, quoted in README.md; run ``python benchmarks/circuit.py``.

Not run by CI (timings are not tests).

1. Deriving a circuit of 10 nodes besides ground (in and out counted) and 3 op-amps: in a
   fresh process with an empty derivation cache (sympy's polynomial module imported on the
   way), then in a second process that reads the derivation cache (no sympy).
2. Evaluating a 4th-order low-pass on the same 400-point grid, 10,000 boards, full
   evaluation (metrics and margins): the library cascade of two Sallen-Key stages, the same
   two sections entered as two circuit stages, and as one circuit stage of both (one
   4th-order network), with ideal and with 10 MHz op-amps, timed side by side (``benchmarks/engine.py``'s
   ``side_by_side``: medians of interleaved repeats, wall and CPU time).
"""
from __future__ import annotations

import json
import os
import subprocess
import sys
import tempfile
from pathlib import Path

from engine import ratio, side_by_side  # benchmarks/engine.py, beside this file

from tolspread.designfile import loads
from tolspread.evaluate import evaluate

GRADES = {"R": "R-thin-0.5", "C": "C-C0G-2", "U": "OPAMP-GBW-30"}

STATE_VARIABLE = {  # two RC sections ahead of a three-op-amp state-variable band-pass
    "elements": [("RA", "in", "a1"), ("CA", "a1", "0"), ("RB", "a1", "a2"), ("CB", "a2", "0"),
                 ("R1", "a2", "m1"), ("R2", "hp", "m1"), ("R3", "out", "p1"), ("R4", "p1", "0"),
                 ("R5", "hp", "m2"), ("C1", "m2", "out"), ("R6", "out", "m3"), ("C2", "m3", "lp"),
                 ("R7", "lp", "m1")],
    "opamps": [("U1", "p1", "m1", "hp"), ("U2", "0", "m2", "out"), ("U3", "0", "m3", "lp")],
    "values": {"RA": "1k", "CA": "10n", "RB": "1k", "CB": "10n", "R1": "10k", "R2": "10k", "R3": "10k",
               "R4": "3k3", "R5": "16k", "C1": "1n", "R6": "16k", "C2": "1n", "R7": "10k",
               "U1": "10M", "U2": "10M", "U3": "10M"},
}


def design_text(values: dict[str, str], stages: list[dict], f_start: float, f_stop: float,
                mask: list[dict] | None = None) -> str:
    return json.dumps({
        "format": "tolspread-design", "version": 2, "name": "benchmark (invented)",
        "parts": [{"ref": r, "value": v, "grade": GRADES[r[0]]} for r, v in values.items()],
        "stages": stages, "mask": mask or [],
        "analysis": {"f_start": f_start, "f_stop": f_stop, "points": 400}})


def circuit(elements, opamps) -> dict:
    return {"topology": "circuit",
            "elements": [{"ref": r, "between": [a, b]} for r, a, b in elements],
            "opamps": [{"ref": r, "plus": p, "minus": m, "output": o} for r, p, m, o in opamps]}


def derivation_times() -> None:
    sv = STATE_VARIABLE
    text = design_text(sv["values"], [circuit(sv["elements"], sv["opamps"])], 100.0, 1e6)
    nodes = {n for _r, a, b in sv["elements"] for n in (a, b)} | {n for o in sv["opamps"] for n in o[1:]}
    code = ("import sys, time; from tolspread.designfile import loads; from tolspread.engine import "
            "compile_design; d = loads(sys.stdin.read()); t = time.perf_counter(); c = compile_design(d); "
            "print(time.perf_counter() - t, 'sympy' in sys.modules, c.stages[0].tf.den_degree)")
    with tempfile.TemporaryDirectory() as cache:
        env = dict(os.environ, TOLSPREAD_CACHE_DIR=cache)
        for label in ("first time (empty cache, sympy imported)", "from the derivation cache"):
            runs = []
            for _ in range(3 if label.startswith("from") else 1):
                out = subprocess.run([sys.executable, "-c", code], input=text, capture_output=True, text=True,
                                     env=env, check=True).stdout.split()
                runs.append(float(out[0]))
            print(f"derive a circuit of {len(nodes - {'0'})} nodes besides ground and {len(sv['opamps'])} op-amps, "
                  f"{label}: {min(runs):.3f} s (sympy imported: {out[1]}; denominator degree {out[2]})")


def evaluation_times(ideal: bool, samples: int = 10_000) -> None:
    """``ideal``: op-amps without parts (each section of degree 2, the engine's lean path);
    else 10 MHz op-amps (degree 3, evaluated in general)."""
    values = {"R1": "11k", "R2": "11k", "C1": "22n", "C2": "10n", "U1": "10M",
              "R3": "11k", "R4": "11k", "C3": "100n", "C4": "4n7", "U2": "10M"}
    amp1, amp2 = ("X1", "X2") if ideal else ("U1", "U2")
    if ideal:
        del values["U1"], values["U2"]
    sk1 = [("R1", "in", "a"), ("R2", "a", "b"), ("C1", "a", "out"), ("C2", "b", "0")]
    sk2 = [("R3", "in", "a"), ("R4", "a", "b"), ("C3", "a", "out"), ("C4", "b", "0")]
    mask = [{"kind": "floor", "f1": 10, "f2": 500, "limit1": -1.0, "relative": True, "name": "pass"},
            {"kind": "ceiling", "f1": 10e3, "f2": 1e5, "limit1": -40.0, "relative": True, "name": "stop"}]
    library = [{"topology": "sallen_key_lowpass", "parts": {"R1": "R1", "R2": "R2", "C1": "C1", "C2": "C2"}},
               {"topology": "sallen_key_lowpass", "parts": {"R1": "R3", "R2": "R4", "C1": "C3", "C2": "C4"}}]
    if not ideal:
        library[0]["parts"]["U1"], library[1]["parts"]["U1"] = "U1", "U2"
    two_circuits = [circuit(sk1, [(amp1, "b", "out", "out")]), circuit(sk2, [(amp2, "b", "out", "out")])]

    def renamed(els, first):
        def node(n):
            if n in ("0", "in" if first else "", "out" if not first else ""):
                return n
            return ("m" if n == ("out" if first else "in") else n + ("1" if first else "2"))
        return [(r, node(a), node(b)) for r, a, b in els]

    one_circuit = [circuit(renamed(sk1, True) + renamed(sk2, False),
                           [(amp1, "b1", "m", "m"), (amp2, "b2", "out", "out")])]
    designs = [loads(design_text(values, st, 10.0, 1e5, mask)) for st in (library, two_circuits, one_circuit)]
    for d in designs:
        evaluate(d, samples=200)  # compile and derive before timing
    lib, two, one = side_by_side([lambda d=d: evaluate(d, samples=samples) for d in designs], repeats=7)
    amps = "ideal op-amps" if ideal else "10 MHz op-amps"
    print(f"evaluate a 4th-order low-pass with {amps}, {samples:,} boards, 400 points, full evaluation:")
    print(f"  library cascade (two Sallen-Key stages):  {lib.text()}")
    print(f"  the same as two circuit stages:           {two.text()}  ({ratio(two, lib)} the library's)")
    print(f"  the same as one circuit stage (4th order): {one.text()}  ({ratio(one, lib)} the library's)")


if __name__ == "__main__":
    sys.path.insert(0, str(Path(__file__).resolve().parent))
    derivation_times()
    evaluation_times(ideal=True)
    evaluation_times(ideal=False)
