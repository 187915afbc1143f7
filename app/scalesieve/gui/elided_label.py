"""A one-line label that gives way to its neighbours: cut at the end with "…", never mid-letter."""

from __future__ import annotations

from PySide6.QtCore import Qt
from PySide6.QtGui import QPainter
from PySide6.QtWidgets import QLabel, QSizePolicy

from scalesieve.gui.event_guard import reported


class ElidedLabel(QLabel):
    """Plain text on one line; when narrower than the text, it ends in "…" and the
    tooltip holds the whole text (it never widens the window)."""

    def __init__(self, text: str = "", parent=None):
        super().__init__(text, parent)
        self.setSizePolicy(QSizePolicy.Policy.Ignored, QSizePolicy.Policy.Preferred)
        self.setToolTip(text)

    def setText(self, text: str) -> None:  # noqa: N802 - Qt API
        super().setText(text)
        self.setToolTip(text)

    def shown_text(self) -> str:
        """What is painted at the present width."""
        room = self.contentsRect().width()
        return self.fontMetrics().elidedText(self.text(), Qt.TextElideMode.ElideRight, room)

    @reported(once=True)
    def paintEvent(self, ev):  # noqa: N802 - Qt API
        p = QPainter(self)
        p.setPen(self.palette().color(self.foregroundRole()))
        p.setFont(self.font())
        p.drawText(self.contentsRect(), int(self.alignment()) | int(Qt.TextFlag.TextSingleLine),
                   self.shown_text())
        p.end()
