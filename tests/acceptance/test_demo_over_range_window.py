"""``tolspread`` alone opens the demo, which is judged over -40..85 degC and after a
20-year life (issue 15), and shows at once, without any edit, the yield over the range,
the yield at each temperature alone (25 degC among them) and the yield after the life.

References used below:
  [FIXED]  the same boards judged through a different path: the demo without its range
           (its own file text with the range-and-life line cut out, tests/demo_texts.py),
           every board at one fixed temperature through the plain ``temperature_c``
           setting, or aged through ``Conditions``; a board passes over the range when it
           passes at each judged temperature (README "Over a temperature range").
"""
from __future__ import annotations

import html
import re

import numpy as np
import pytest

from tolspread.evaluate import evaluate
from tolspread.sampling import Conditions
from tolspread.stats import yield_estimate

from demo_texts import demo_at_25c, demo_at_fixed_c  # shared: tests/demo_texts.py

from .conftest import START_MS

pytestmark = pytest.mark.gui

TEMPS = (-40.0, 25.0, 85.0)
LIFE_HOURS, LIFE_C = 175320.0, 40.0  # 20 years at 40 degC, as the demo states


def pct(passed: np.ndarray) -> str:
    """A yield as the window prints it (two decimals)."""
    a = demo_at_25c().analysis
    return f"{100 * yield_estimate(passed, None, a.confidence, a.interval).estimate:.2f} %"


def test_tolspread_alone_shows_the_demo_over_its_range_each_temperature_and_after_its_life(starter):
    w = starter.launch()
    shown = starter.wait_for_yield(w, timeout=START_MS)
    text = re.sub(r"<[^>]+>", " ", html.unescape(w.results.yield_label.text())).replace("\u00a0", " ")
    text = re.sub(r"\s+", " ", text)
    # [FIXED] each temperature alone, and the boards passing at all three
    alone = {t: evaluate(demo_at_fixed_c(t), curves=False, metrics=False).passed for t in TEMPS}
    for t in TEMPS:
        assert f"{t:g} °C {pct(alone[t])}" in text, (t, text)
    every = np.logical_and.reduce(list(alone.values()))
    assert f"yield {pct(every)}" in text and shown == pytest.approx(every.mean(), abs=5e-5)
    assert "at every judged temperature (-40, 25, 85 °C)" in text
    # the 25 degC figure is the demo's from before it had a range: the same boards
    assert pct(alone[25.0]) == pct(evaluate(demo_at_25c(), curves=False, metrics=False).passed)
    # [FIXED] after 20 years at 40 degC, judged at each temperature
    aged = np.logical_and.reduce([
        evaluate(demo_at_25c(), curves=False, metrics=False,
                 conditions=Conditions(t, t, 0.0, LIFE_HOURS, LIFE_C)).passed for t in TEMPS])
    assert f"after 20 years: {pct(aged)}" in text, text
    assert w.session.undo_stack.count() == 0 and not w.session.dirty
