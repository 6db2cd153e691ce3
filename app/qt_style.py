"""Colours and pens of the window, chosen to stay distinguishable with the common forms of
colour blindness (the Okabe-Ito palette), plus line styles so nothing rests on hue alone."""
from __future__ import annotations

from PySide6.QtCore import Qt
from PySide6.QtGui import QColor
from PySide6.QtWidgets import QLabel

BLUE = "#0072B2"
SKY = "#56B4E9"
ORANGE = "#E69F00"
VERMILION = "#D55E00"
GREEN = "#009E73"
PURPLE = "#CC79A7"
INK = "#1a1a1a"
GRID_ALPHA = 0.25
GRID_COLOUR = "#cfcfcf"


def rgba(hex_colour: str, alpha: int) -> QColor:
    c = QColor(hex_colour)
    c.setAlpha(alpha)
    return c


def problem_label(name: str, hidden: bool = True) -> QLabel:
    """A wrapping label in :data:`VERMILION` named ``name`` for an input's one-line problem
    (hidden until there is one, unless ``hidden`` is False)."""
    label = QLabel()
    label.setObjectName(name)
    label.setStyleSheet(f"color: {VERMILION};")
    label.setWordWrap(True)
    if hidden:
        label.hide()
    return label


NOMINAL_PEN = {"color": INK, "width": 2}
INNER_BRUSH = rgba(BLUE, 110)
OUTER_BRUSH = rgba(SKY, 60)
PASS_TRACE_PEN = {"color": rgba(BLUE, 90), "width": 1}
FAIL_TRACE_PEN = {"color": rgba(VERMILION, 170), "width": 1}
FLOOR_COLOUR = ORANGE
CEILING_COLOUR = PURPLE
FORBIDDEN_ALPHA = 55
SPAN_WIDTH = 2.5           # a span's limit line (px)
SELECTED_WIDTH = 5         # the selected span's line (px), drawn in SELECTED_COLOUR
SELECTED_COLOUR = "#002f6c"  # deep navy: unlike the orange floors, purple ceilings, green delay boxes, pale bands
HANDLE_RADIUS = 6          # end handles (px); filled when their span is selected
DELAY_COLOUR = GREEN
DASH = Qt.PenStyle.DashLine
