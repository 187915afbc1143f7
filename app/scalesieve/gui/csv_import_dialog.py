"""Import a text table (CSV/TSV/TXT) with a live preview of how it will be read.

The dialog starts from what the command line's reader finds (delimiter,
decimal mark, header, time column and unit) and shows the first rows as
they will be read.  Left on "as found", the import is exactly the command
line's ``read_text``; a setting changed by hand reads the file with the
same reader's parts (dialect, cell parser, time-axis check) under that
setting.
"""

from __future__ import annotations

import math
import os

import numpy as np
from PySide6.QtCore import Qt
from PySide6.QtGui import QBrush, QColor
from PySide6.QtWidgets import (QCheckBox, QComboBox, QDialog, QDialogButtonBox, QDoubleSpinBox,
                               QFormLayout, QHBoxLayout, QHeaderView, QLabel, QListWidget,
                               QListWidgetItem, QTableWidget, QTableWidgetItem, QVBoxLayout)

from scalesieve.core.recording import Recording
from scalesieve.errors import ScalesieveError
from scalesieve.io import csv_reader as cr
from scalesieve.io.gaps import fill_linear

AUTO = "auto"
DELIMITERS = ((AUTO, "as found"), (",", "comma ,"), (";", "semicolon ;"), ("\t", "tab"),
              (None, "whitespace"), ("|", "bar |"))
DECIMALS = ((AUTO, "as found"), (".", "point 1.5"), (",", "comma 1,5"))
HEADERS = ((AUTO, "as found"), ("yes", "first row names the columns"), ("no", "no header"))
TIMES = ((AUTO, "as found"), ("yes", "first column is time"), ("no", "no time column"))
UNITS = ((AUTO, "as found"), ("s", "s"), ("ms", "ms"), ("us", "µs"), ("ns", "ns"),
         ("min", "min"))
PREVIEW_ROWS = 40
_BAD = QBrush(QColor("#f6d5d5"))
_TIME = QBrush(QColor("#e8eef6"))


def _text_lines(text: str, limit: int):
    """(line number, character offset, line) of the first ``limit`` data-bearing lines."""
    out = []
    pos, lineno = 0, 1
    n = len(text)
    while pos < n and len(out) < limit:
        end = text.find("\n", pos)
        end = n if end < 0 else end
        line = text[pos:end]
        s = line.strip()
        if s and not s.startswith("#"):
            out.append((lineno, pos, line))
        pos, lineno = end + 1, lineno + 1
    return out



def _add_status_and_buttons(dialog, lay) -> None:
    """The status line and the Import / Cancel buttons both import dialogs end with."""
    dialog.status = QLabel("")
    dialog.status.setWordWrap(True)
    lay.addWidget(dialog.status)
    dialog.buttons = QDialogButtonBox(QDialogButtonBox.StandardButton.Ok
                                      | QDialogButtonBox.StandardButton.Cancel)
    dialog.buttons.button(QDialogButtonBox.StandardButton.Ok).setText("Import")
    dialog.buttons.accepted.connect(dialog.accept)
    dialog.buttons.rejected.connect(dialog.reject)
    lay.addWidget(dialog.buttons)

