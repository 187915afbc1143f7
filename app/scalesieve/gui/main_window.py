"""The Scalesieve window: panes on one shared model, files, recipes, listening."""

from __future__ import annotations

import importlib.util
import os

from PySide6.QtCore import QByteArray, QPoint, QRectF, Qt, Signal
from PySide6.QtGui import QAction, QKeySequence, QPainter
from PySide6.QtWidgets import (QApplication, QDockWidget, QFileDialog,
                               QLabel, QMainWindow, QMessageBox, QProgressBar, QScrollArea,
                               QSplitter,
                               QVBoxLayout, QWidget)

from scalesieve import api
from scalesieve.errors import ScalesieveError
from scalesieve.gui import playback
from scalesieve.gui import window_settings as ws
from scalesieve.gui.about_dialog import AboutDialog
from scalesieve.gui.bands_pane import BandsPane
from scalesieve.gui.error_dialog import message_for, show_error
from scalesieve.gui.model_adapter import ModelAdapter
from scalesieve.gui.overview_strip import OverviewStrip
from scalesieve.gui.reconstruction_pane import ReconstructionPane
from scalesieve.gui.recipe_files import RecipeFiles
from scalesieve.gui.recipe_pane import RecipePane
from scalesieve.gui.resource_files import icon
from scalesieve.gui.scale_map import ScaleMapPane
from scalesieve.gui.time_axis import SharedTimeAxis
from scalesieve.io.atomic import atomic_write
from scalesieve.io.readers import AUDIO_EXTENSIONS, TEXT_EXTENSIONS

from scalesieve.io.measurement_readers import EXTENSIONS as MEASUREMENT_EXTENSIONS
from scalesieve.gui.event_guard import reported

OPEN_FILTER = ("Recordings (*.wav *.flac *.aiff *.aif *.ogg *.csv *.tsv *.txt *.dat "
               + " ".join("*" + e for e in MEASUREMENT_EXTENSIONS) + ");;"
               "Audio (*.wav *.flac *.aiff *.aif *.ogg);;Text tables (*.csv *.tsv *.txt *.dat);;"
               "Measurement files (" + " ".join("*" + e for e in MEASUREMENT_EXTENSIONS) + ");;"
               "All files (*)")
EVENTS_MODULE = "scalesieve.gui.events_pane"

#: the window's size on its first start, where the screen has room for it
FIRST_SIZE = (1600, 1000)


def first_size(screen) -> tuple[int, int]:
    """The first start's size: ``FIRST_SIZE``, or the screen's free area where smaller
    (a 1280×800 laptop must see the whole window, not a part of it)."""
    if screen is None:
        return FIRST_SIZE
    free = screen.availableGeometry()
    return min(FIRST_SIZE[0], free.width()), min(FIRST_SIZE[1], free.height())


