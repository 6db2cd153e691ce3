""""New design from a response": the dialog.

:class:`SynthesisDialog` collects what :func:`filters.synthesis.synthesize` needs, runs it
on every valid change and shows its report as a preview, with the errors of the built
design against the ideal response; bad input is explained beside the field that holds it
and the OK button stays disabled until it is fixed. When an error exceeds its limit the
warning is shown in words and OK waits until the user ticks that they accept it.

The dialog computes nothing itself: values are read with
:func:`filters.values.parse_value`, checked and built by the library.
"""
from __future__ import annotations

from typing import Any

from PySide6.QtCore import Qt, Signal
from PySide6.QtGui import QFont, QFontDatabase
from PySide6.QtWidgets import (QCheckBox, QComboBox, QDialog, QGridLayout, QLabel, QLineEdit,
                               QPlainTextEdit, QSpinBox, QVBoxLayout, QWidget)

from ..errors import InputError
from ..prototypes import RIPPLED, STOPBAND_RESPONSES
from ..synthesis import (MAX_ORDER, NOTCH_FOR, RIPPLES_DB, STOPBAND_DB, TOPOLOGY_CHOICES, SynthesisResult,
                         synthesize)
from ..values import E_SERIES, parse_decibels, parse_value

from .qt_dialog_parts import PROBLEM_STYLE, mark, ok_cancel, reason
from .qt_style import VERMILION

RESPONSE_LABELS = (("Butterworth", "butterworth"), ("Chebyshev", "chebyshev"), ("Bessel", "bessel"),
                   ("Linkwitz-Riley", "linkwitz_riley"), ("Elliptic (Cauer)", "elliptic"),
                   ("Inverse Chebyshev", "inverse_chebyshev"))
KIND_LABELS = (("low-pass", "lowpass"), ("high-pass", "highpass"), ("band-pass", "bandpass"),
               ("band-stop", "bandstop"))
BANDED = ("bandpass", "bandstop")  # kinds with a centre and a bandwidth
TOPOLOGY_LABELS = {
    "sallen_key_lowpass": "Sallen-Key, unity gain",
    "mfb_lowpass": "multiple feedback, gain -1",
    "sallen_key_highpass": "Sallen-Key, unity gain",
    "mfb_highpass": "multiple feedback, gain -1",
    "mfb_bandpass": "multiple feedback",
    "notch_lowpass": "two-integrator-loop notch",
    "notch_highpass": "two-integrator-loop notch",
    "notch": "two-integrator-loop notch",
}
DEFAULT_STOPBAND = "40"
DEFAULT_RIPPLE_DB = 1.0
DEFAULT_SERIES, DEFAULT_CAP_SERIES = "E24", "E12"


