"""The derivation cache (tolspread.derivation_cache) and start-up (issue 12, item 8).

References used below:
  [PIN]    ``tolspread analyze --samples 2000 --seed 3 --json -`` of the demo: a regression
           pin, not an outside truth (2 cores, numpy 2.x, OpenBLAS). Caching the derivation
           must not move a single number. tests/pins/demo_at_25c_analyze_2000_seed3.json was
           recorded from the code before the start-up work, when the demo was judged at
           25 degC only; it is now the output for the demo with its operating range and
           service life cut out of its file text (tests/demo_texts.py), unchanged.
           tests/pins/demo_analyze_2000_seed3.json is the demo as it now ships (judged at
           -40, 25 and 85 degC and after 20 years), recorded when the range was added to the
           demo (issue 15); its yield is over the range, and its 25 degC point must equal
           the older pin's figures (checked below).
"""
from __future__ import annotations

import hashlib
import json
import math
import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from demo_texts import demo_at_25c_text  # shared: tests/demo_texts.py (the demo without its range)

TOLSPREAD = str(Path(sys.executable).with_name("tolspread"))  # the console script pip installed
PIN = Path(__file__).parent / "pins" / "demo_analyze_2000_seed3.json"
PIN_25C = Path(__file__).parent / "pins" / "demo_at_25c_analyze_2000_seed3.json"


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
def test_demo_analyze_json_is_pinned(tmp_path):
    # [PIN] the whole JSON a script reads, run the way a user runs it: with an empty
    # derivation cache (derived with sympy), then with the cache that run filled
    env = dict(os.environ, TOLSPREAD_CACHE_DIR=str(tmp_path / "cache"))
    for run in ("cold", "warm"):
        proc = run_tolspread("analyze", "--samples", "2000", "--seed", "3", "--json", "-", env=env)
        assert proc.returncode == 0, proc.stderr
        same_numbers(json.loads(proc.stdout), json.loads(PIN.read_text()))
    # [PIN] the demo without its range and life is the demo as it was: the older pin holds
    (tmp_path / "demo_at_25c.json").write_text(demo_at_25c_text(), encoding="utf-8")
    proc = run_tolspread("analyze", str(tmp_path / "demo_at_25c.json"), "--samples", "2000", "--seed", "3",
                         "--json", "-", env=env)
    assert proc.returncode == 0, proc.stderr
    old = json.loads(PIN_25C.read_text())
    same_numbers(json.loads(proc.stdout), old)
    # the demo over its range leaves the 25 degC figures as they were: same boards passing,
    # same failures per span, same metric summaries there
    new = json.loads(PIN.read_text())
    [at25] = [p for p in new["temperature"]["points"] if p["temperature_c"] == 25.0]
    assert at25["yield"]["passed"] == old["yield"]["passed"] == 1815
    assert at25["span_failed"] == [s["failed"] for s in old["yield"]["spans"]]
    for name, summary in at25["metrics"].items():
        same_numbers(summary, {k: v for k, v in old["metrics"][name].items() if k != "unit"}, name)
    assert new["yield"]["passed"] == new["temperature"]["overall"]["passed"] < old["yield"]["passed"]


# --- the cached path gives the numbers of the sympy path ------------------------------------

def library_netlists():
    """Every library topology with every option value, each ideal and with its op-amp's
    gain-bandwidth role (when it has an op-amp)."""
    from tolspread.topologies import TOPOLOGIES, build

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
    engine's columns (the old tolspread.netlist._compile)."""
    import sympy as sp

    args = [sp.Symbol(r, positive=True) for r in roles]
    cols = [np.broadcast_to(np.asarray(sp.lambdify(args, e, "numpy")(*[vals[r] for r in roles]),
                                       dtype=float), (len(vals[roles[0]]),)) for e in exprs]
    return np.stack(cols, axis=-1)


@pytest.fixture
def cache(tmp_path, monkeypatch):
    """An empty cache folder of its own, and derive() forgetting what this process knows."""
    from tolspread.netlist import derive

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
    from tolspread import derivation_cache
    from tolspread import netlist as netlist_module
    from tolspread.netlist import agrees_with_nodal_solution, derive, symbolic_coefficients

    nets = library_netlists()
    assert len(nets) == 60  # 32 RC ladders, 8 LC ladders, 8 Sallen-Key, 6 multiple-feedback, 6 notch
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


# --- a damaged, old or foreign cache file is ignored and rewritten ---------------------------

def demo_netlist():
    from tolspread.topologies import build

    return build("sallen_key_lowpass").with_opamps({"U1"})


