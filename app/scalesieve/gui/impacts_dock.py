"""The Impacts dock: the Impulse map beside the Envelope spectrum pane.

Choosing a cell of the map demodulates that band in the spectrum pane.  The
dock sits below the workbench and opens from View, or on start with
``--impacts``; its panes compute only while shown.
"""

from __future__ import annotations

from PySide6.QtCore import Qt
from PySide6.QtWidgets import QDockWidget, QSplitter

from scalesieve.gui.envelope_pane import EnvelopePane
from scalesieve.gui.impulse_map import ImpulseMapPane


def add_impacts_dock(window) -> QDockWidget:
    """Make the dock, put it in ``window``'s bottom area (hidden), return it."""
    impulse = ImpulseMapPane(window.adapter)
    envelope = EnvelopePane(window.adapter)
    impulse.bandChosen.connect(envelope.set_band)
    impulse.bandChosen.connect(lambda name: show_band(window, name))
    split = QSplitter(Qt.Orientation.Horizontal)
    split.addWidget(impulse)
    split.addWidget(envelope)
    split.setSizes([560, 900])
    dock = QDockWidget("Impacts", window)
    dock.setObjectName("impactsDock")
    dock.setWidget(split)
    dock.setFeatures(QDockWidget.DockWidgetFeature.DockWidgetMovable
                     | QDockWidget.DockWidgetFeature.DockWidgetFloatable
                     | QDockWidget.DockWidgetFeature.DockWidgetClosable)
    window.addDockWidget(Qt.DockWidgetArea.BottomDockWidgetArea, dock)
    dock.hide()
    dock.impulse_map = impulse
    dock.envelope = envelope
    window.adapter.modelReplaced.connect(lambda: _refresh(dock))
    return dock


def _refresh(dock) -> None:
    if dock.isVisible():
        dock.impulse_map.redraw()
        dock.envelope.redraw()


def show_band(window, name: str) -> None:
    """Bring a chosen packet band into view in the Bands pane, or say how to get it there."""
    model = window.adapter.model
    if model is None:
        return
    for key in model.band_keys:
        if model.band_name(key) == name:
            row = window.bands.rows.get(key)
            if row is not None:
                window.bands.scroll.ensureWidgetVisible(row)
            window.statusBar().showMessage(f"{name}: shown in the Bands pane and demodulated "
                                           "in the Envelope spectrum", 5000)
            return
    depth = name[1:].split(".")[0]
    window.statusBar().showMessage(
        f"{name} demodulated in the Envelope spectrum; to edit it, choose the packet "
        f"transform at level {depth} (Transform dock)", 8000)