class SynthesisDialog(QDialog):
    """"New design from a response": response, order, kind, cutoff ... and a live preview.

    ``result()`` is the last valid :class:`~tolspread.synthesis.SynthesisResult` (its
    ``.design`` is what the window loads); it is kept while the input is invalid.
    ``result_changed(object)`` is emitted with every new valid result;
    ``problem_changed(str)`` with the current problem ("" when the input is valid).
    Note: ``result()`` replaces ``QDialog.result()``; ``exec()`` still returns the code.
    """

    result_changed = Signal(object)   # SynthesisResult
    problem_changed = Signal(str)     # "" when valid

    # synthesize() argument -> (field widget attribute, words naming the field)
    _FIELDS = {"response": ("response", "response"), "order": ("order", "order"),
               "ripple_db": ("ripple", "ripple"), "kind": ("kind", "kind"),
               "cutoff_hz": ("cutoff", "cutoff"), "bandwidth_hz": ("bandwidth", "bandwidth"),
               "topology": ("topology", "topology"), "series": ("series", "resistor series"),
               "cap_series": ("cap_series", "capacitor series"), "gbw_hz": ("gbw", "op-amp GBW"),
               "stopband_db": ("stopband", "stopband")}

    def __init__(self, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.setWindowTitle("New design from a response")
        self.setObjectName("synthesis_dialog")
        self._result: SynthesisResult | None = None
        self._problem = ""
        self._problem_path = ""
        self._filling = False

        self.response = QComboBox()
        for label, name in RESPONSE_LABELS:
            self.response.addItem(label, name)
        self.ripple = QComboBox()
        for r in RIPPLES_DB:
            self.ripple.addItem(f"{r:g} dB", r)
        self.ripple.setCurrentIndex(RIPPLES_DB.index(DEFAULT_RIPPLE_DB))
        self.stopband = QLineEdit(DEFAULT_STOPBAND)
        self.stopband.setPlaceholderText(f"{STOPBAND_DB[0]:g} to {STOPBAND_DB[1]:g}")
        self.order = QSpinBox()
        self.order.setRange(1, MAX_ORDER)
        self.order.setValue(4)
        self.kind = QComboBox()
        for label, name in KIND_LABELS:
            self.kind.addItem(label, name)
        self.cutoff = QLineEdit("1k")
        self.cutoff.setPlaceholderText("e.g. 2k or 1.5MHz")
        self.bandwidth = QLineEdit()
        self.bandwidth.setPlaceholderText("e.g. 200")
        self.topology = QComboBox()
        self.series = QComboBox()
        self.cap_series = QComboBox()
        for combo, default in ((self.series, DEFAULT_SERIES), (self.cap_series, DEFAULT_CAP_SERIES)):
            for name in E_SERIES:
                combo.addItem(name, name)
            combo.setCurrentIndex(list(E_SERIES).index(default))
        self.gbw = QLineEdit()
        self.gbw.setPlaceholderText("empty: ideal op-amps")
        self.snap = QCheckBox("snap resistors to preferred values")
        self.snap.setChecked(True)

        self.labels: dict[str, QLabel] = {}
        self.problems: dict[str, QLabel] = {}
        grid = QGridLayout()
        rows = (("response", "response", self.response), ("ripple", "ripple", self.ripple),
                ("stopband", "stopband (dB)", self.stopband), ("order", "order", self.order), ("kind", "kind", self.kind),
                ("cutoff", "cutoff (Hz)", self.cutoff), ("bandwidth", "bandwidth (Hz)", self.bandwidth),
                ("topology", "topology", self.topology), ("series", "resistor series", self.series),
                ("cap_series", "capacitor series", self.cap_series), ("gbw", "op-amp GBW (Hz)", self.gbw))
        for i, (key, text, widget) in enumerate(rows):
            widget.setObjectName(key)
            label = QLabel(text)
            label.setBuddy(widget)
            problem = QLabel()
            problem.setObjectName(f"problem_{key}")
            problem.setStyleSheet(PROBLEM_STYLE)
            problem.setWordWrap(True)
            problem.hide()
            self.labels[key], self.problems[key] = label, problem
            grid.addWidget(label, i, 0)
            grid.addWidget(widget, i, 1)
            grid.addWidget(problem, i, 2)
        self.snap.setObjectName("snap")
        grid.addWidget(self.snap, len(rows), 1, 1, 2)
        grid.setColumnStretch(2, 1)

        self.preview = QPlainTextEdit()
        self.preview.setObjectName("preview")
        self.preview.setReadOnly(True)
        self.preview.setLineWrapMode(QPlainTextEdit.LineWrapMode.NoWrap)
        font = QFontDatabase.systemFont(QFontDatabase.SystemFont.FixedFont)
        font.setStyleHint(QFont.StyleHint.Monospace)
        self.preview.setFont(font)
        self.preview.setMinimumSize(880, 330)  # the section table and the error table without scrolling at 1280x800

        self.buttons, self.ok_button = ok_cancel(self)
        self.warning = QLabel()
        self.warning.setObjectName("warning")
        self.warning.setStyleSheet(PROBLEM_STYLE)
        self.warning.setWordWrap(True)
        self.warning.hide()
        self.accept_errors = QCheckBox("use this design although it strays beyond the error limits")
        self.accept_errors.setObjectName("accept_errors")
        self.accept_errors.hide()

        layout = QVBoxLayout(self)
        layout.addLayout(grid)
        layout.addWidget(QLabel("Preview"))
        layout.addWidget(self.preview, 1)
        layout.addWidget(self.warning)
        layout.addWidget(self.accept_errors)
        layout.addWidget(self.buttons)

        self._fill_topologies()
        self._update_enabled()
        for combo in (self.ripple, self.topology, self.series, self.cap_series):
            combo.currentIndexChanged.connect(self._changed)
        for combo in (self.kind, self.response):  # both decide the sections' topologies
            combo.currentIndexChanged.connect(self._kind_changed)
        self.order.valueChanged.connect(self._changed)
        for edit in (self.cutoff, self.bandwidth, self.gbw, self.stopband):
            edit.textChanged.connect(self._changed)
        self.snap.toggled.connect(self._changed)
        self.accept_errors.toggled.connect(self._update_ok)
        self.refresh()

    # --- public ---------------------------------------------------------------------------
    def result(self) -> SynthesisResult | None:  # type: ignore[override]
        """The last valid synthesis (None only if the input was never valid)."""
        return self._result

    def problem(self) -> str:
        """The current problem as shown in the preview ("" when the input is valid)."""
        return self._problem

    def is_valid(self) -> bool:
        return not self._problem

    def inputs(self) -> dict[str, Any]:
        """Everything typed or chosen, as text and choices (to restore with :meth:`set_inputs`)."""
        return {"response": self.response.currentData(), "ripple_db": self.ripple.currentData(),
                "order": self.order.value(), "kind": self.kind.currentData(),
                "cutoff": self.cutoff.text(), "bandwidth": self.bandwidth.text(),
                "topology": self.topology.currentData(), "series": self.series.currentData(),
                "cap_series": self.cap_series.currentData(), "gbw": self.gbw.text(),
                "stopband": self.stopband.text(), "snap": self.snap.isChecked()}

    def set_inputs(self, data: dict[str, Any]) -> None:
        """Restore what :meth:`inputs` returned (unknown keys and choices are skipped)."""
        self._filling = True
        try:
            for key, combo in (("response", self.response), ("ripple_db", self.ripple), ("kind", self.kind),
                               ("series", self.series), ("cap_series", self.cap_series)):
                i = combo.findData(data.get(key)) if key in data else -1
                if i >= 0:
                    combo.setCurrentIndex(i)
            self._fill_topologies()
            i = self.topology.findData(data.get("topology"))
            if i >= 0:
                self.topology.setCurrentIndex(i)
            if isinstance(data.get("order"), int):
                self.order.setValue(data["order"])
            for key, edit in (("cutoff", self.cutoff), ("bandwidth", self.bandwidth), ("gbw", self.gbw),
                              ("stopband", self.stopband)):
                if isinstance(data.get(key), str):
                    edit.setText(data[key])
            if isinstance(data.get("snap"), bool):
                self.snap.setChecked(data["snap"])
        finally:
            self._filling = False
        self._update_enabled()
        self.refresh()

    def request(self) -> dict[str, Any]:
        """The keyword arguments for :func:`filters.synthesis.synthesize` from the fields.

        Raises :class:`InputError` (path = the synthesize argument) for unreadable text.
        """
        response = self.response.currentData()
        kind = self.kind.currentData()
        gbw_text = self.gbw.text().strip()
        return {
            "response": response,
            "order": self.order.value(),
            "cutoff_hz": parse_value(self.cutoff.text(), "cutoff_hz"),
            "kind": kind,
            "bandwidth_hz": parse_value(self.bandwidth.text(), "bandwidth_hz") if kind in BANDED else None,
            "topology": self.topology.currentData(),
            "series": self.series.currentData(),
            "cap_series": self.cap_series.currentData(),
            "gbw_hz": parse_value(gbw_text, "gbw_hz") if gbw_text else None,
            "ripple_db": self.ripple.currentData() if response in RIPPLED else None,
            "stopband_db": parse_decibels(self.stopband.text(), "stopband_db") if response in STOPBAND_RESPONSES else None,
            "snap": self.snap.isChecked(),
        }

    def refresh(self) -> None:
        """Run the synthesis on the current fields and show the report or the problem."""
        try:
            result = synthesize(**self.request())
        except InputError as exc:
            self._show_problem(exc.path, reason(exc))
            return
        except Exception as exc:  # noqa: BLE001 - the library failed on extreme numbers; never a traceback
            self._show_problem("", f"no design can be built from these values ({exc})")
            return
        self._result = result
        self._show_problem("", "")
        self.preview.setStyleSheet("")
        self.preview.setPlainText(result.text_report())
        warning = result.warning_text()
        self.warning.setText(warning)
        self.warning.setVisible(bool(warning))
        self.accept_errors.setVisible(bool(warning))
        blocked = self.accept_errors.blockSignals(True)
        self.accept_errors.setChecked(False)  # an acceptance holds for the design it was given for
        self.accept_errors.blockSignals(blocked)
        self._update_ok()
        self.result_changed.emit(result)

    def needs_acceptance(self) -> bool:
        """True while the shown design strays beyond the error limits and that is not accepted."""
        return bool(self._result is not None and not self._problem and self._result.exceeded
                    and not self.accept_errors.isChecked())

    def accept(self) -> None:
        """Close with OK, only while the input is valid and any error beyond the limits is accepted."""
        if self._problem or self._result is None or self.needs_acceptance():
            return
        super().accept()

    # --- internals ------------------------------------------------------------------------
    def _changed(self, *_args: Any) -> None:
        if self._filling:
            return
        self._update_enabled()
        self.refresh()

    def _kind_changed(self, *_args: Any) -> None:
        if self._filling:
            return
        self._fill_topologies()
        self._changed()

    def _fill_topologies(self) -> None:
        """The topologies valid for the chosen kind and response (a response with zeros, and
        any band-stop, is built from notch sections), keeping the choice when it still fits."""
        previous = self.topology.currentData()
        kind = self.kind.currentData()
        notched = self.response.currentData() in STOPBAND_RESPONSES or kind == "bandstop"
        choices = (NOTCH_FOR[kind],) if notched and kind in NOTCH_FOR else TOPOLOGY_CHOICES[kind]
        blocked = self.topology.blockSignals(True)
        self.topology.clear()
        for name in choices:
            self.topology.addItem(TOPOLOGY_LABELS.get(name, name), name)
            self.topology.setItemData(self.topology.count() - 1, name, Qt.ItemDataRole.ToolTipRole)
        self.topology.setCurrentIndex(max(0, self.topology.findData(previous)))
        self.topology.blockSignals(blocked)

    def _update_ok(self, *_args: Any) -> None:
        self.ok_button.setEnabled(not self._problem and self._result is not None and not self.needs_acceptance())

    def _update_enabled(self) -> None:
        self.ripple.setEnabled(self.response.currentData() in RIPPLED)
        self.stopband.setEnabled(self.response.currentData() in STOPBAND_RESPONSES)
        banded = self.kind.currentData() in BANDED
        self.bandwidth.setEnabled(banded)
        self.labels["cutoff"].setText("centre (Hz)" if banded else "cutoff (Hz)")

    def _field_words(self, path: str) -> str:
        if path == "cutoff_hz" and self.kind.currentData() in BANDED:
            return "centre (cutoff)"
        return self._FIELDS[path][1] if path in self._FIELDS else ""

    def _show_problem(self, path: str, reason: str) -> None:
        key = self._FIELDS[path][0] if path in self._FIELDS else ""
        for k, label in self.problems.items():
            on = bool(reason) and k == key
            label.setText(reason if on else "")
            label.setVisible(on)
            mark(getattr(self, k), on)
        words = self._field_words(path)
        message = f"{words}: {reason}" if reason and words else reason
        self._problem, self._problem_path = message, path if reason else ""
        self._update_ok()
        if message:
            self.warning.hide()
            self.accept_errors.hide()
            self.preview.setStyleSheet(f"QPlainTextEdit {{ color: {VERMILION}; }}")
            self.preview.setPlainText(message + "\n\nFix the marked field to see the new design; "
                                      "OK is available again once the input is valid.")
        self.problem_changed.emit(message)

