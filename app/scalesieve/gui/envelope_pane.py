"""The Envelope spectrum pane: how often a band's impacts repeat, with bearing lines.

It shows the envelope spectrum of one packet band (the Impulse map's choice,
or the most impulsive band), its largest peaks, and - given a bearing's
geometry and the shaft rate - the lines of FTF, BPFO, BPFI and BSF, their
harmonics and BPFI's shaft sidebands, each matched to the nearest peak.  The
numbers come from core/envelope.py and core/bearing.py, as the
``scalesieve envelope`` command gives them; the spectrum is worked out in a
thread (on a long recording it takes seconds), the bearing lines on a
spectrum already made are matched at once.
"""

from __future__ import annotations

import os

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import Qt
from PySide6.QtGui import QColor, QFontMetricsF
from PySide6.QtWidgets import (QApplication, QDoubleSpinBox, QFileDialog, QHBoxLayout, QLabel, QLineEdit,
                               QPushButton, QVBoxLayout, QWidget)

from scalesieve.core import bearing as br
from scalesieve.core import envelope as en
from scalesieve.errors import ScalesieveError
from scalesieve.gui import shared_kurtosis
from scalesieve.gui.background_run import BackgroundRun
from scalesieve.gui.impulse_map import busy_bar, keep_lines
from scalesieve.gui.pane_frame import plot_min_height, small_axis_labels
from scalesieve.io.atomic import atomic_write
from scalesieve.gui.event_guard import reported

#: marker colours per line family (our own; readable on the light plot background)
LINE_COLOURS = {"ftf": "#7a5195", "bpfo": "#d1495b", "bpfi": "#00798c", "bsf": "#c98a12"}
#: the plot keeps room for its curve and two rows of line labels
PLOT_MIN_HEIGHT = 90
#: a line label's glyphs start this far right of its line (the margin of the text
#: document pyqtgraph's TextItem draws in: Qt's QTextDocument default, 4 px)
LABEL_MARGIN_PX = 4
FREQUENCY_LABEL = "envelope frequency (Hz)"


def _line_text(ln: dict) -> str:
    """A line's label: its family for the first harmonic, ``2× BPFO`` for the others."""
    name = ln["name"].upper()
    return f"{ln['harmonic']}× {name}" if ln["harmonic"] > 1 else name


