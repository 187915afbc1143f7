"""The Scale map's rows in a scrolling body: every row keeps a readable height.

A packet transform at depth 6 has 64 bands; squeezed into the map's height
their row headers would paint over one another.  The body (row headers, map
and colour bar) is as tall as its rows need, at least ``ROW_MIN`` each, and
scrolls when the pane is shorter.  When the scroll bar shows, the colour
bar's margin gives up its width, so a time stays at the same screen column
as in the panes below.
"""

from __future__ import annotations

from PySide6.QtCore import Qt
from PySide6.QtWidgets import QFrame, QScrollArea, QWidget

#: the least height of one row: the row header's gain field and buttons stay whole (13
#: DWT rows then fit the Scale map at its least height, 250 px, without scrolling)
ROW_MIN = 14
#: the map's own height besides its rows: the time axis and the margin above the image
CHROME = 36


class RowScroll(QScrollArea):
    """Holds the map's body layout; ``fit_rows(n)`` sets the height ``n`` rows need."""

    def __init__(self, body_layout, margin_widget: QWidget, margin_width: int, parent=None):
        super().__init__(parent)
        self.setFrameShape(QFrame.Shape.NoFrame)
        self.setWidgetResizable(True)
        self.setHorizontalScrollBarPolicy(Qt.ScrollBarPolicy.ScrollBarAlwaysOff)
        self.body = QWidget()
        self.body.setLayout(body_layout)
        self.setWidget(self.body)
        self.margin_widget = margin_widget
        self.margin_width = margin_width
        self.rows = 0
        self.verticalScrollBar().rangeChanged.connect(lambda *_: self._keep_columns())

    def fit_rows(self, rows: int) -> None:
        self.rows = rows
        self.body.setMinimumHeight(rows * ROW_MIN + CHROME if rows else 0)
        self._keep_columns()

    @property
    def scrolling(self) -> bool:
        """The rows need more height than the pane has."""
        return self.verticalScrollBar().maximum() > 0

    def _keep_columns(self) -> None:
        bar = self.verticalScrollBar()
        width = self.margin_width - (bar.sizeHint().width() if self.scrolling else 0)
        if self.margin_widget.width() != width:
            self.margin_widget.setFixedWidth(width)