class TextChoice:
    """The settings chosen in the dialog, and what they make of the file."""

    def __init__(self, path: str):
        self.source, self.text, self.encoding = cr.read_text_file(path)
        self.found = cr.scan_layout(self.text, self.source, self.encoding)
        self.lines = _text_lines(self.text, 200 + len(self.found.header_lines))
        self.delimiter = AUTO
        self.decimal = AUTO
        self.header = AUTO
        self.time = AUTO
        self.unit = AUTO

    def as_found(self) -> bool:
        return all(v == AUTO for v in (self.delimiter, self.decimal, self.header, self.time,
                                       self.unit))

    def layout(self) -> cr.TextLayout:
        """The reader's layout with the chosen settings put in."""
        f = self.found
        if self.as_found():
            return f
        d = cr.Dialect(f.dialect.delimiter if self.delimiter == AUTO else self.delimiter,
                       f.dialect.decimal if self.decimal == AUTO else self.decimal)
        if d.delimiter is not None:
            d.trailing = all(ln[2].rstrip().endswith(d.delimiter) for ln in self.lines[:50])
        if self.header == AUTO:
            head_count = len(f.header_lines)
        else:
            head_count = 1 if self.header == "yes" else 0
        if head_count >= len(self.lines):
            raise ScalesieveError("has a header but no data rows", self.source)
        names = None
        if head_count:
            names = cr.split_cells(self.lines[0][2], d)
            if head_count == 2 and f.names is not None and len(f.names) == len(names):
                names = list(f.names)
        first_data = self.lines[head_count]
        k = len(cr.split_cells(cr._data_part(first_data[2]), d))
        if names is not None and len(names) != k:
            raise ScalesieveError(f"the header names {len(names)} columns but the rows have {k} "
                                  f"cells ({d.describe()}-separated)", self.source,
                                  self.lines[0][0])
        scale, unit = f.time_scale, f.time_unit
        if self.time == "no":
            scale = unit = None
        elif self.time == "yes" and scale is None:
            scale, unit = 1.0, "s"
        elif self.time == AUTO and (self.header != AUTO or self.delimiter != AUTO):
            found = None
            if names:
                try:
                    found = cr.time_unit_of(names[0])
                except ValueError:
                    found = None
            scale, unit = found if found else (None, None)
        if scale is not None and self.unit != AUTO:
            scale, unit = cr.TIME_UNITS[self.unit], self.unit
        same_time = scale is not None and unit == f.time_unit and f.time_kind is not None
        return cr.TextLayout(d, k, names, [ln[0] for ln in self.lines[:head_count]],
                             first_data[1], first_data[0], scale, unit, self.encoding,
                             [(ln[0], ln[2]) for ln in self.lines[head_count:]],
                             f.time_kind if same_time else ("number" if scale else None),
                             f.time_origin if same_time else None,
                             f.clock_form if same_time else None)

    def read(self, rate: float | None, fill_gaps: str | None) -> Recording:
        """Read the whole file under the chosen settings."""
        if self.as_found():
            return cr.read_text(self.source, rate=rate, fill_gaps=fill_gaps)
        return read_with_layout(self.source, self.text, self.layout(), rate, fill_gaps)


def read_with_layout(source: str, text: str, layout: cr.TextLayout, rate: float | None,
                     fill_gaps: str | None) -> Recording:
    """``read_text``'s steps under a given layout (for settings changed by hand)."""
    values, linenos = cr.parse_values(text, layout, source)
    has_time = layout.time_scale is not None
    if has_time and layout.columns < 2:
        raise ScalesieveError("holds only a time column and no channels", source)
    if rate is not None and has_time:
        values, has_time = values[:, 1:], False
        first = 1
    else:
        first = 1 if has_time else 0
    bad = ~np.isfinite(values)
    if bad.any():
        if np.isinf(values).any() or fill_gaps is None:
            line = cr._data_linenos(text, layout)[int(np.argwhere(bad)[0][0])]
            raise ScalesieveError("a cell is empty, NaN or infinite; tick 'fill gaps' to "
                                  "interpolate empty cells", source, int(line))
        fill_linear(values)
    if rate is None:
        if not has_time:
            raise ScalesieveError("has no time column, so the sampling rate is unknown: give "
                                  "the rate", source)
        t = values[:, 0] * layout.time_scale
        rate = cr._time_axis_rate(t, lambda i: int(cr._data_linenos(text, layout)[i]), source)
        samples = values[:, 1:]
    else:
        samples = values
    if layout.names is not None:
        names = [n or f"ch{j}" for j, n in enumerate(layout.names[first:])]
    else:
        names = [f"ch{j}" for j in range(samples.shape[1])]
    return Recording(np.ascontiguousarray(samples, dtype=np.float64), rate, cr._unique(names),
                     source=source, meta={"text": {"delimiter": layout.dialect.describe(),
                                                   "decimal": layout.dialect.decimal,
                                                   "set_by_hand": True}})