def checksum(body, allow_nan=False):
    # the layout documented in filters/derivation_cache.py: SHA-256 of the content as
    # canonical JSON (sorted keys, no spaces); written here independently
    text = json.dumps(body, sort_keys=True, separators=(",", ":"), ensure_ascii=True, allow_nan=allow_nan)
    return hashlib.sha256(text.encode("ascii")).hexdigest()


def resealed(entry, allow_nan=False):
    entry["checksum"] = checksum(entry["content"], allow_nan)
    return json.dumps(entry, allow_nan=allow_nan)


def damage(kind, entry, raw, other_raw):
    """The damaged file text/bytes for ``kind`` from a good entry of the demo netlist."""
    e = json.loads(json.dumps(entry))
    body = e["content"]
    if kind == "truncated":
        return raw[: len(raw) // 2]
    if kind == "empty":
        return b""
    if kind == "binary":
        return bytes(range(256)) * 4
    if kind == "not an object":
        return b"[1, 2, 3]"
    if kind == "nested deeply":
        return b"[" * 5000 + b"]" * 5000
    if kind == "old version":
        e["version"] = 0
        return json.dumps(e).encode()
    if kind == "newer version":
        e["version"] += 1
        return json.dumps(e).encode()
    if kind == "foreign format":
        e["format"] = "some-other-program"
        return json.dumps(e).encode()
    if kind == "another netlist's entry":
        return other_raw
    if kind == "number changed, checksum stale":
        body["denominator"][1][0][0] *= 1.5
        return json.dumps(e).encode()
    if kind == "number changed, checksum resealed":
        body["denominator"][1][0][0] *= 1.5
        return resealed(e).encode()
    if kind == "term dropped, checksum resealed":
        body["denominator"][1].pop()
        return resealed(e).encode()
    if kind == "unknown role, checksum resealed":
        body["numerator"][0][0][1].append(["__import__('os').system('true')", 1])
        return resealed(e).encode()
    if kind == "text as number, checksum resealed":
        body["numerator"][0][0][0] = "1.0"
        return resealed(e).encode()
    if kind == "infinite number, checksum resealed":
        body["denominator"][0][0][0] = float("inf")
        return resealed(e, allow_nan=True).encode()
    if kind == "roles reordered, checksum resealed":
        body["roles"] = body["roles"][::-1]
        return resealed(e).encode()
    raise AssertionError(kind)


DAMAGE = ["truncated", "empty", "binary", "not an object", "nested deeply", "old version",
          "newer version", "foreign format", "another netlist's entry",
          "number changed, checksum stale", "number changed, checksum resealed",
          "term dropped, checksum resealed", "unknown role, checksum resealed",
          "text as number, checksum resealed", "infinite number, checksum resealed",
          "roles reordered, checksum resealed"]


@pytest.mark.parametrize("kind", DAMAGE)
def test_a_bad_cache_file_is_ignored_and_rewritten(cache, kind):
    # reference: the same netlist derived with sympy into an empty cache (the first run)
    from tolspread import derivation_cache
    from tolspread.netlist import derive
    from tolspread.topologies import build

    net = demo_netlist()
    other = build("mfb_bandpass").netlist
    good = derive(net)
    derive(other)
    path = derivation_cache.entry_path(net.description())
    raw = path.read_bytes()
    other_raw = derivation_cache.entry_path(other.description()).read_bytes()
    path.write_bytes(damage(kind, json.loads(raw), raw, other_raw))
    derive.cache_clear()
    assert derive(net) == good  # no crash, the right numbers
    assert path.read_bytes() == raw  # rewritten as the first run wrote it
    assert derivation_cache.load(net.description(), net.roles) == (good.num_terms, good.den_terms)


def test_a_folder_where_the_cache_file_should_be(cache):
    from tolspread import derivation_cache
    from tolspread.netlist import derive

    net = demo_netlist()
    good = derive(net)
    path = derivation_cache.entry_path(net.description())
    path.unlink()
    path.mkdir()
    derive.cache_clear()
    assert derive(net) == good


def test_an_unwritable_cache_folder_is_no_error(tmp_path, monkeypatch):
    # the folder cannot be made: its parent is a regular file (refused even for root)
    from tolspread.netlist import derive

    blocker = tmp_path / "not-a-folder"
    blocker.write_text("x")
    monkeypatch.setenv("TOLSPREAD_CACHE_DIR", str(blocker / "cache"))
    derive.cache_clear()
    try:
        tf = derive(demo_netlist())
    finally:
        derive.cache_clear()
    assert tf.den_degree == 3
    env = dict(os.environ, TOLSPREAD_CACHE_DIR=str(blocker / "cache"))
    proc = run_tolspread("analyze", "--samples", "50", env=env)
    assert proc.returncode == 0 and proc.stderr == "", proc.stderr
    assert blocker.read_text() == "x"


def test_the_cache_file_is_plain_data(cache):
    # nothing but JSON objects, lists, text, numbers and null; the coefficients are
    # [number, [[role, power], ...]] terms over the netlist's own roles
    from tolspread import derivation_cache
    from tolspread.netlist import derive

    net = demo_netlist()
    derive(net)
    entry = json.loads(derivation_cache.entry_path(net.description()).read_text())
    assert entry["format"] == "tolspread-derivation" and isinstance(entry["version"], int)
    body = entry["content"]
    assert body["netlist"] == net.description()
    for side in ("numerator", "denominator"):
        for coefficient in body[side]:
            for number, factors in coefficient:
                assert type(number) is float
                for role, power in factors:
                    assert role in net.roles and type(power) is int and power >= 1


# --- where the cache lives --------------------------------------------------------------------

@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="XDG folders are the Linux convention")
def test_the_cache_folder_follows_the_environment(tmp_path, monkeypatch):
    # source: XDG Base Directory Specification (freedesktop.org), from memory: user caches
    # go to $XDG_CACHE_HOME, or $HOME/.cache when it is unset or empty; a relative path in
    # it is invalid and ignored
    from tolspread.derivation_cache import cache_dir

    monkeypatch.setenv("TOLSPREAD_CACHE_DIR", str(tmp_path / "own"))
    assert cache_dir() == tmp_path / "own"
    monkeypatch.delenv("TOLSPREAD_CACHE_DIR")
    monkeypatch.setenv("HOME", str(tmp_path / "home"))
    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path / "xdg"))
    assert cache_dir() == tmp_path / "xdg" / "tolspread"
    for unusable in ("", "relative/cache"):
        monkeypatch.setenv("XDG_CACHE_HOME", unusable)
        assert cache_dir() == tmp_path / "home" / ".cache" / "tolspread"


