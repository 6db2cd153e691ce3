"""Every example design shipped in assets/ loads and analyses (they are read by users
first, so they must never rot)."""
from __future__ import annotations

from pathlib import Path

import pytest

from tolspread.analysis import analyze
from tolspread.designfile import load

EXAMPLES = sorted((Path(__file__).resolve().parent.parent / "assets" / "examples").glob("*.json"))


@pytest.mark.parametrize("path", EXAMPLES, ids=[p.stem for p in EXAMPLES])
def test_example_design_analyses(path):
    design = load(path)
    result = analyze(design, samples=300)
    assert result.samples == 300
    assert 0.0 <= result.yield_.estimate <= 1.0
    assert "invented" in (design.name + design.description).lower()


def test_there_is_an_example():
    assert EXAMPLES