class CsvImportDialog(QDialog):
    """Choose how a text table is read; ``recording()`` is the result after Accept."""

    def __init__(self, path: str, parent=None):
        super().__init__(parent)
        self.setWindowTitle(f"Import {os.path.basename(path)}")
        self.resize(900, 620)
        self.choice = TextChoice(path)       # a ScalesieveError here: the caller shows it
        self._result: Recording | None = None
        lay = QVBoxLayout(self)
        top = QHBoxLayout()
        form = QFormLayout()
        self.delimiter = self._combo(DELIMITERS)
        self.decimal = self._combo(DECIMALS)
        self.header = self._combo(HEADERS)
        self.time = self._combo(TIMES)
        self.unit = self._combo(UNITS)
        self.rate = QDoubleSpinBox()
        self.rate.setRange(0.0, 1e9)
        self.rate.setDecimals(3)
        self.rate.setSuffix(" Hz")
        self.rate.setSpecialValueText("from the time column")
        self.rate.setToolTip("sampling rate; needed without a time column, and wins over one")
        self.fill = QCheckBox("fill empty cells by linear interpolation")
        form.addRow("Delimiter", self.delimiter)
        form.addRow("Decimal mark", self.decimal)
        form.addRow("Header", self.header)
        form.addRow("Time column", self.time)
        form.addRow("Time unit", self.unit)
        form.addRow("Rate", self.rate)
        form.addRow("", self.fill)
        top.addLayout(form, 3)
        chan_box = QVBoxLayout()
        chan_box.addWidget(QLabel("Channels"))
        self.channels = QListWidget()
        self.channels.setToolTip("untick the columns not to load")
        chan_box.addWidget(self.channels)
        top.addLayout(chan_box, 2)
        lay.addLayout(top)
        self.found_label = QLabel("")
        self.found_label.setObjectName("hint")
        self.found_label.setWordWrap(True)
        lay.addWidget(self.found_label)
        self.table = QTableWidget()
        self.table.setEditTriggers(QTableWidget.EditTrigger.NoEditTriggers)
        self.table.horizontalHeader().setSectionResizeMode(QHeaderView.ResizeMode.Interactive)
        lay.addWidget(self.table, 1)
        _add_status_and_buttons(self, lay)
        for box in (self.delimiter, self.decimal, self.header, self.time, self.unit):
            box.currentIndexChanged.connect(self.update_preview)
        self.rate.valueChanged.connect(self.update_preview)
        f = self.choice.found
        self.found_label.setText(
            f"Found: {f.dialect.describe()}-separated, decimal "
            f"{'comma' if f.dialect.decimal == ',' else 'point'}, "
            + ("header on line " + ", ".join(map(str, f.header_lines)) if f.header_lines
               else "no header")
            + (f", time column {f.names[0]!r} in {f.time_unit}" if f.time_scale is not None
               and f.names else ", no time column")
            + f"; {f.encoding}. The same rules as the command line.")
        self.update_preview()

    def _combo(self, items) -> QComboBox:
        box = QComboBox()
        for data, label in items:
            box.addItem(label, data)
        return box

    # -------------------------------------------------------------- preview

    def _read_choices(self) -> None:
        c = self.choice
        c.delimiter = self.delimiter.currentData()
        c.decimal = self.decimal.currentData()
        c.header = self.header.currentData()
        c.time = self.time.currentData()
        c.unit = self.unit.currentData()

    def update_preview(self, *_):
        self._read_choices()
        ok = self.buttons.button(QDialogButtonBox.StandardButton.Ok)
        try:
            layout = self.choice.layout()
        except ScalesieveError as exc:
            self._show_problem(exc.one_line())
            ok.setEnabled(False)
            return
        has_time = layout.time_scale is not None
        k = layout.columns
        names = layout.names or [f"column {j + 1}" for j in range(k)]
        heads = []
        for j, name in enumerate(names):
            heads.append(f"{name}\n(time, {layout.time_unit})" if j == 0 and has_time else name)
        rows = layout.sample_rows[:PREVIEW_ROWS]
        self.table.clear()
        self.table.setColumnCount(k)
        self.table.setRowCount(len(rows))
        self.table.setHorizontalHeaderLabels(heads)
        self.table.setVerticalHeaderLabels([str(r[0]) for r in rows])
        problems = []
        times = []
        convert = layout.time_converter() if has_time else None
        for i, (lineno, line) in enumerate(rows):
            cells = cr.split_cells(cr._data_part(line), layout.dialect)
            if len(cells) != k:
                problems.append(f"line {lineno}: {len(cells)} cells, expected {k}")
            for j in range(k):
                text = cells[j] if j < len(cells) else ""
                if j == 0 and convert is not None:
                    try:  # timestamps and clock times: shown as written, read as seconds
                        v = convert(text)
                    except ValueError:
                        v = None
                else:
                    v = cr.cell_value(text, layout.dialect.decimal)
                shown = text if not isinstance(v, float) or convert is not None and j == 0 \
                    else ("(gap)" if math.isnan(v) else f"{v:.10g}")
                item = QTableWidgetItem(shown)
                if not isinstance(v, float):
                    item.setBackground(_BAD)
                    problems.append(f"line {lineno}: {text!r} is not a number")
                elif j == 0 and has_time:
                    item.setBackground(_TIME)
                    times.append(v * layout.time_scale)
                item.setTextAlignment(Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter)
                self.table.setItem(i, j, item)
        self.table.resizeColumnsToContents()
        chan_names = names[1:] if has_time else names
        self._fill_channels(chan_names)
        if problems:
            self._show_problem("; ".join(problems[:3]) + (" …" if len(problems) > 3 else ""))
            ok.setEnabled(False)
            return
        rate = self.rate.value() or None
        if rate is None and len(times) >= 2 and times[-1] > times[0]:
            rate_text = f"{(len(times) - 1) / (times[-1] - times[0]):.6g} Hz from the time column"
        elif rate is not None:
            rate_text = f"{rate:g} Hz as given"
        else:
            self._show_problem("no time column: give the rate")
            ok.setEnabled(False)
            return
        self.status.setStyleSheet("")
        self.status.setText(f"{len(chan_names)} channel{'' if len(chan_names) == 1 else 's'} · "
                            f"{rate_text}"
                            + ("" if self.choice.as_found()
                               else " · settings changed by hand"))
        ok.setEnabled(True)

    def _show_problem(self, text: str) -> None:
        self.status.setStyleSheet("color: #a3261b;")
        self.status.setText(text)

    def _fill_channels(self, names: list[str]) -> None:
        old = {self.channels.item(i).text(): self.channels.item(i).checkState()
               for i in range(self.channels.count())}
        self.channels.clear()
        for name in names:
            item = QListWidgetItem(name)
            item.setFlags(item.flags() | Qt.ItemFlag.ItemIsUserCheckable)
            item.setCheckState(old.get(name, Qt.CheckState.Checked))
            self.channels.addItem(item)

    def chosen_channels(self) -> list[int]:
        return [i for i in range(self.channels.count())
                if self.channels.item(i).checkState() == Qt.CheckState.Checked]

    # -------------------------------------------------------------- result

    def loader(self):
        """A function reading the whole file with the settings shown (no Qt: runs anywhere)."""
        self._read_choices()
        rate = self.rate.value() or None
        fill = "linear" if self.fill.isChecked() else None
        chans = self.chosen_channels()
        choice = self.choice

        def load() -> Recording:
            if not chans:
                raise ScalesieveError("no channel chosen", choice.source)
            rec = choice.read(rate, fill)
            return rec.select(chans) if len(chans) != rec.channels else rec

        return load

    def recording(self) -> Recording:
        """Read the whole file with the settings shown (raises ScalesieveError)."""
        return self.loader()()

    def settings_text(self) -> str:
        self._read_choices()
        return "as found" if self.choice.as_found() else "set by hand"


