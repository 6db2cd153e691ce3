"""Spread bands (filters/bands.py) against numpy's own percentiles.

Each band edge is an order statistic of the boards' values at one frequency: the inner
band runs from rank floor(tail (S - 1)) to rank ceil((1 - tail) (S - 1)) with
tail = (1 - share) / 2 (for the window's share, ``numpy.percentile``'s ``method="lower"``
and ``method="higher"``: numpy documentation, "percentile"); the outer band is the min
and max. Checked against numpy's full sort and percentiles exactly (no tolerance: the
same numbers are drawn as before the selection was made cheaper).
"""
from __future__ import annotations

import numpy as np
import pytest

from tolspread.bands import INNER, bands
from tolspread.designfile import load_demo
from tolspread.evaluate import evaluate


def expected(curves: np.ndarray, share: float) -> tuple[np.ndarray, ...]:
    """The band edges from numpy's full sort along the boards."""
    tail = (1 - share) / 2
    s = curves.shape[0]
    k_lo, k_hi = int(np.floor(tail * (s - 1))), int(np.ceil((1 - tail) * (s - 1)))
    ordered = np.sort(curves, axis=0)
    return ordered[k_lo], ordered[k_hi], ordered[0], ordered[-1]


@pytest.mark.parametrize("samples", [2, 3, 7, 101, 1000, 5000])
@pytest.mark.parametrize("share", [INNER, 0.9, 0.5, 1.0])
def test_bands_are_numpys_order_statistics(samples, share):
    rng = np.random.default_rng(samples)
    curves = rng.normal(size=(samples, 37)) * np.linspace(1, 30, 37)
    curves[:, 5] = np.round(curves[:, 5])  # many ties
    curves[:, 6] = 4.25  # all equal
    b = bands(curves, share)
    for got, want in zip((b.inner_low, b.inner_high, b.low, b.high), expected(curves, share)):
        np.testing.assert_array_equal(got, want)


def test_bands_of_the_demo_gain_and_phase():
    ens = evaluate(load_demo(), samples=5000, curves=True, phase=True)
    for curves in (ens.gain_db, ens.phase_deg):
        b = bands(curves)
        for got, want in zip((b.inner_low, b.inner_high, b.low, b.high), expected(curves, INNER)):
            np.testing.assert_array_equal(got, want)
        # the inner band is numpy.percentile's 1st and 99th percentiles, "lower" and "higher"
        np.testing.assert_array_equal(b.inner_low, np.percentile(curves, 100 * (1 - INNER) / 2, axis=0,
                                                                 method="lower"))
        np.testing.assert_array_equal(b.inner_high, np.percentile(curves, 100 * (1 + INNER) / 2, axis=0,
                                                                  method="higher"))
        assert np.all(b.low <= b.inner_low) and np.all(b.inner_low <= b.inner_high)
        assert np.all(b.inner_high <= b.high)
