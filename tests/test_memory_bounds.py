"""Memory inside the allowed limits (issue 11, item 8).

The spread budget, corners and summaries are taken in chunks of boards; they must give
what one whole-array numpy computation gives (checked here against numpy itself:
``numpy.percentile``, ``mean``, ``std`` and ``numpy.linalg.lstsq`` on the whole data
matrix), while their memory does not grow with the boards. A run keeps at most
``tolspread.memory.MAX_NUMBERS`` per-board numbers and a design at most ``MAX_PARTS`` parts;
beyond them the command line refuses in one line naming the field, before any work.
"""
from __future__ import annotations

import json
import subprocess
import sys
import textwrap
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest

from benchmarks.memory import cascade
from tolspread.analysis import analyze
from tolspread import budget as budget_mod
from tolspread.budget import is_log_metric, metric_columns, spread_budget
from tolspread.corners import corners
from tolspread.design import MAX_PARTS
from tolspread.designfile import load_demo, save
from tolspread.errors import InputError, ValidationError
from tolspread.evaluate import evaluate, prepare
from tolspread.memory import MAX_NUMBERS, max_boards, numbers_per_board
from tolspread.summary import summarize

ROOT = Path(__file__).resolve().parents[1]
TOL = 1e-12  # the chunked sums differ from one numpy call only by rounding


def demo_cases():
    """The demo at 5,000 boards, and the demo analysed only up to just above its cutoff,
    so that 1,000-2,000 of the boards have no cutoff (metrics missing on some boards)."""
    demo = load_demo()
    fc = prepare(demo).nominal.metrics["cutoff_hz"]
    short = replace(demo, analysis=replace(demo.analysis, f_stop=fc * 1.005),
                    mask=tuple(s for s in demo.mask if s.f2 <= fc * 1.005))
    return [demo, short]


@pytest.fixture(scope="module", params=[0, 1], ids=["demo", "cutoff-missing-on-some-boards"])
def run(request):
    design = demo_cases()[request.param]
    prep = prepare(design)
    ens = evaluate(design, samples=5000, curves=False, prepared=prep)
    return design, prep, ens


@pytest.mark.parametrize("chunk", [1 << 16, 777, 1])
def test_summaries_in_chunks_equal_numpy_on_the_whole_array(run, chunk):
    _, _, ens = run
    for name, v in ens.metrics.items():
        ok = v[np.isfinite(v)]
        s = summarize(ens, name, chunk=chunk)
        assert s.valid == ok.size
        if not ok.size:
            continue
        p01, p99 = np.percentile(ok, [1, 99])  # numpy's default (linear) percentiles
        want = [ok.mean(), ok.std(ddof=1), p01, p99, ok.min(), ok.max()]
        got = [s.mean, s.std, s.p01, s.p99, s.minimum, s.maximum]
        np.testing.assert_allclose(got, want, rtol=TOL, atol=0, err_msg=name)


def whole_array_budget(ens, prep, name):
    """Shares and remainder of one metric by least squares on the whole data matrix
    (numpy.linalg.lstsq, SVD based), fitted on the boards where the metric exists."""
    y = metric_columns(ens)[name]
    if is_log_metric(name):
        with np.errstate(divide="ignore", invalid="ignore"):
            y = np.log(y)
    ok = np.isfinite(y)
    x = np.log(ens.values[ok] / prep.nominal.values)
    xc, yc = x - x.mean(axis=0), y[ok] - y[ok].mean()
    use = xc.std(axis=0) > 0
    beta = np.zeros(x.shape[1])
    beta[use] = np.linalg.lstsq(xc[:, use], yc, rcond=None)[0]
    shares = beta ** 2 * np.var(xc, axis=0) / np.var(yc)
    if shares.sum() > 1:
        shares = shares / shares.sum()
    return dict(zip([p.ref for p in ens.design.parts], shares)), max(0.0, 1 - shares.sum()), int(ok.sum())


