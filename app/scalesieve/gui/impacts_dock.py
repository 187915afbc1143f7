"""The Impacts dock: the Impulse map beside the Envelope spectrum pane.

Choosing a cell of the map demodulates that band in the spectrum pane.  The
dock sits below the workbench and opens from View, or on start with
``--impacts``; its panes compute only while shown.
"""

from __future__ import annotations

import time

from PySide6.QtCore import QCoreApplication, QEventLoop, Qt
from PySide6.QtWidgets import QDockWidget, QSplitter, QVBoxLayout, QWidget

from scalesieve.gui.envelope_pane import EnvelopePane
from scalesieve.gui.impulse_map import ImpulseMapPane, caution_label


def add_impacts_dock(window) -> QDockWidget:
    """Make the dock, put it in ``window``'s bottom area (hidden), return it."""
    impulse = ImpulseMapPane(window.adapter)
    envelope = EnvelopePane(window.adapter)
    impulse.bandChosen.connect(envelope.set_band)
    impulse.bandChosen.connect(lambda name: show_band(window, name))
    split = QSplitter(Qt.Orientation.Horizontal)
    split.addWidget(impulse)
    split.addWidget(envelope)
    split.setChildrenCollapsible(False)
    split.setSizes([440, 840])
    body = QWidget()
    col = QVBoxLayout(body)
    col.setContentsMargins(0, 0, 0, 0)
    col.setSpacing(0)
    col.addWidget(split, 1)
    caution = caution_label()            # once for both panes: it is the same caution
    caution.setContentsMargins(6, 0, 6, 0)
    col.addWidget(caution)
    dock = QDockWidget("Impacts", window)
    dock.setObjectName("impactsDock")
    dock.setWidget(body)
    dock.setFeatures(QDockWidget.DockWidgetFeature.DockWidgetMovable
                     | QDockWidget.DockWidgetFeature.DockWidgetFloatable
                     | QDockWidget.DockWidgetFeature.DockWidgetClosable)
    window.addDockWidget(Qt.DockWidgetArea.BottomDockWidgetArea, dock)
    dock.hide()
    dock.visibilityChanged.connect(lambda shown: shown and _give_room(window, dock))
    dock.impulse_map = impulse
    dock.envelope = envelope
    dock.caution = caution
    window.adapter.modelReplaced.connect(lambda: _refresh(dock))
    return dock


#: the dock's share of the window's height when it opens (its panes' minimum below that)
DOCK_SHARE = 0.36


def _give_room(window, dock) -> None:
    """On opening, the dock takes a third or so of the height (the workbench keeps the rest)."""
    if dock.isFloating():
        return
    want = max(dock.minimumSizeHint().height(), int(DOCK_SHARE * window.height()))
    window.resizeDocks([dock], [want], Qt.Orientation.Vertical)


def _refresh(dock) -> None:
    if dock.isVisible():
        dock.impulse_map.redraw()
        dock.envelope.redraw()


def wait_drawn(dock, timeout_s: float = 120.0) -> bool:
    """Process events until both panes have drawn what they were asked (for snapshots).

    True when they have; False after ``timeout_s``.
    """
    deadline = time.monotonic() + timeout_s
    while (dock.impulse_map.busy or dock.envelope.busy) and time.monotonic() < deadline:
        QCoreApplication.processEvents(QEventLoop.ProcessEventsFlag.AllEvents, 20)
        time.sleep(0.002)
    QCoreApplication.processEvents()
    return not (dock.impulse_map.busy or dock.envelope.busy)


def show_band(window, name: str) -> None:
    """Select a chosen packet band everywhere it is a band of the window's transform.

    When the transform in force has the band (a packet transform at its depth,
    or a basis holding its node), its row is selected in the Scale map's row
    headers (the edit buttons then act on it) and its lane, if open, is
    scrolled into view; otherwise the status line says how to get it there.
    """
    model = window.adapter.model
    if model is None:
        return
    for key in model.band_keys:
        if model.band_name(key) == name:
            # every row of the Scale map is on screen (rows share its height), so
            # selecting the row shows it; a lane below may need scrolling to
            window.scale_map.select_rows([key])
            row = window.bands.rows.get(key)
            if row is not None and window.bands.lane_open(key):
                window.bands.scroll.ensureWidgetVisible(row)
            window.statusBar().showMessage(f"{name}: selected in the Scale map and demodulated "
                                           "in the Envelope spectrum", 5000)
            return
    depth = name[1:].split(".")[0]
    window.statusBar().showMessage(
        f"{name} demodulated in the Envelope spectrum; to edit it, choose the packet "
        f"transform at level {depth} (Transform dock)", 8000)
