"""Waiting helpers shared by the window tests (no program logic: only waits)."""
from __future__ import annotations


def settle_plot(qtbot, vb, gap_ms: int, tries: int = 100) -> None:
    """Let pending paints and layouts run until the view box ``vb`` stops moving: pyqtgraph
    widens an axis to its tick labels after the first paint, which shifts the plot by a few
    pixels. Checks every ``gap_ms`` ms, at most ``tries`` times."""
    last = None
    for _ in range(tries):
        qtbot.wait(gap_ms)
        now = (vb.sceneBoundingRect(), tuple(map(tuple, vb.viewRange())))
        if now == last:
            return
        last = now
    raise AssertionError("the plot layout did not settle")
