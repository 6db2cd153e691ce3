"""The built-in demo as it was before it had an operating range (not a test module).

The demo (filters/data/demo_design.json, an invented scenario) is judged over -40..85 degC
and after a 20-year service life. Before issue 15 it was judged at 25 degC only; the same
boards at 25 degC are that old design. Tests that pin figures recorded from the old demo,
or that check the 25 degC row of the new one independently, use the demo's own file text
with the range and the life cut out, so the two can never drift apart.
"""
from __future__ import annotations

from tolspread.design import Design
from tolspread.designfile import demo_text, loads

# the demo file's one line that makes it "the board as it lives" (kept on one line for this)
RANGE_AND_LIFE = ',\n    "operating_range_c": [-40, 85], "service_life": {"hours": 175320, "temperature_c": 40}'


def demo_at_25c_text() -> str:
    """The demo's file text without its operating range and service life: the old demo,
    judged at 25 degC only (its ``temperature_c`` is [25, 25])."""
    text = demo_text()
    assert text.count(RANGE_AND_LIFE) == 1, "the demo's range-and-life line changed: update tests/demo_texts.py"
    return text.replace(RANGE_AND_LIFE, "")


def demo_at_25c() -> Design:
    """The demo without its operating range and service life (see :func:`demo_at_25c_text`)."""
    return loads(demo_at_25c_text(), "demo at 25 degC")


def demo_at_fixed_c(celsius: float) -> Design:
    """The demo without its range, every board at ``celsius`` (deg C) through the plain
    ``temperature_c`` setting (not the judged-temperature path)."""
    text = demo_at_25c_text()
    assert text.count('"temperature_c": [25, 25]') == 1
    return loads(text.replace('"temperature_c": [25, 25]', f'"temperature_c": [{celsius:g}, {celsius:g}]'),
                 f"demo at {celsius:g} degC")
