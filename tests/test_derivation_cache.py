"""The derivation cache (filters.derivation_cache) and start-up (issue 12, item 8).

References used below:
  [PIN]    ``tolspread analyze --samples 2000 --seed 3 --json -`` of the demo, recorded from
           the code before the start-up work (tests/pins/demo_analyze_2000_seed3.json; 2
           cores, numpy 2.x, OpenBLAS): a regression pin, not an outside truth. Caching the
           derivation must not move a single number.
"""
from __future__ import annotations

import json
import math
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

TOLSPREAD = str(Path(sys.executable).with_name("tolspread"))  # the console script pip installed
PIN = Path(__file__).parent / "pins" / "demo_analyze_2000_seed3.json"


def run_tolspread(*args: str, env: dict[str, str] | None = None) -> subprocess.CompletedProcess:
    proc = subprocess.run([TOLSPREAD, *args], capture_output=True, text=True, timeout=300, env=env)
    assert "Traceback" not in proc.stderr, proc.stderr
    return proc


def same_numbers(got, want, path="$"):
    """Equal structure; numbers equal to 1e-12 relative (a different BLAS build's last bit)."""
    if isinstance(want, dict):
        assert isinstance(got, dict) and got.keys() == want.keys(), path
        for k in want:
            same_numbers(got[k], want[k], f"{path}.{k}")
    elif isinstance(want, list):
        assert isinstance(got, list) and len(got) == len(want), path
        for i, (g, w) in enumerate(zip(got, want)):
            same_numbers(g, w, f"{path}[{i}]")
    elif isinstance(want, float) and not isinstance(want, bool):
        assert isinstance(got, (int, float)), path
        assert got == pytest.approx(want, rel=1e-12, abs=1e-15) or (math.isnan(got) and math.isnan(want)), path
    else:
        assert got == want, path


@pytest.mark.slow
def test_demo_analyze_json_is_pinned():
    # [PIN] the whole JSON a script reads, run the way a user runs it
    proc = run_tolspread("analyze", "--samples", "2000", "--seed", "3", "--json", "-")
    assert proc.returncode == 0, proc.stderr
    same_numbers(json.loads(proc.stdout), json.loads(PIN.read_text()))


# --- the cached path gives the numbers of the sympy path ------------------------------------

def library_netlists():
    """Every library topology with every option value, each ideal and with its op-amp's
    gain-bandwidth role (when it has an op-amp)."""
    from filters.topologies import TOPOLOGIES, build

    options = {
        "rc_lowpass": [{"sections": k, "source": s, "load": ld} for k in range(1, 5)
                       for s in (False, True) for ld in (False, True)],
        "lc_lowpass": [{"order": n, "first": f} for n in range(2, 6) for f in ("shunt", "series")],
        "sallen_key_lowpass": [{"gain": "unity"}, {"gain": "resistors"}],
        "sallen_key_highpass": [{"gain": "unity"}, {"gain": "resistors"}],
    }
    options["rc_highpass"] = options["rc_lowpass"]
    out = []
    for name in TOPOLOGIES:
        for opts in options.get(name, [{}]):
            topo = build(name, opts)
            out.append((f"{name}{opts}", topo.netlist))
            if topo.optional_roles:
                out.append((f"{name}{opts}+GBW", topo.with_opamps(set(topo.optional_roles))))
    return out


def random_values(roles, n=64, seed=20240611):
    """Log-uniform values from 1e-12 to 1e6 (every role: R, L, C and GBW alike)."""
    rng = np.random.default_rng(seed)
    return {r: np.exp(rng.uniform(math.log(1e-12), math.log(1e6), n)) for r in roles}


def lambdified(exprs, roles, vals):
    """The path before the cache: sympy.lambdify of each coefficient, stacked as the
    engine's columns (the old filters.netlist._compile)."""
    import sympy as sp

    args = [sp.Symbol(r, positive=True) for r in roles]
    cols = [np.broadcast_to(np.asarray(sp.lambdify(args, e, "numpy")(*[vals[r] for r in roles]),
                                       dtype=float), (len(vals[roles[0]]),)) for e in exprs]
    return np.stack(cols, axis=-1)


@pytest.fixture
def cache(tmp_path, monkeypatch):
    """An empty cache folder of its own, and derive() forgetting what this process knows."""
    from filters.netlist import derive

    folder = tmp_path / "cache"
    monkeypatch.setenv("TOLSPREAD_CACHE_DIR", str(folder))
    derive.cache_clear()
    yield folder
    derive.cache_clear()


@pytest.mark.slow
def test_every_library_netlist_cached_gives_the_sympy_numbers(cache, monkeypatch):
    # reference: sympy.lambdify of the exact symbolic coefficients (the evaluation used
    # before the cache), bit for bit on log-uniform values over 18 decades; and a numpy
    # nodal solution (numpy.linalg.solve) at complex points for H itself
    from filters import derivation_cache
    from filters import netlist as netlist_module
    from filters.netlist import agrees_with_nodal_solution, derive, symbolic_coefficients

    nets = library_netlists()
    assert len(nets) == 54  # 32 RC ladders, 8 LC ladders, 8 Sallen-Key, 6 multiple-feedback
    fresh = {}
    for label, net in nets:
        fresh[label] = tf = derive(net)  # derived with sympy, then stored
        assert derivation_cache.entry_path(net.description()).is_file(), label
        num_c, den_c = symbolic_coefficients(net)
        vals = random_values(net.roles)
        np.testing.assert_array_equal(tf.numerator(vals), lambdified(num_c, net.roles, vals), err_msg=label)
        np.testing.assert_array_equal(tf.denominator(vals), lambdified(den_c, net.roles, vals), err_msg=label)
        assert tf.num_powers == tuple(k for k, c in enumerate(num_c) if c != 0), label
        assert agrees_with_nodal_solution(net, tf), label

    def derived_again(net):
        raise AssertionError("derived again although the cache holds it")

    derive.cache_clear()
    monkeypatch.setattr(netlist_module, "derive_uncached", derived_again)
    for label, net in nets:
        assert derive(net) == fresh[label], label  # read back: the same numbers, exactly