@pytest.mark.parametrize("chunk", [None, 777])
def test_budget_in_chunks_equals_least_squares_on_the_whole_array(run, chunk):
    _, prep, ens = run
    got = spread_budget(ens, prep, chunk=chunk)
    assert got
    for name, b in got.items():
        shares, remainder, n = whole_array_budget(ens, prep, name)
        assert b.samples == n
        for e in b.entries:
            assert e.share == pytest.approx(shares[e.ref], rel=0, abs=TOL), (name, e.ref)
        assert b.remainder == pytest.approx(remainder, rel=0, abs=TOL), name


def test_corners_in_small_batches_and_chunks_equal_one_batch(monkeypatch):
    # 16 parts: more than MAX_EXHAUSTIVE, so the guided search and its polishing run
    design = cascade(16, samples=3000)
    prep = prepare(design)
    ens = evaluate(design, curves=False, prepared=prep)
    whole = corners(ens, prep, chunk=10 ** 9).to_dict()  # every board in one chunk, one batch
    monkeypatch.setattr(budget_mod, "ROW_NUMBERS", 97 * prep.freqs_hz.size)  # batches of 97 rows
    small = corners(ens, prep, chunk=500).to_dict()
    assert not whole["exhaustive"] and whole["boards"] == small["boards"]
    assert whole["all_pass"] == small["all_pass"]
    np.testing.assert_allclose(list(small["worst_margins"].values()), list(whole["worst_margins"].values()),
                               rtol=TOL)
    for name, w in whole["metrics"].items():
        s = small["metrics"][name]
        for key in ("nominal", "corner_low", "corner_high", "mc_low", "mc_high", "rss_std", "rss_limit"):
            np.testing.assert_allclose(s[key], w[key], rtol=TOL, err_msg=f"{name} {key}")
        assert s["linear"] == w["linear"]
    # and the sampled extremes are numpy's over the whole column
    y = ens.metrics["cutoff_hz"]
    assert small["metrics"]["cutoff_hz"]["mc_low"] == np.nanmin(y)
    assert small["metrics"]["cutoff_hz"]["mc_high"] == np.nanmax(y)


CHILD = textwrap.dedent("""
    import json, resource, sys, tracemalloc
    from dataclasses import replace
    from benchmarks.memory import cascade
    from tolspread.budget import spread_budget
    from tolspread.corners import corners
    from tolspread.evaluate import evaluate, prepare
    from tolspread.summary import summarize
    design = cascade(8)
    prep = prepare(design)
    ens = evaluate(design, samples=int(sys.argv[1]), curves=False, prepared=prep)

    def traced_peak(e):
        tracemalloc.start()
        for name in e.metrics:
            summarize(e, name)
        spread_budget(e, prep)
        corners(e, prep)
        peak = tracemalloc.get_traced_memory()[1]
        tracemalloc.stop()
        return peak

    n = 70_000  # more than one chunk (65,536 boards of 8 parts), half the boards
    few = replace(ens, values=ens.values[:n], margins=ens.margins[:n],
                  metrics={k: v[:n] for k, v in ens.metrics.items()})
    small = traced_peak(few)  # also warms every cache
    base = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    big = traced_peak(ens)
    print(json.dumps({"small": small, "big": big, "values": ens.values.nbytes, "base_kib": base,
                      "rss_kib": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss}))
""")


def test_budget_corners_and_summaries_do_not_grow_with_the_boards():
    """In a fresh process, 140,000 boards of 8 parts against their first 70,000 (4.3 MiB of
    part values more): the whole-array code took five copies of the log deviations at once
    (over 20 MiB more); taken in chunks, the statistics need the same few MiB (one chunk's
    arrays) whatever the boards."""
    proc = subprocess.run([sys.executable, "-c", CHILD, "140000"], capture_output=True, text=True,
                          timeout=300, cwd=ROOT)
    assert proc.returncode == 0, proc.stderr[-2000:]
    r = json.loads(proc.stdout.strip().splitlines()[-1])
    assert r["values"] == 140_000 * 8 * 8
    # numpy's allocations seen by tracemalloc: growth from 70,000 to 140,000 boards
    assert r["big"] - r["small"] < r["values"] / 2 / 4, r
    # the process's peak resident set (getrusage, KiB) grows by less than 32 MiB meanwhile
    assert r["rss_kib"] - r["base_kib"] < 32 * 1024, r


