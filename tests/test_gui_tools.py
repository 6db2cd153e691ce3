"""The window's design tools end to end: a design from a response, grade costs, the
recommendation dialog, and the report exports. Expected values come from the library
(tolspread.synthesis, tolspread.recommend, tolspread.report)."""
from __future__ import annotations

import time
from dataclasses import replace

import pytest
from PySide6.QtCore import QEventLoop
from PySide6.QtWidgets import QApplication

from tolspread.grades import builtin_catalog
from tolspread.synthesis import synthesize

pytestmark = pytest.mark.gui


@pytest.fixture
def window(qtbot):
    from tolspread.app.qt_main import make_window

    w = make_window(None)
    qtbot.addWidget(w, before_close_func=lambda w: w.session.undo_stack.setClean())
    w.show()
    # the window computes on its own; waiting for it (not evaluate_now()) keeps issue 10 #1 fixed
    qtbot.waitUntil(lambda: w.session.last_view is not None and not w.session.busy, timeout=30_000)
    yield w
    w.session.undo_stack.setClean()


def _spin(condition, seconds: float = 60.0) -> None:
    app = QApplication.instance()
    end = time.time() + seconds
    while not condition() and time.time() < end:
        app.processEvents(QEventLoop.ProcessEventsFlag.AllEvents, 50)
    assert condition()


def test_new_design_from_a_response_replaces_the_design(window, monkeypatch):
    from tolspread.app import qt_synthesis_dialog

    def accept_default(dlg):  # the dialog as a user leaves it after typing a spec
        dlg.set_inputs({**dlg.inputs(), "order": 4, "cutoff": "5k"})
        dlg.refresh()
        return 1

    monkeypatch.setattr(qt_synthesis_dialog.SynthesisDialog, "exec", accept_default)
    window.new_from_response()
    want = synthesize("butterworth", 4, 5000.0).design  # tolspread.synthesis is the reference
    assert window.session.design == want
    assert window.session.dirty


def test_edited_costs_become_the_designs_own_grades_and_undo(window, monkeypatch):
    from tolspread.app import qt_catalog_dialog

    def edit_and_accept(dlg):
        row = dlg.row_of("R-thick-1")
        dlg.table.item(row, qt_catalog_dialog.COLUMNS.index("relative cost")).setText("2.5")
        return 1

    monkeypatch.setattr(qt_catalog_dialog.CatalogDialog, "exec", edit_and_accept)
    before = window.session.design
    window.edit_catalog()
    d = window.session.design
    assert d.grades == (replace(builtin_catalog()["R-thick-1"], cost=2.5),)
    assert d.catalog["R-thick-1"].cost == 2.5
    window.act_undo.trigger()
    assert window.session.design == before


def test_recommendation_dialog_applies_the_cheapest_grades(window):
    from tolspread.app.qt_recommend import RecommendDialog
    from tolspread.recommend import recommend

    dlg = RecommendDialog(window.session.design, window)
    dlg.samples.setValue(1000)
    dlg.target.setValue(90.0)
    dlg.apply_requested.connect(lambda design: window.session.apply(design, "use the recommended grades"))
    dlg.start()
    _spin(lambda: dlg.recommendation is not None)
    want = recommend(window.session.design, 0.90, samples=1000)
    assert dlg.recommendation.chosen.grades == want.chosen.grades
    # both costs, as the command line prints them (issue 10 #15)
    assert (f"total relative cost {want.chosen.cost:.2f}</b> (current grades {want.current_cost:.2f})"
            in dlg.summary.text())
    dlg.apply_button.click()
    assert tuple(p.grade for p in window.session.design.parts) == want.chosen.grades
    dlg.close()


@pytest.mark.parametrize("kind", ["html", "pdf"])
def test_report_export_writes_a_file(window, tmp_path, kind):
    path = tmp_path / f"report.{kind}"
    window.exports.report(kind, str(path))
    _spin(lambda: path.exists() and path.stat().st_size > 0, 120)
    data = path.read_bytes()
    if kind == "pdf":
        assert data.startswith(b"%PDF")
    else:
        text = data.decode("utf-8")
        assert "<html" in text.lower() and "Assumptions" in text
        assert window.session.design.name in text
