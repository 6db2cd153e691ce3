"""The per-board table (filters/board_table.py) of the demo, held against numpy: the margins
recomputed from the boards' gain curves and the spans' limits, pass/fail as "every margin
at least 0", the CSV text read back with the csv module."""
from __future__ import annotations

import csv
import io
import math

import numpy as np
import pytest

from tolspread.board_table import BOARD_COLUMN, PASS_COLUMN, board_csv, board_table
from tolspread.designfile import load_demo
from tolspread.evaluate import evaluate


@pytest.fixture(scope="module")
def demo():
    design = load_demo()
    ens = evaluate(design, samples=800, curves=True)
    return design, ens, board_table(ens)


def numpy_margin(span, freqs, gain_db, reference_db):
    """A span's margin per board from the gain curves (dB): the smallest distance to the
    limit over the span's grid points, positive where met. The limit is linear in log
    frequency from limit1 at f1 to limit2 at f2 (the design file's rule, README)."""
    inside = (freqs >= span.f1 * (1 - 1e-12)) & (freqs <= span.f2 * (1 + 1e-12))
    f = freqs[inside]
    lim2 = span.limit1 if span.limit2 is None else span.limit2
    limit = np.interp(np.log(f), [math.log(span.f1), math.log(span.f2)], [span.limit1, lim2])
    limit = limit + (reference_db if span.relative else 0.0)
    band = gain_db[:, inside]
    return (band - limit).min(axis=1) if span.kind == "floor" else (limit - band).min(axis=1)


def test_columns_names_and_units(demo):
    design, ens, table = demo
    refs = [p.ref for p in design.parts]
    s, p = ens.values.shape
    assert table.values.shape == (s, len(table.names)) and table.names[:p] == tuple(refs)
    assert table.columns[0] == BOARD_COLUMN and table.columns[-1] == PASS_COLUMN
    assert len(table.columns) == len(table.names) + 2 == len(table.units) + 2
    # SI units of the part values (common practice): ohm for resistors, farad for capacitors
    assert [table.units[i] for i in range(p)] == ["\u03a9" if q.kind == "R" else "F" for q in design.parts]
    by_name = dict(zip(table.names, table.units))
    assert by_name["cutoff_hz"] == "Hz"
    for span in design.mask:  # every demo span is a gain span: its margin is in dB
        assert by_name[f"margin.{span.label}"] == "dB"
        assert f"margin of '{span.label}' (dB)" in table.headers
    np.testing.assert_array_equal(table.boards, np.arange(s))


def test_values_margins_and_pass_against_numpy(demo):
    design, ens, table = demo
    p = len(design.parts)
    np.testing.assert_array_equal(table.values[:, :p], ens.values)
    col = {n: table.values[:, j] for j, n in enumerate(table.names)}
    np.testing.assert_array_equal(col["cutoff_hz"], ens.metrics["cutoff_hz"])
    # the demo is unity-gain Sallen-Key: a passband reference of 0 dB (from memory: K = 1)
    reference = ens.nominal.metrics["reference_db"]
    assert reference == pytest.approx(0.0, abs=1e-6)
    worst = np.full(ens.samples, np.inf)
    for span in design.mask:
        expect = numpy_margin(span, ens.freqs_hz, ens.gain_db, reference)
        np.testing.assert_allclose(col[f"margin.{span.label}"], expect, rtol=0, atol=1e-9)
        worst = np.minimum(worst, expect)
    np.testing.assert_array_equal(table.passed, worst >= 0)
    assert 0 < table.passed.sum() < ens.samples, "the demo must have boards either side of the mask"


def test_csv_reads_back(demo):
    _design, _ens, table = demo
    rows = list(csv.reader(io.StringIO(board_csv(table))))
    assert rows[0] == list(table.columns)
    assert len(rows) == len(table.boards) + 1
    body = np.array([[float(x) for x in r] for r in rows[1:]])
    np.testing.assert_array_equal(body[:, 0], table.boards)
    np.testing.assert_allclose(body[:, 1:-1], table.values, rtol=5e-9, atol=0)  # 9 significant digits
    np.testing.assert_array_equal(body[:, -1].astype(bool), table.passed)