def big_design_file(tmp_path, n_parts, samples):
    path = tmp_path / f"cascade{n_parts}.json"
    save(replace(cascade(min(n_parts, MAX_PARTS)), analysis=replace(cascade(4).analysis, samples=samples)),
         path)
    if n_parts > MAX_PARTS:  # add parts the loader must refuse
        data = json.loads(path.read_text())
        extra = [dict(data["parts"][0], ref=f"RX{k}") for k in range(n_parts - len(data["parts"]))]
        data["parts"] += extra
        path.write_text(json.dumps(data))
    return path


def test_more_parts_than_the_limit_are_refused_naming_the_field(tmp_path):
    path = big_design_file(tmp_path, MAX_PARTS + 1, 1000)
    from tolspread.designfile import load

    with pytest.raises(ValidationError) as err:
        load(path)
    assert any(p.path == "parts" and f"at most {MAX_PARTS} parts" in p.reason for p in err.value.problems)
    proc = subprocess.run([sys.executable, "-m", "tolspread.app.cli", "analyze", str(path)], capture_output=True,
                          text=True, timeout=120, cwd=ROOT)
    assert proc.returncode == 2
    assert "Traceback" not in proc.stderr and "parts" in proc.stderr


def test_samples_beyond_the_memory_rule_are_refused_before_any_work(tmp_path):
    """MAX_PARTS parts at the most samples a file may ask for: 10 million boards of about
    150 numbers would need 12 GB; refused at once in one line naming the field."""
    design = cascade(MAX_PARTS)
    prep = prepare(design)
    per = numbers_per_board(prep)
    assert per == MAX_PARTS + len(prep.nominal.metrics) + len(design.mask)
    most = max_boards(prep)
    assert most == MAX_NUMBERS // per < 10_000_000
    with pytest.raises(InputError) as err:
        analyze(design, samples=most + 1)
    assert err.value.path == "samples" and f"{most:,}" in err.value.reason
    with pytest.raises(InputError) as err:
        analyze(design, half_width=0.01, max_samples=most + 1)
    assert err.value.path == "max_samples"
    path = big_design_file(tmp_path, MAX_PARTS, 10_000_000)
    proc = subprocess.run([sys.executable, "-m", "tolspread.app.cli", "analyze", str(path)], capture_output=True,
                          text=True, timeout=120, cwd=ROOT)
    assert proc.returncode == 2, proc.stderr
    lines = proc.stderr.strip().splitlines()
    assert len(lines) == 1 and "analysis.samples" in lines[0] and f"{most:,}" in lines[0], lines


def test_a_design_judged_over_its_range_counts_its_numbers_twice(tmp_path):
    """The demo over its range judges every board again at -40 and 85 degC and after its
    life; those boards' values, metrics and margins live beside the base run's. At the
    single-temperature limit (7,894,736 boards) it peaked at 3,063 MiB (benchmarks/memory.py),
    over the 2 GB bound; the rule now counts its numbers twice. Refused through the program."""
    from tests.demo_texts import demo_at_25c

    over, at_25 = prepare(load_demo()), prepare(demo_at_25c())
    assert numbers_per_board(over) == 2 * numbers_per_board(at_25)
    most = max_boards(over)
    assert most == MAX_NUMBERS // numbers_per_board(over) and max_boards(at_25) > 1.9 * most
    proc = subprocess.run([sys.executable, "-m", "tolspread.app.cli", "analyze", "--samples", str(most + 1)],
                          capture_output=True, text=True, timeout=120, cwd=ROOT)
    assert proc.returncode == 2, proc.stderr
    lines = proc.stderr.strip().splitlines()
    assert len(lines) == 1 and f"{most:,}" in lines[0] and "operating range" in lines[0], lines