class EnvelopePane(QWidget):
    """Envelope spectrum of one band, its peaks, and bearing lines."""

    def __init__(self, adapter, parent=None):
        super().__init__(parent)
        self.adapter = adapter
        self.channel = 0
        self.band = "best"
        self.report: dict | None = None
        self._for = None                 # (recording, channel, wavelet, mode, band) shown
        self._wanted = None              # the same for the spectrum being worked out
        self._spectrum: dict | None = None    # the report without bearing lines
        self._drawn = None               # the (geometry, shaft rate) its lines were drawn for
        self.run = BackgroundRun("envelope spectrum", self)
        self.run.finished.connect(self._spectrum_ready)
        adapter.add_pending_check(lambda: self.run.busy)
        col = QVBoxLayout(self)
        col.setContentsMargins(4, 3, 4, 2)
        col.setSpacing(3)
        head = QHBoxLayout()
        # one line: the band and resolution are said under the plot, on its frequency axis
        self.title = QLabel("<b>Envelope spectrum</b>")
        head.addWidget(self.title)
        head.addStretch(1)
        self.working = busy_bar()
        head.addWidget(self.working)
        head.addWidget(QLabel("bearing"))
        self.geometry = QLineEdit()
        self.geometry.setPlaceholderText("N,d,D,angle")
        self.geometry.setToolTip("rolling elements, element and pitch diameter (one unit), "
                                 "contact angle in degrees")
        self.geometry.setMinimumWidth(120)
        head.addWidget(self.geometry)
        head.addWidget(QLabel("shaft Hz"))
        self.shaft = QDoubleSpinBox()
        self.shaft.setRange(0.0, 100000.0)
        self.shaft.setDecimals(3)
        self.shaft.setSpecialValueText("—")
        head.addWidget(self.shaft)
        self.mark = QPushButton("Mark lines")
        self.mark.clicked.connect(lambda: self.redraw(force=True))
        head.addWidget(self.mark)
        self.csv_button = QPushButton("Spectrum CSV…")
        self.csv_button.clicked.connect(self._csv_dialog)
        head.addWidget(self.csv_button)
        self.pic_button = QPushButton("Picture…")
        self.pic_button.clicked.connect(self._picture_dialog)
        head.addWidget(self.pic_button)
        col.addLayout(head)
        self.plot = pg.PlotWidget()
        self.plot.setMenuEnabled(False)
        self.plot.setLabel("bottom", FREQUENCY_LABEL)
        left = self.plot.getAxis("left")
        # the values as they are: a "(x0.001)" beside the name would not fit the axis
        left.enableAutoSIPrefix(False)
        self.plot.setLabel("left", "amplitude")
        small_axis_labels(self.plot)
        self.plot.setMinimumHeight(plot_min_height(self.plot, PLOT_MIN_HEIGHT))
        self.plot.showGrid(x=True, y=True, alpha=0.2)
        self.curve = self.plot.plot([], [], pen=pg.mkPen("#2b4c7e", width=1))

        self.peaks = pg.ScatterPlotItem(size=7, brush=pg.mkBrush("#2b4c7e"), pen=None)
        self.plot.addItem(self.peaks)
        self.markers: list = []
        col.addWidget(self.plot, 1)
        self.readout = QLabel("")
        self.readout.setWordWrap(True)
        keep_lines(self.readout, 2)
        self.readout.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        col.addWidget(self.readout)

    def set_channel(self, channel: int) -> None:
        self.channel = channel
        if self.isVisible():
            self.redraw()

    def set_band(self, name: str) -> None:
        self.band = name
        self.redraw()

    def set_bearing(self, geometry: str, shaft_hz: float) -> None:
        self.geometry.setText(geometry)
        self.shaft.setValue(shaft_hz)
        self.redraw(force=True)

    @reported
    def showEvent(self, ev):  # noqa: N802 - Qt API
        super().showEvent(ev)
        # measured once shown: the axes know their fonts and heights only then
        self.plot.setMinimumHeight(plot_min_height(self.plot, PLOT_MIN_HEIGHT))
        self.redraw()

    # ------------------------------------------------------------- drawing

    def _bearing(self):
        text = self.geometry.text().strip()
        if not text:
            return None, None
        g = br.parse_geometry(text)
        shaft = self.shaft.value()
        if not shaft > 0:
            raise ValueError("give the shaft rate in Hz to mark the bearing's lines")
        return g, shaft

    @property
    def busy(self) -> bool:
        """The spectrum is being worked out."""
        return self.run.busy

    def redraw(self, force: bool = False) -> None:
        """Show the chosen band's spectrum: asked of a thread, or at once when it is made.

        A new bearing or shaft rate (or ``force``) on a spectrum already made
        only matches the lines again.
        """
        rec = self.adapter.recording
        model = self.adapter.model
        if rec is None or model is None:
            return
        ch = min(self.channel, rec.channels - 1)
        spec = model.spec
        key = (id(rec), ch, spec.wavelet, spec.mode, self.band)
        if key == self._for and self._spectrum is not None and not self.run.busy:
            self._show(force)
            return
        if key == self._wanted:
            return
        import pywt

        top = pywt.dwt_max_level(rec.n, pywt.Wavelet(spec.wavelet).dec_len)
        x, rate, band, wavelet, mode = rec.samples[:, ch], rec.rate, self.band, spec.wavelet, \
            spec.mode
        self._wanted = key
        depth = min(6, top)

        def work(check):
            # the table of "best" is the Impulse map's when it wants the same one
            table = shared_kurtosis.table(rec, ch, x, rate, wavelet, mode, depth, check=check) \
                if band == "best" else None
            return en.report(x, rate, band, wavelet, mode, depth, check=check, table=table)

        self.run.request(key, work)
        self.working.show()
        what = "the most impulsive band" if band == "best" else band
        self.readout.setText(f"Working out the envelope spectrum of {what}…")

    def _spectrum_ready(self, key, rep, problem) -> None:
        self._wanted = None
        self.working.hide()
        if problem is not None:
            self.readout.setText(problem)
            return
        self._spectrum = rep
        self._for = key
        self._drawn = None
        self._show(True)

    def _show(self, force: bool) -> None:
        """Draw the spectrum made, with the bearing lines the fields give now."""
        problem = ""
        try:
            g, shaft = self._bearing()
        except ValueError as exc:
            problem = f"Bearing: {exc}.  "
            g, shaft = None, None
        if (g, shaft) == self._drawn and not force:
            return
        self._drawn = (g, shaft)
        rep = {k: v for k, v in self._spectrum.items() if k not in ("bearing", "lines")}
        if g is not None:
            try:
                en.add_bearing(rep, g, shaft)
            except ValueError as exc:
                problem = f"Bearing: {exc}.  "
                rep = {k: v for k, v in rep.items() if k not in ("bearing", "lines")}
        self.report = rep
        b = rep["band"]
        self.plot.setLabel("bottom", f"{FREQUENCY_LABEL}  ·  band {b['name']}, {b['low_hz']:g}–"
                           f"{b['high_hz']:g} Hz  ·  resolution {rep['resolution_hz']:.3g} Hz")
        freqs, amp = rep["freqs"], rep["amplitude"]
        # the envelope of a band cannot move faster than the band is wide
        shown = freqs <= min(b["high_hz"] - b["low_hz"], freqs[-1])
        lines = rep.get("lines", [])
        top_hz = max([p["hz"] for p in rep["peaks"]] + [ln["hz"] for ln in lines] + [1.0])
        x_max = min(freqs[shown][-1], 1.3 * top_hz)
        self._draw_curve(freqs, amp, x_max)
        self.peaks.setData([p["hz"] for p in rep["peaks"]], [p["amplitude"] for p in rep["peaks"]])
        for m in self.markers:
            self.plot.removeItem(m)
        self.markers = []
        heights = self._label_heights(lines, x_max)
        for ln, height in zip(lines, heights):
            colour = QColor(LINE_COLOURS[ln["name"]])
            style = Qt.PenStyle.DotLine if ln.get("sideband") else Qt.PenStyle.DashLine
            m = pg.InfiniteLine(ln["hz"], angle=90, pen=pg.mkPen(colour, style=style, width=1),
                                label=_line_text(ln) if height is not None else None,
                                labelOpts={"position": height if height is not None else 0.96,
                                           "color": colour,
                                           "anchors": [(0, 0.5), (0, 0.5)]})
            m.setZValue(-5)             # under the spectrum: a line must not hide its peak
            self.plot.addItem(m)
            self.markers.append(m)
        self.plot.setXRange(0, x_max, padding=0.01)
        self.plot.setYRange(0, float(amp[shown].max()) * 1.1 if amp[shown].size else 1.0)
        self.readout.setText(problem + self.readout_text())

    def _label_heights(self, lines: list, x_max: float) -> list:
        """Where each line's label goes (None: no room; sidebands never get one)."""
        from scalesieve.views.line_labels import place_labels

        vb = self.plot.getPlotItem().getViewBox()
        w, h = vb.width(), vb.height()
        if w < 50 or h < 30:            # not laid out yet: a plot of the smallest size
            w, h = 500.0, float(PLOT_MIN_HEIGHT)
        wanted = [(i, ln) for i, ln in enumerate(lines) if not ln.get("sideband")]
        # measured as pyqtgraph draws a line's label: the application's font, the glyphs
        # starting a text document's margin to the right of the line
        fm = QFontMetricsF(QApplication.font())
        placed = place_labels([(ln["hz"], _line_text(ln), ln["harmonic"]) for _, ln in wanted],
                              -0.01 * x_max, 1.01 * x_max, w, h,   # the range's 1 % padding
                              text_px=lambda t: fm.horizontalAdvance(t) + LABEL_MARGIN_PX,
                              row_px=fm.height() + 1)
        out: list = [None] * len(lines)
        for (i, _), height in zip(wanted, placed):
            out[i] = height
        return out

    def _draw_curve(self, freqs: np.ndarray, amp: np.ndarray, x_max: float) -> None:
        """The spectrum up to ``x_max``, as the largest value per screen column (lines kept)."""
        from scalesieve.views.decimate import column_edges, minmax_columns

        upto = int(np.searchsorted(freqs, x_max, side="right"))
        f, a = freqs[:upto], amp[:upto]
        columns = 2000
        if f.shape[0] > 2 * columns:
            lo, hi = minmax_columns(a, columns)
            xs = np.repeat(f[column_edges(f.shape[0], columns)[:-1]], 2)
            ys = np.column_stack([lo, hi]).ravel()
            self.curve.setData(xs, ys)
        else:
            self.curve.setData(f, a)

    def readout_text(self) -> str:
        rep = self.report
        if rep is None:
            return ""
        peaks = ", ".join(f"{p['hz']:.2f}" for p in rep["peaks"][:6])
        text = f"Largest peaks (Hz): {peaks}."
        if "bearing" in rep:
            found = []
            for ln in rep["lines"]:
                if ln.get("sideband") or ln["harmonic"] != 1:
                    continue
                if ln["found_hz"] is None:
                    found.append(f"{ln['name'].upper()} {ln['hz']:.2f} Hz: no peak near")
                else:
                    snr = "" if ln["snr_db"] is None else f", {ln['snr_db']:.1f} dB over floor"
                    found.append(f"{ln['name'].upper()} {ln['hz']:.2f} Hz → peak "
                                 f"{ln['found_hz']:.2f} Hz{snr}")
            # each family once: its frequency and the peak it was matched to (or none)
            text += "  " + "; ".join(found) + "."
        return text

    # ------------------------------------------------------------- exports

    def export_csv(self, path: str, force: bool = False) -> None:
        """The whole envelope spectrum as CSV: hz, amplitude (what ``envelope --csv`` writes)."""
        if self.report is None:
            raise ScalesieveError("no envelope spectrum to export yet", path)
        from scalesieve.io.writers import write_table_csv

        rec = self.adapter.recording
        rows = ({"hz": float(f), "amplitude": float(a)}
                for f, a in zip(self.report["freqs"], self.report["amplitude"]))
        write_table_csv(path, rows, force=force, fieldnames=("hz", "amplitude"),
                        protect=[rec.source] if rec is not None and rec.source else [])

    def export_picture(self, path: str, force: bool = False) -> None:
        def write(tmp: str) -> None:
            if not self.grab().save(tmp, "PNG"):
                raise ScalesieveError("could not write the PNG", path)

        atomic_write(path, write, force=force)

    def _csv_dialog(self) -> None:
        self._save_dialog("Export envelope spectrum", "CSV table (*.csv)", ".csv", self.export_csv)

    def _picture_dialog(self) -> None:
        self._save_dialog("Export picture of the envelope spectrum", "PNG image (*.png)", ".png",
                          self.export_picture)

    def _save_dialog(self, title: str, filt: str, ext: str, fn) -> None:
        path, _ = QFileDialog.getSaveFileName(self, title, "", filt)
        if not path:
            return
        if not path.lower().endswith(ext):
            path += ext
        try:
            fn(path, force=os.path.exists(path))
        except ScalesieveError as exc:
            from scalesieve.gui.error_dialog import show_error

            show_error(self, exc.one_line())


def spectrum_arrays(pane: EnvelopePane) -> tuple[np.ndarray, np.ndarray]:
    """What the pane holds (for tests and scripts)."""
    if pane.report is None:
        return np.zeros(0), np.zeros(0)
    return pane.report["freqs"], pane.report["amplitude"]
