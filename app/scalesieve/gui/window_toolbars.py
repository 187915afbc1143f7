"""The window's two toolbars (files, history and channel; listening) and how they share a row.

Each toolbar row costs the workbench its height, so both stay on one row as
long as the width allows: in full words when they fit, else compact - the
undo, redo and stop buttons as their icons only (the usual arrows and square;
the tooltip and the Edit and Listen menus name them) and the channel scope
and the no-sound note in fewer words; the listening buttons go to a row of
their own only when even that does not fit.
"""

from __future__ import annotations

from PySide6.QtCore import QSize, Qt, QTimer
from PySide6.QtWidgets import QCheckBox, QComboBox, QLabel, QToolBar

#: beside the greyed listening buttons when there is no sound output (the tooltip says why)
NO_SOUND, NO_SOUND_SHORT = "  no sound output", " no sound"
#: the channel scope's words, in full and when the row is short of room (the tooltip says all)
SCOPE, SCOPE_SHORT = "new edits: this channel only", "this channel only"
#: the channel list's widest (px): longer names are cut in the box, whole in its list
CHANNEL_BOX_MAX = 240


def _toolbar(window, title: str, name: str) -> QToolBar:
    tb = window.addToolBar(title)
    tb.setObjectName(name)
    tb.setIconSize(QSize(18, 18))
    tb.setToolButtonStyle(Qt.ToolButtonStyle.ToolButtonTextBesideIcon)
    return tb


class WindowToolbars:
    """Builds the toolbars on ``window`` (its actions made already) and fits them to a width."""

    def __init__(self, window, sound_ok: bool, reason: str):
        tb = _toolbar(window, "Main", "mainToolbar")
        for a in (window.act_open, window.act_recipe_save, window.act_export):
            tb.addAction(a)
        tb.addSeparator()
        tb.addAction(window.act_undo)
        tb.addAction(window.act_redo)
        tb.addSeparator()
        tb.addWidget(QLabel(" Channel"))
        self.channel_box = QComboBox()
        # as wide as its longest name (up to a limit; the list shows whole names)
        self.channel_box.setSizeAdjustPolicy(QComboBox.SizeAdjustPolicy.AdjustToContents)
        self.channel_box.setMinimumWidth(100)
        self.channel_box.setMaximumWidth(CHANNEL_BOX_MAX)
        self.channel_box.setToolTip("the channel the panes show")
        self.channel_box.currentIndexChanged.connect(window.set_channel)
        tb.addWidget(self.channel_box)
        self.scope_box = QCheckBox(SCOPE)
        self.scope_box.setToolTip("ticked, a new edit made in the panes applies to this channel "
                                  "only; unticked, to every channel")
        self.scope_box.toggled.connect(window._scope_changed)
        tb.addWidget(self.scope_box)
        # "Show all" is the Overview strip's "all" button and View › Show all (Ctrl+0)
        lt = _toolbar(window, "Listen", "listenToolbar")
        for a in window.act_play.values():
            lt.addAction(a)
        lt.addAction(window.act_stop)
        self.no_sound = None
        if not sound_ok:
            why = QLabel(NO_SOUND)
            why.setObjectName("hint")
            why.setToolTip(reason)
            lt.addWidget(why)
            self.no_sound = why
        self.window = window
        self.main, self.listen = tb, lt
        self.compact_actions = (window.act_undo, window.act_redo, window.act_stop)
        self.listen_on_own_row = False
        self.compact = False
        # a recording's channel names widen the channel list: fit again once they are in
        refit = QTimer(window)
        refit.setSingleShot(True)
        refit.setInterval(0)
        refit.timeout.connect(lambda: self.fit(window.width()))
        self.channel_box.model().rowsInserted.connect(lambda *_: refit.start())
        self.channel_box.model().rowsRemoved.connect(lambda *_: refit.start())

    def fit(self, width: int) -> None:
        """One row in full words, else one row compact, else two rows in full words."""
        own_row = True
        for compact in (False, True):
            self._set_compact(compact)
            if self.width_needed() <= width:
                own_row = False
                break
        if own_row:
            self._set_compact(False)
        if own_row != self.listen_on_own_row:
            self.listen_on_own_row = own_row
            if own_row:
                self.window.insertToolBarBreak(self.listen)
            else:
                self.window.removeToolBarBreak(self.listen)

    def width_needed(self) -> int:
        """The width both toolbars take on one row, as their buttons are now."""
        total = 0
        for bar in (self.main, self.listen):
            bar.layout().invalidate()       # a button's new style is not asked of it yet
            total += bar.layout().sizeHint().width()
        return total

    def _set_compact(self, compact: bool) -> None:
        self.compact = compact
        if self.no_sound is not None:
            self.no_sound.setText(NO_SOUND_SHORT if compact else NO_SOUND)
        self.scope_box.setText(SCOPE_SHORT if compact else SCOPE)
        style = (Qt.ToolButtonStyle.ToolButtonIconOnly if compact
                 else Qt.ToolButtonStyle.ToolButtonTextBesideIcon)
        for a in self.compact_actions:
            for bar in (self.main, self.listen):
                button = bar.widgetForAction(a)
                if button is not None and button.toolButtonStyle() != style:
                    button.setToolButtonStyle(style)