class MainWindow(RecipeFiles, QMainWindow):
    """Scale map, Bands and Reconstruction panes over one decomposition model."""

    #: the recipe was saved or the signal exported (the recipe, as JSON): the edits are safe
    workSaved = Signal(object)

    def __init__(self, settings=None, parent=None):
        super().__init__(parent)
        self.settings = settings if settings is not None else ws.open_settings()
        self.setWindowTitle("Scalesieve")
        self.setWindowIcon(icon("app"))
        self.setAcceptDrops(True)
        self.setDockOptions(QMainWindow.DockOption.AnimatedDocks)
        self.adapter = ModelAdapter(self)
        self.time_axis = SharedTimeAxis(self)
        self.channel = 0
        self._recording = None
        self._player = playback.Player()
        # The window hears of a new model before the panes, so the time axis and
        # the channel are set when they draw.
        self.adapter.modelReplaced.connect(self._after_model)
        self.adapter.recipeChanged.connect(self._after_edit)
        self.adapter.busyChanged.connect(self._busy)
        self.adapter.progress.connect(self._progress)
        self.adapter.failed.connect(lambda msg: show_error(self, msg))
        self.adapter.notice.connect(lambda msg: self.statusBar().showMessage(msg, 4000))

        self.scale_map = ScaleMapPane(self.adapter, self.time_axis, self.settings)
        self.bands = BandsPane(self.adapter, self.time_axis)
        self.reconstruction = ReconstructionPane(self.adapter, self.time_axis)
        self.overview = OverviewStrip(self.adapter, self.time_axis)
        self.splitter = QSplitter(Qt.Orientation.Vertical)
        self.splitter.setChildrenCollapsible(False)
        for w in (self.scale_map, self.bands, self.reconstruction):
            self.splitter.addWidget(w)
        self.scale_map.setMinimumHeight(250)
        self.bands.setMinimumHeight(60)
        self.reconstruction.setMinimumHeight(110)     # two lanes and the figures' line
        self.splitter.setSizes([470, 250, 200])
        self.splitter.setStretchFactor(0, 5)
        self.splitter.setStretchFactor(1, 3)
        self.splitter.setStretchFactor(2, 2)
        # lanes open and close from the map's row headers and from the lanes themselves
        self.scale_map.laneToggled.connect(self.bands.set_lane)
        self.bands.laneToggled.connect(self._lane_toggled)
        self.scale_map.figuresKnown.connect(self.bands.open_default_lanes)
        central = QWidget()
        col = QVBoxLayout(central)
        col.setContentsMargins(0, 0, 0, 0)
        col.setSpacing(2)
        col.addWidget(self.splitter, 1)
        col.addWidget(self.overview)
        self.setCentralWidget(central)

        self.transform_line = self.scale_map.transform_line
        self.transform = self.transform_line.controls
        self.transform_line.specChosen.connect(self.adapter.request_transform)
        self.recipe = RecipePane(self.adapter)
        self.recipe.openRequested.connect(self.open_recipe_dialog)
        self.recipe.applyRequested.connect(self.apply_recipe_dialog)
        self.recipe.saveRequested.connect(self.save_recipe_dialog)
        self.recipe.problem.connect(lambda msg: show_error(self, msg))
        self.recipe.editSelected.connect(self.scale_map.select_edit)
        self.scale_map.regionSelected.connect(self.recipe.select)
        self.recipe_dock = self._dock("Recipe", self.recipe, "recipeDock")
        self.addDockWidget(Qt.DockWidgetArea.RightDockWidgetArea, self.recipe_dock)
        self.events_dock = self._add_events_dock()
        from scalesieve.gui.impacts_dock import add_impacts_dock

        self.impacts_dock = add_impacts_dock(self)
        for d in (self.recipe_dock, self.events_dock):
            if d is not None:
                d.setMinimumWidth(300)
        self.resizeDocks([self.recipe_dock], [330], Qt.Orientation.Horizontal)

        self._build_actions()
        self._build_status()
        self._restore()

    # ---------------------------------------------------------------- frame

    def _dock(self, title: str, widget, name: str) -> QDockWidget:
        d = QDockWidget(title, self)
        d.setObjectName(name)
        d.setWidget(widget)
        d.setFeatures(QDockWidget.DockWidgetFeature.DockWidgetMovable
                      | QDockWidget.DockWidgetFeature.DockWidgetFloatable
                      | QDockWidget.DockWidgetFeature.DockWidgetClosable)
        return d

    def _add_events_dock(self):
        """A place for the Events pane (transient table) when this build has it.

        The pane is made the first time its tab is shown: until someone looks
        at it, its detection costs nothing (it would run on every new model).
        """
        if importlib.util.find_spec(EVENTS_MODULE) is None:
            return None
        # Inside a scroll area the pane's own minimum width cannot widen the window.
        holder = QScrollArea()
        holder.setWidgetResizable(True)
        holder.setFrameShape(QScrollArea.Shape.NoFrame)
        self._events_holder = holder
        self._events_pane = None
        dock = self._dock("Events", holder, "eventsDock")
        self.addDockWidget(Qt.DockWidgetArea.RightDockWidgetArea, dock)
        self.tabifyDockWidget(self.recipe_dock, dock)
        self.recipe_dock.raise_()
        dock.visibilityChanged.connect(self._events_shown)
        return dock

    def _events_shown(self, visible: bool):
        if visible and self._events_pane is None:
            self.events_pane()

    def events_pane(self):
        """The Events pane, made now if it was not yet (None when it cannot start)."""
        if getattr(self, "_events_pane", None) is not None or self.events_dock is None:
            return getattr(self, "_events_pane", None)
        try:
            mod = importlib.import_module(EVENTS_MODULE)
            pane = mod.EventsPane(self.adapter, time_axis=self.time_axis,
                                  scale_map=self.scale_map, parent=self)
        except Exception as exc:  # a broken optional pane must not stop the window
            msg = message_for(exc)
            self._events_holder.setWidget(QLabel(f"The Events pane could not start: {msg}"))
            return None
        self._events_holder.setWidget(pane)
        self._events_pane = pane
        if hasattr(pane, "set_channel"):
            pane.set_channel(self.channel)
        if hasattr(pane, "channelRequested"):   # an event on another channel: show that one
            pane.channelRequested.connect(lambda k: self.channel_box.setCurrentIndex(k))
        return pane

    def _action(self, text: str, slot, shortcut=None, icon_name: str | None = None,
                tip: str | None = None) -> QAction:
        a = QAction(text, self)
        if icon_name:
            a.setIcon(icon(icon_name))
        if shortcut is not None:
            a.setShortcut(QKeySequence(shortcut))
        if tip:
            a.setToolTip(tip)
            a.setStatusTip(tip)
        a.triggered.connect(slot)
        return a

    def _build_actions(self) -> None:
        K = QKeySequence.StandardKey
        self.act_open = self._action("&Open recording…", self.open_dialog, K.Open, "open",
                                     "open a WAV, FLAC, AIFF, OGG or text table")
        self.act_export = self._action("&Export signal…", self.export_dialog, "Ctrl+E", "export",
                                       "write the cleaned or removed signal")
        self.act_bands = self._action("Export &band table (CSV)…", self.export_band_table)
        self.act_picture = self._action("Export &picture of the panes (PNG/SVG)…",
                                        self.export_picture)
        self.act_recipe_open = self._action("Open &recipe…", self.open_recipe_dialog)
        self.act_recipe_apply = self._action("&Apply recipe…", self.apply_recipe_dialog)
        self.act_recipe_save = self._action("&Save recipe…", self.save_recipe_dialog, K.Save,
                                            "save", "save the transform and edits as a recipe")
        self.act_batch = self._action("Save recipe for a &batch…", self.batch_dialog, None,
                                      None, "save the recipe and show the scalesieve batch "
                                      "command that replays it on many recordings")
        self.act_quit = self._action("&Quit", self.close, K.Quit)
        self.act_undo = self._action("&Undo", self.adapter.undo, K.Undo, "undo",
                                     "undo the last change to the recipe")
        self.act_redo = self._action("&Redo", self.adapter.redo, K.Redo, "redo",
                                     "redo the change undone last")
        self.act_all = self._action("Show &all", self.time_axis.show_all, "Ctrl+0", "fit",
                                    "show the whole recording")
        self.act_zoom_in = self._action("Zoom &in", lambda: self.time_axis.zoom(0.5), K.ZoomIn)
        self.act_zoom_out = self._action("Zoom &out", lambda: self.time_axis.zoom(2.0),
                                         K.ZoomOut)
        self.act_about = self._action("&About Scalesieve", self.about)
        ok, reason = playback.output_status()
        self.listen_reason = reason
        self.act_play = {}
        for what, key in (("original", "Ctrl+1"), ("cleaned", "Ctrl+2"), ("removed", "Ctrl+3")):
            a = self._action(f"Play {what}", lambda _=False, w=what: self.play(w), key, "play",
                             f"play the {what} signal of the visible span")
            a.setIconText(what)
            self.act_play[what] = a
        self.act_stop = self._action("Stop", self._player.stop, "Ctrl+.", "stop", "stop playback")
        for a in list(self.act_play.values()) + [self.act_stop]:
            a.setEnabled(ok)
            if not ok:
                a.setToolTip(f"{a.text()}: unavailable: {reason}")
                a.setStatusTip(reason)

        mb = self.menuBar()
        m = mb.addMenu("&File")
        m.addAction(self.act_open)
        self.recent_menu = m.addMenu("Open r&ecent")
        from scalesieve.gui.kept_sessions import KeptEditsMenu

        self.kept_menu = KeptEditsMenu(self)
        m.addMenu(self.kept_menu)
        m.addSeparator()
        for a in (self.act_export, self.act_bands, self.act_picture):
            m.addAction(a)
        m.addSeparator()
        for a in (self.act_recipe_open, self.act_recipe_apply, self.act_recipe_save,
                  self.act_batch):
            m.addAction(a)
        m.addSeparator()
        m.addAction(self.act_quit)
        m = mb.addMenu("&Edit")
        m.addAction(self.act_undo)
        m.addAction(self.act_redo)
        m = mb.addMenu("&View")
        for a in (self.act_all, self.act_zoom_in, self.act_zoom_out):
            m.addAction(a)
        m.addAction(self.time_axis.clock_action(self))
        m.addSeparator()
        self.act_transform = self._action("&Transform…", self._open_transform, "Ctrl+T", None,
                                          "change kind, wavelet, levels or boundary mode")
        m.addAction(self.act_transform)
        for d in (self.recipe_dock, self.events_dock, self.impacts_dock):
            if d is not None:
                m.addAction(d.toggleViewAction())
        m = mb.addMenu("&Listen")
        for a in self.act_play.values():
            m.addAction(a)
        m.addAction(self.act_stop)
        if not ok:
            note = QAction(f"({reason})", self)
            note.setEnabled(False)
            m.addSeparator()
            m.addAction(note)
        m = mb.addMenu("&Help")
        m.addAction(self.act_about)
        self._fill_recent()

        from scalesieve.gui.window_toolbars import WindowToolbars

        self.toolbars = WindowToolbars(self, ok, reason)
        self.channel_box = self.toolbars.channel_box
        self.scope_box = self.toolbars.scope_box
        self.main_toolbar = self.toolbars.main
        self.listen_toolbar = self.toolbars.listen

    def _build_status(self) -> None:
        sb = self.statusBar()
        self.status_file = QLabel("no recording")
        self.status_transform = QLabel("")
        self.status_busy = QLabel("")
        self.progress_bar = QProgressBar()
        self.progress_bar.setRange(0, 1000)
        self.progress_bar.setFixedWidth(180)
        self.progress_bar.setTextVisible(False)
        self.progress_bar.hide()
        sb.addWidget(self.status_file, 1)
        sb.addPermanentWidget(self.status_busy)
        sb.addPermanentWidget(self.progress_bar)
        sb.addPermanentWidget(self.status_transform)
        self._update_history_actions()

    def _restore(self) -> None:
        g = self.settings.value("window/geometry")
        if isinstance(g, (QByteArray, bytes)):
            self.restoreGeometry(g)
        else:
            self.resize(*first_size(QApplication.primaryScreen()))
        st = self.settings.value("window/state")
        if isinstance(st, (QByteArray, bytes)):
            self.restoreState(st)

    @reported
    def closeEvent(self, ev):
        try:
            self.settings.setValue("window/geometry", self.saveGeometry())
            self.settings.setValue("window/state", self.saveState())
            self.settings.sync()
        finally:   # whatever failed above, the workers stop
            self._player.stop()
            self.adapter.shutdown()
            super().closeEvent(ev)

    # ------------------------------------------------------------ the model

    def _after_model(self) -> None:
        rec = self.adapter.recording
        m = self.adapter.model
        if rec is None or m is None:
            return
        if rec is not self._recording:
            self._recording = rec
            self.time_axis.reset(rec.duration_s, rec.rate)
            self.channel_box.blockSignals(True)
            self.channel_box.clear()
            for k, name in enumerate(rec.channel_names):
                self.channel_box.addItem(f"{k}: {name}", k)
            self.channel = 0 if self.channel >= rec.channels else self.channel
            self.channel_box.setCurrentIndex(self.channel)
            self.channel_box.blockSignals(False)
            self.channel_box.setEnabled(rec.channels > 1)
            self.scope_box.setEnabled(rec.channels > 1)
            name = self.adapter.source_name()
            self.setWindowTitle(f"Scalesieve — {name}" if name else "Scalesieve")
            self.status_file.setText(self.describe_recording())
            self.time_axis.set_clock(rec.start_time)
            from scalesieve.gui.channel_units import RESEARCH_CAUTION, looks_physiological

            notes = []
            if rec.warnings:  # e.g. a header declaring more frames than the file holds
                notes.append("warning: " + "; ".join(rec.warnings))
            if looks_physiological(rec.channel_names, rec.source):
                notes.append(RESEARCH_CAUTION)
            if notes:
                self.statusBar().showMessage("  ·  ".join(notes), 60000)
            if rec.source and os.path.exists(rec.source):
                ws.add_recent(self.settings, rec.source)
                ws.set_last_folder(self.settings, rec.source)
                self._fill_recent()
        self.transform_line.show_spec(m.spec, rec.n)
        s = m.spec
        from scalesieve.gui.transform_line import spec_line

        self.status_transform.setText(spec_line(s, rec.n))   # the words of the map's line
        self._update_history_actions()

    def _open_transform(self) -> None:
        self.transform_line.showMenu()

    def _lane_toggled(self, key, on: bool) -> None:
        self.scale_map.header_column.set_lane_open(key, on)

    @reported(once=True)
    def resizeEvent(self, ev):
        super().resizeEvent(ev)
        if hasattr(self, "toolbars"):
            self.toolbars.fit(self.width())

    def describe_recording(self) -> str:
        rec = self.adapter.recording
        if rec is None:
            return "no recording"
        name = self.adapter.source_name() or "(unsaved)"
        ch = f"{rec.channels} channel" + ("s" if rec.channels != 1 else "")
        return (f"{name}  ·  {rec.rate:g} Hz  ·  {rec.duration_s:.4g} s  ·  {ch}  ·  "
                f"{rec.n:,} samples".replace(",", " "))

    def _after_edit(self, change) -> None:
        self._update_history_actions()

    def _update_history_actions(self) -> None:
        self.act_undo.setEnabled(self.adapter.can_undo)
        self.act_redo.setEnabled(self.adapter.can_redo)

    def _busy(self, busy: bool) -> None:
        self.progress_bar.setVisible(busy)
        self.status_busy.setText("recomputing…" if busy else "")
        if not busy:
            self.progress_bar.setValue(0)
        for a in (self.act_export, self.act_bands, self.act_recipe_save, self.act_recipe_open,
                  self.act_recipe_apply):
            a.setEnabled(not busy)
        self._update_history_actions()

    def _progress(self, frac: float, text: str) -> None:
        self.progress_bar.setValue(int(1000 * frac))
        self.status_busy.setText(text)

    def set_channel(self, index: int) -> None:
        rec = self.adapter.recording
        if rec is None or index < 0 or index >= rec.channels:
            return
        self.channel = index
        for pane in (self.scale_map, self.bands, self.reconstruction, self.overview):
            pane.set_channel(index)
        ev = getattr(self, "_events_pane", None)
        if ev is not None and hasattr(ev, "set_channel"):
            ev.set_channel(index)
        self.impacts_dock.impulse_map.set_channel(index)
        self.impacts_dock.envelope.set_channel(index)

    def _scope_changed(self, on: bool) -> None:
        self.adapter.this_channel_only = on
        self.bands._sync_controls()

    # ---------------------------------------------------------------- files

    def open_recording(self, recording, transform=None, edits=()) -> None:
        """Show a recording read already (the command line reads before the window)."""
        self.adapter.open_recording(lambda: recording, transform, edits,
                                    os.path.basename(recording.source or ""))

    def open_path(self, path: str, ask_text_settings: bool = True) -> None:
        """Open a file: audio directly, a text table through the import dialog."""
        ext = os.path.splitext(path)[1].lower()
        label = os.path.basename(path)
        if ask_text_settings and ext in TEXT_EXTENSIONS:
            from scalesieve.gui.csv_import_dialog import CsvImportDialog

            try:
                dlg = CsvImportDialog(path, self)
            except ScalesieveError as exc:
                show_error(self, exc.one_line())
                return
            self._import_dialog = dlg
            if dlg.exec() != CsvImportDialog.DialogCode.Accepted:
                return
            load = dlg.loader()
        elif ask_text_settings and ext in MEASUREMENT_EXTENSIONS and ext not in (".xlsx", ".xlsm"):
            from scalesieve.gui.csv_import_dialog import ask_measurement_channels

            load = ask_measurement_channels(self, path)
            if load is None:
                return
        else:
            from scalesieve.gui.long_window import open_if_long

            if open_if_long(self, path):      # over the memory budget: read on demand
                return

            def load():
                return api.load(path)
        ws.set_last_folder(self.settings, path)
        self.adapter.open_recording(load, None, (), label)

    def open_dialog(self) -> None:
        p, _ = QFileDialog.getOpenFileName(self, "Open recording", ws.last_folder(self.settings),
                                           OPEN_FILTER)
        if p:
            self.open_path(p)

    def _fill_recent(self) -> None:
        self.recent_menu.clear()
        items = ws.recent_files(self.settings)
        for p in items:
            a = self.recent_menu.addAction(p)
            a.triggered.connect(lambda _=False, q=p: self.open_path(q))
        self.recent_menu.setEnabled(bool(items))

    @reported
    def dragEnterEvent(self, ev):
        urls = ev.mimeData().urls() if ev.mimeData().hasUrls() else []
        if urls and urls[0].isLocalFile():
            ext = os.path.splitext(urls[0].toLocalFile())[1].lower()
            if (ext in TEXT_EXTENSIONS or ext in AUDIO_EXTENSIONS or ext == ".json"
                    or ext in MEASUREMENT_EXTENSIONS):
                ev.acceptProposedAction()
                return
        ev.ignore()

    @reported
    def dropEvent(self, ev):
        path = ev.mimeData().urls()[0].toLocalFile()
        ev.acceptProposedAction()
        if path.lower().endswith(".json"):
            self.open_recipe(path)
        else:
            self.open_path(path)

    # --------------------------------------------------------------- recipes

    # --------------------------------------------------------------- export

    def export_signal(self, path: str, what: str = "cleaned", subtype: str | None = None,
                      force: bool = False) -> dict | None:
        """Write the cleaned or removed signal (what ``scalesieve clean`` writes)."""
        m = self.adapter.model
        if m is None:
            return None
        try:
            rep = api.export(m, path, what, subtype=subtype, force=force)
        except ScalesieveError as exc:
            show_error(self, exc.one_line())
            return None
        self.workSaved.emit(m.recipe().to_json())
        note = f"wrote {path}"
        if rep.get("clipped"):
            note += f"; {rep['clipped']} samples clipped"
            show_error(self, f"{path}: {rep['clipped']} samples were clipped at full scale "
                             f"(choose a float format to keep them)", "Export")
        self.statusBar().showMessage(note, 8000)
        return rep

    def export_dialog(self) -> None:
        from scalesieve.gui.export_dialog import ExportDialog

        dlg = ExportDialog(self.adapter.source_path, ws.last_folder(self.settings), parent=self)
        if dlg.exec() != ExportDialog.DialogCode.Accepted:
            return
        path, what, subtype = dlg.values()
        if not path:
            return
        force = False
        if os.path.exists(path):
            ans = QMessageBox.question(self, "Export", f"{path} exists. Replace it?")
            if ans != QMessageBox.StandardButton.Yes:
                return
            force = True
        self.export_signal(path, what, subtype, force)

    def band_rows(self) -> list[dict]:
        m = self.adapter.model
        rec = m.recording
        rows = []
        for k in range(rec.channels):
            for r in m.band_table(k):
                rows.append({"channel": k, "channel_name": rec.channel_names[k], **r})
        return rows

    def export_band_table(self, path: str | None = None, force: bool = False) -> None:
        from scalesieve.io.writers import write_table_csv

        m = self.adapter.model
        if m is None:
            return
        if path is None:
            base = os.path.splitext(self.adapter.source_name() or "recording")[0]
            start = os.path.join(ws.last_folder(self.settings), f"{base}-bands.csv")
            path, _ = QFileDialog.getSaveFileName(self, "Export band table", start,
                                                  "CSV (*.csv)")
            if not path:
                return
            force = os.path.exists(path)
        QApplication.setOverrideCursor(Qt.CursorShape.WaitCursor)
        try:
            write_table_csv(path, self.band_rows(), force=force)
            self.statusBar().showMessage(f"wrote {path}", 5000)
        except ScalesieveError as exc:
            show_error(self, exc.one_line())
        finally:
            QApplication.restoreOverrideCursor()

    def panes_widget(self) -> QWidget:
        return self.centralWidget()

    def render_panes(self, path: str, force: bool = False) -> None:
        """A picture of the panes: PNG (pixels) or SVG (vector), by the extension."""
        widget = self.panes_widget()
        svg = path.lower().endswith(".svg")

        def write(tmp: str) -> None:
            if svg:
                from PySide6.QtSvg import QSvgGenerator

                gen = QSvgGenerator()
                gen.setFileName(tmp)
                gen.setSize(widget.size())
                gen.setViewBox(QRectF(0, 0, widget.width(), widget.height()))
                gen.setTitle("Scalesieve panes")
                painter = QPainter(gen)
                widget.render(painter, QPoint(0, 0))
                painter.end()
            else:
                if not widget.grab().save(tmp, "PNG"):
                    raise ScalesieveError("could not write the PNG", path)

        atomic_write(path, write, force=force)

    def export_picture(self) -> None:
        base = os.path.splitext(self.adapter.source_name() or "scalesieve")[0]
        start = os.path.join(ws.last_folder(self.settings), f"{base}-panes.png")
        path, _ = QFileDialog.getSaveFileName(self, "Export picture", start,
                                              "PNG image (*.png);;SVG drawing (*.svg)")
        if not path:
            return
        if not path.lower().endswith((".png", ".svg")):
            path += ".png"
        try:
            self.render_panes(path, force=os.path.exists(path))
            self.statusBar().showMessage(f"wrote {path}", 5000)
        except ScalesieveError as exc:
            show_error(self, exc.one_line())

    def snapshot(self, path: str, force: bool = False) -> None:
        """Draw every pane now and write the whole window as a PNG."""
        for pane in (self.scale_map, self.bands, self.reconstruction, self.overview):
            pane.redraw()
        self.reconstruction.update_metrics()
        if self.impacts_dock.isVisible():
            from scalesieve.gui.impacts_dock import wait_drawn

            self.impacts_dock.impulse_map.redraw()
            self.impacts_dock.envelope.redraw()
            wait_drawn(self.impacts_dock)      # their figures come from worker threads
        QApplication.processEvents()

        def write(tmp: str) -> None:
            if not self.grab().save(tmp, "PNG"):
                raise ScalesieveError("could not write the PNG", path)

        atomic_write(path, write, force=force)

    # -------------------------------------------------------------- listening

    def play(self, what: str) -> None:
        ok, reason = playback.output_status()
        m = self.adapter.model
        if not ok or m is None:
            show_error(self, reason if not ok else "nothing to play yet")
            return
        if not self.settings.value("listen/cautioned", False, type=bool):
            ans = QMessageBox.warning(self, "Before you listen", playback.CAUTION,
                                      QMessageBox.StandardButton.Ok
                                      | QMessageBox.StandardButton.Cancel)
            if ans != QMessageBox.StandardButton.Ok:
                return
            self.settings.setValue("listen/cautioned", True)
        rec = m.recording
        a = max(0, int(self.time_axis.t0 * rec.rate))
        b = min(rec.n, int(self.time_axis.t1 * rec.rate) + 1)
        ch = self.channel
        x = {"original": lambda: m.original(ch)[a:b], "cleaned": lambda: m.cleaned(ch)[a:b],
             "removed": lambda: m.original(ch)[a:b] - m.cleaned(ch)[a:b]}[what]()
        try:
            self._player.play(playback.prepare(x, rec.format is not None), rec.rate)
        except Exception as exc:  # the sound library's own errors become one line
            show_error(self, f"cannot play: {exc}")

    def about(self) -> None:
        AboutDialog(self).exec()
