"""The frame every time pane shares, so that their time axes line up.

A pane is a gutter on the left (its name and controls), a plot whose left
axis has one fixed width, and a margin on the right (the Scale map's colour
bar; empty in the other panes).  With the same widths everywhere, one time
is at the same screen column in every pane.
"""

from __future__ import annotations

import pyqtgraph as pg
from PySide6.QtCore import Qt
from PySide6.QtGui import QFont
from PySide6.QtWidgets import QFrame, QHBoxLayout, QLabel, QVBoxLayout, QWidget

from scalesieve.gui.resource_files import colour

GUTTER_WIDTH = 272
AXIS_WIDTH = 118
RIGHT_MARGIN = 74
TICK_FONT_PT = 8


def tick_font() -> QFont:
    f = QFont()
    f.setPointSize(TICK_FONT_PT)
    return f


class TimeViewBox(pg.ViewBox):
    """A ViewBox that zooms and pans along time only (wheel and drag)."""

    def __init__(self, *args, **kwargs):
        kwargs.setdefault("enableMenu", False)   # no context menu: not made at all
        super().__init__(*args, **kwargs)
        self.setMouseEnabled(x=True, y=False)
        self.enableAutoRange(x=False)
        self.setMenuEnabled(False)


def make_plot(view_box: pg.ViewBox | None = None, bottom_axis: bool = True,
              left_axis: bool = True) -> pg.PlotWidget:
    """A plot configured like every other pane's plot."""
    vb = view_box or TimeViewBox()
    w = pg.PlotWidget(viewBox=vb, background=colour("plot", "background"))
    pi = w.getPlotItem()
    pi.hideButtons()
    pi.setMenuEnabled(False)
    pi.layout.setContentsMargins(0, 3, 6, 0)
    fg = colour("plot", "foreground")
    for name in ("left", "bottom"):
        ax = pi.getAxis(name)
        ax.setPen(pg.mkPen(fg))
        ax.setTextPen(pg.mkPen(fg))
        ax.setStyle(tickFont=tick_font(), tickTextOffset=4)
    left = pi.getAxis("left")
    left.setWidth(AXIS_WIDTH)
    if not left_axis:
        # No axis at all, only its width kept free: an empty axis would still be
        # painted on every repaint (a dozen band rows repaint after each edit).
        pi.hideAxis("left")
        pi.layout.setColumnFixedWidth(0, AXIS_WIDTH)
    if bottom_axis:
        pi.getAxis("bottom").setHeight(30)
        pi.setLabel("bottom", "time", units="s")
        # seconds always (no "ms" for a short file), as the Overview and status bar say
        pi.getAxis("bottom").enableAutoSIPrefix(False)
        pi.getAxis("bottom").label.setFont(tick_font())
    else:
        pi.hideAxis("bottom")
    w.setFocusPolicy(Qt.FocusPolicy.StrongFocus)
    return w


def small_axis_labels(plot) -> None:
    """Axis names and tick numbers in the panes' small type (as ``make_plot`` sets them)."""
    pi = plot.getPlotItem()
    for name in ("left", "bottom"):
        ax = pi.getAxis(name)
        ax.label.setFont(tick_font())
        ax.setStyle(tickFont=tick_font())


def label_length(axis) -> float:
    """The length of an axis's name as drawn (its glyphs, not the text item's margins)."""
    from PySide6.QtGui import QFontMetricsF

    return QFontMetricsF(axis.label.font()).horizontalAdvance(axis.label.toPlainText())


def plot_min_height(plot, least: int = 90) -> int:
    """A plot's minimum height: ``least``, or more when its left axis name is longer than
    the axis would be (a name drawn upright along the axis is cut where the axis ends)."""
    pi = plot.getPlotItem()
    left = pi.getAxis("left")
    bottom = pi.getAxis("bottom")
    label = label_length(left) if left.label.isVisible() else 0.0
    _, top, _, under = pi.layout.getContentsMargins()
    axis = bottom.height() if bottom.isVisible() else 0
    return max(least, int(label + axis + top + under + 4))


class PaneFrame(QFrame):
    """Gutter + content + right margin, with a title in the gutter."""

    def __init__(self, title: str, parent=None, right: QWidget | None = None):
        super().__init__(parent)
        self.setObjectName("pane")
        # below the gutter-content-margin row, a footer spans the pane's whole width
        self.footer = QVBoxLayout(self)
        self.footer.setContentsMargins(0, 0, 0, 0)
        self.footer.setSpacing(0)
        row = QHBoxLayout()
        row.setContentsMargins(0, 0, 0, 0)
        row.setSpacing(0)
        self.footer.addLayout(row, 1)
        self.gutter = QWidget()
        self.gutter.setObjectName("gutter")
        self.gutter.setFixedWidth(GUTTER_WIDTH)
        self.gutter_layout = QVBoxLayout(self.gutter)
        self.gutter_layout.setContentsMargins(8, 6, 8, 6)
        self.gutter_layout.setSpacing(4)
        self.title = QLabel(title)
        self.title.setObjectName("paneTitle")
        self.gutter_layout.addWidget(self.title)
        row.addWidget(self.gutter)
        self.content = QVBoxLayout()
        self.content.setContentsMargins(0, 0, 0, 0)
        self.content.setSpacing(0)
        row.addLayout(self.content, 1)
        self.right = right or QWidget()
        self.right.setFixedWidth(RIGHT_MARGIN)
        row.addWidget(self.right)