def test_the_tests_never_use_the_real_cache_folder():
    # tests/conftest.py points the cache at a temporary folder for every test
    from tolspread.derivation_cache import cache_dir

    real = Path.home() / ".cache"
    assert real not in cache_dir().parents
    assert Path(os.environ["TOLSPREAD_CACHE_DIR"]) == cache_dir()


# --- start-up: what the command line imports --------------------------------------------------

HEAVY = ("sympy", "scipy.stats", "scipy.signal")


def loaded_after(code, env=None):
    """Which of HEAVY a fresh interpreter has imported after running ``code``."""
    script = f"import sys\n{code}\nprint('HEAVY:', *[m for m in {HEAVY!r} if m in sys.modules])"
    proc = subprocess.run([sys.executable, "-c", script], capture_output=True, text=True, timeout=300,
                          env=env)
    assert proc.returncode == 0, proc.stderr
    last = proc.stdout.splitlines()[-1].split()
    assert last[0] == "HEAVY:"
    return last[1:]


def test_importing_the_command_line_loads_no_heavy_module():
    assert loaded_after("import tolspread.app.cli") == []
    assert loaded_after("from tolspread.app.cli import main\nmain(['--version'])") == []


@pytest.mark.slow
def test_a_second_run_derives_nothing_and_gives_the_same_output(tmp_path):
    # the first run (empty cache) derives with sympy and keeps the derivation; the second
    # imports no sympy and prints the same text [PIN: the first run is the reference]
    env = dict(os.environ, TOLSPREAD_CACHE_DIR=str(tmp_path / "cache"))
    run = "from tolspread.app.cli import main\nmain(['analyze', '--samples', '200', '--seed', '4'])"
    first = subprocess.run([sys.executable, "-c", f"import sys\n{run}\nprint('sympy' in sys.modules)"],
                           capture_output=True, text=True, env=env, timeout=300)
    assert first.returncode == 0, first.stderr
    assert len(list((tmp_path / "cache" / "derivations").glob("*.json"))) == 1  # both stages: one netlist
    second = subprocess.run([sys.executable, "-c", f"import sys\n{run}\nprint('sympy' in sys.modules)"],
                            capture_output=True, text=True, env=env, timeout=300)
    assert second.returncode == 0, second.stderr
    assert first.stdout.splitlines()[-1] == "True" and second.stdout.splitlines()[-1] == "False"
    assert first.stdout.splitlines()[:-1] == second.stdout.splitlines()[:-1]