class MeasurementImportDialog(QDialog):
    """Preview the channels of a measurement file (TDMS, EDF, MAT, HDF5, MDF) and choose.

    Groups or datasets (when the file holds several) in a list; the chosen
    one's channels, with units and rates, ticked to load. The reading itself
    is the command line's (``api.load`` with ``group``/``dataset``/``channel``).
    """

    def __init__(self, path: str, kind: str, parent=None):
        super().__init__(parent)
        from scalesieve.io import measurement_readers as mr

        self.path = path
        self.option, self.parts = mr.contents(path, kind)  # ScalesieveError: caller shows it
        if not self.parts:
            raise ScalesieveError("holds no channel to load", path)
        self.setWindowTitle(f"Import {os.path.basename(path)}")
        self.resize(640, 460)
        lay = QVBoxLayout(self)
        label = mr.NAMES[kind][0]
        note = QLabel(f"{label} file, read by {mr.NAMES[kind][1]}."
                      + (" Physiological traces: for research only, not for diagnosis."
                         if kind in ("edf", "bdf") else ""))
        note.setWordWrap(True)
        lay.addWidget(note)
        form = QFormLayout()
        self.part = QComboBox()
        for name, chans in self.parts.items():
            self.part.addItem(f"{name}  ({len(chans)} channel{'s' if len(chans) != 1 else ''})",
                              name)
        if self.option is not None:
            form.addRow("Group" if self.option == "group" else "Dataset", self.part)
        lay.addLayout(form)
        lay.addWidget(QLabel("Channels"))
        self.channels = QListWidget()
        self.channels.setToolTip("untick the channels not to load")
        lay.addWidget(self.channels, 1)
        _add_status_and_buttons(self, lay)
        self.part.currentIndexChanged.connect(self._fill)
        self.channels.itemChanged.connect(self._check)
        self._fill()

    def _fill(self, *_):
        self.channels.blockSignals(True)
        self.channels.clear()
        for name, unit, rate in self.parts[self.part.currentData()]:
            bits = [b for b in (unit and f"[{unit}]", rate and f"{rate:g} Hz") if b]
            item = QListWidgetItem(name + ("   " + "  ".join(bits) if bits else ""))
            item.setFlags(item.flags() | Qt.ItemFlag.ItemIsUserCheckable)
            item.setCheckState(Qt.CheckState.Checked)
            self.channels.addItem(item)
        rates = {r for _, _, r in self.parts[self.part.currentData()]}
        if len(rates) > 1:
            # Only channels at one rate load together: start with the first one's.
            first = self.parts[self.part.currentData()][0][2]
            for i, (_, _, r) in enumerate(self.parts[self.part.currentData()]):
                if r != first:
                    self.channels.item(i).setCheckState(Qt.CheckState.Unchecked)
        self.channels.blockSignals(False)
        self._check()

    def chosen_channels(self) -> list[int]:
        return [i for i in range(self.channels.count())
                if self.channels.item(i).checkState() == Qt.CheckState.Checked]

    def _check(self, *_):
        chans = self.parts[self.part.currentData()]
        chosen = self.chosen_channels()
        rates = {chans[i][2] for i in chosen}
        ok = self.buttons.button(QDialogButtonBox.StandardButton.Ok)
        if not chosen:
            self.status.setText("tick at least one channel")
            ok.setEnabled(False)
        elif len(rates) > 1:
            self.status.setText("the ticked channels have different rates; tick channels "
                                "of one rate")
            ok.setEnabled(False)
        else:
            self.status.setText(f"{len(chosen)} of {len(chans)} channels")
            ok.setEnabled(True)

    def loader(self):
        """A function reading the chosen channels (no Qt: runs in the worker)."""
        from scalesieve import api

        path, part, option = self.path, self.part.currentData(), self.option
        chans = self.chosen_channels()
        total = self.channels.count()
        rates = {r for _, _, r in self.parts[part]}
        kwargs = {option: part} if option else {}

        def load() -> Recording:
            if len(rates) > 1 or len(chans) == 1:
                parts = [api.load(path, channel=k, **kwargs) for k in chans]
                if len(parts) == 1:
                    return parts[0]
                n = min(p.n for p in parts)
                first = parts[0]
                return Recording(np.column_stack([p.samples[:n, 0] for p in parts]), first.rate,
                                 [p.channel_names[0] for p in parts], source=path,
                                 meta=dict(first.meta), start_time=first.start_time,
                                 warnings=first.warnings, units=[p.units[0] for p in parts])
            rec = api.load(path, **kwargs)
            return rec.select(chans) if len(chans) != total else rec

        return load


def ask_measurement_channels(parent, path: str):
    """A loader for ``path`` after the channel preview, or None (cancelled or refused).

    A file with one group or dataset holding one channel opens without asking.
    """
    from scalesieve import api
    from scalesieve.gui.error_dialog import show_error
    from scalesieve.io import measurement_readers as mr
    from scalesieve.io.readers import _read_head

    ext = os.path.splitext(path)[1].lower()
    try:
        kind = mr.kind_of(_read_head(path), ext)
        dlg = MeasurementImportDialog(path, kind, parent) if kind else None
    except ScalesieveError as exc:
        show_error(parent, exc.one_line())
        return None
    if dlg is None or (len(dlg.parts) == 1 and dlg.channels.count() == 1):
        return lambda: api.load(path)
    parent._import_dialog = dlg
    if dlg.exec() != QDialog.DialogCode.Accepted:
        return None
    return dlg.loader()
