"""The Events pane shows the same events as the command line and the API, and acts on them.

Recordings are invented here (written with Python's wave module); CSV
exports are read back with Python's csv module.
"""

from __future__ import annotations

import csv
import json
import math
import wave

import numpy as np
import pytest

pytest.importorskip("pytestqt")
from PySide6.QtCore import QObject, Qt, Signal  # noqa: E402

from scalesieve import api  # noqa: E402
from scalesieve.cli import main  # noqa: E402
from scalesieve.core import events as ev  # noqa: E402
from scalesieve.gui.events_pane import COLUMNS, EventsPane, zoom_span  # noqa: E402

RATE = 16000
CLICKS = {0: [0.12, 0.47, 0.8], 1: [0.3, 0.47, 0.61, 0.9]}


def _wav(path):
    """Two channels of hiss with sharp clicks at CLICKS (16-bit PCM by the wave module)."""
    rng = np.random.default_rng(8)
    n = RATE
    x = rng.normal(0.0, 0.01, (n, 2))
    t = np.arange(n) / RATE
    for ch, times in CLICKS.items():
        for i, tk in enumerate(times):
            # derivative-of-Gaussian click, 60 us wide
            x[:, ch] += (0.3 + 0.1 * i) * -(t - tk) / 6e-5 * np.exp(0.5 - 0.5 * ((t - tk) / 6e-5) ** 2)
    pcm = np.clip(np.round(x * 32767), -32768, 32767).astype("<i2")
    with wave.open(str(path), "wb") as w:
        w.setnchannels(2)
        w.setsampwidth(2)
        w.setframerate(RATE)
        w.writeframes(pcm.tobytes())
    return str(path)


@pytest.fixture
def recording(tmp_path):
    path = _wav(tmp_path / "cable.wav")
    return path, api.build_model(api.load(path))


@pytest.fixture
def pane(qtbot, recording):
    _, model = recording
    p = EventsPane(model)
    qtbot.addWidget(p)
    p.resize(1000, 400)
    p.show()
    return p


def _table_events(p):
    """Events as the table shows them, read back through the Qt model (raw numbers)."""
    rows = []
    for r in range(p.proxy.rowCount()):
        rows.append(tuple(p.proxy.data(p.proxy.index(r, c), Qt.ItemDataRole.UserRole)
                          for c in range(len(COLUMNS))))
    return rows


def _cli_events(capsys, path, *argv):
    assert main(["events", path, "--json", *argv]) == 0
    return json.loads(capsys.readouterr().out)["events"]


def _as_rows(events):
    return [tuple(e[f] for f, _, _ in COLUMNS) for e in events]


def test_pane_cli_and_api_give_the_same_events(pane, recording, capsys):
    path, model = recording
    api_events, _ = model.events()
    assert pane.events == api_events
    assert _table_events(pane) == _as_rows(_cli_events(capsys, path))
    assert [e.to_json() for e in api_events] == _cli_events(capsys, path)
    # every click found, in its own channel
    for ch, times in CLICKS.items():
        mine = [e for e in pane.events if e.channel == ch]
        assert len(mine) == len(times)
        assert all(e.start_s <= tk <= e.stop_s for e, tk in zip(mine, times))


def test_k_levels_and_timing_rerun_live(qtbot, pane, recording, capsys):
    path, model = recording
    counts = []
    pane.eventsChanged.connect(counts.append)
    pane.k_box.setValue(30.0)
    qtbot.waitUntil(lambda: bool(counts), timeout=3000)          # after the short pause
    assert pane.events == model.events(k=30.0)[0]
    assert all(e.score > 30.0 for e in pane.events)
    assert _table_events(pane) == _as_rows(_cli_events(capsys, path, "--k", "30"))
    counts.clear()
    pane.levels_edit.setText("1")
    pane.kind_box.setCurrentIndex(pane.kind_box.findData("dwt"))
    qtbot.waitUntil(lambda: bool(counts), timeout=3000)
    assert pane.levels == (1,) and pane.kind == "dwt"
    assert _table_events(pane) == _as_rows(
        _cli_events(capsys, path, "--k", "30", "--levels", "1", "--transform", "dwt"))


def test_bad_levels_say_so_and_keep_the_table(qtbot, pane):
    before = list(pane.events)
    pane.levels_edit.setText("a")
    pane.refresh()
    assert "approximation" in pane.summary.text() and pane.events == before
    pane.levels_edit.setText("99")
    pane.refresh()
    assert "level 99" in pane.summary.text()
    pane.levels_edit.setText("1,2")
    pane.refresh()
    assert pane.summary.text().startswith(f"{len(before)} events")


def test_sorting_by_score_and_channel_filter(pane):
    col = [f for f, _, _ in COLUMNS].index("score")
    pane.table.sortByColumn(col, Qt.SortOrder.DescendingOrder)
    scores = [row[col] for row in _table_events(pane)]
    assert scores == sorted(scores, reverse=True)
    assert scores[0] == max(e.score for e in pane.events)
    pane.channel_box.setCurrentIndex(pane.channel_box.findData(1))
    assert {row[-1] for row in _table_events(pane)} == {1}
    assert pane.proxy.rowCount() == len(CLICKS[1])


class _Axis:
    def __init__(self):
        self.ranges = []

    def set_range(self, t0, t1):
        self.ranges.append((t0, t1))


class _Map:
    """Stands in for the Scale map: a pyqtgraph plot and its band rows."""

    def __init__(self):
        import pyqtgraph as pg

        self.plot = pg.PlotWidget()
        self.keys = [1, 2, 3, 4, "a"]


def test_choosing_an_event_zooms_with_a_margin_and_marks_the_map(qtbot, recording):
    _, model = recording
    axis, scale_map = _Axis(), _Map()
    p = EventsPane(model, time_axis=axis, scale_map=scale_map)
    qtbot.addWidget(p)
    chosen = []
    p.eventSelected.connect(lambda a, b: chosen.append((a, b)))
    with qtbot.waitSignal(p.zoomRequested) as zoom:
        p.select_row(2)
    e = p.chosen_event()
    assert chosen == [(e.start_s, e.stop_s)]
    t0, t1 = zoom.args
    assert axis.ranges == [(t0, t1)] == [zoom_span(e, model.recording.duration_s)]
    assert t0 < e.start_s and t1 > e.stop_s                       # a margin each side
    assert e.start_s - t0 >= 0.005 and t1 - e.stop_s >= 0.005
    assert p.mark.visible
    box = p.mark.box.rect()
    assert (box.left(), box.right()) == pytest.approx((e.start_s, e.stop_s))
    assert (box.top(), box.bottom()) == (0, 2)                    # rows of d1 and d2
    assert p.mark.line.value() == pytest.approx(e.peak_s)


def test_next_and_previous_keys_walk_the_table(qtbot, pane):
    from PySide6.QtTest import QTest

    pane.activateWindow()
    pane.select_row(0)
    qtbot.waitUntil(lambda: pane.current_row() == 0)
    QTest.keyClick(pane.table, Qt.Key.Key_BracketRight)
    QTest.keyClick(pane.table, Qt.Key.Key_BracketRight)
    assert pane.current_row() == 2
    QTest.keyClick(pane.table, Qt.Key.Key_BracketLeft)
    assert pane.current_row() == 1
    pane.next_button.click()
    assert pane.current_row() == 2
    for _ in range(20):
        pane.next_event()
    assert pane.current_row() == pane.proxy.rowCount() - 1       # stops at the last


def test_an_event_becomes_a_region_edit_that_removes_the_click(qtbot, pane, recording):
    _, model = recording
    target = next(e for e in pane.events if e.channel == 1 and abs(e.start_s - 0.61) < 0.01)
    pane.select_event(target)
    with qtbot.waitSignal(pane.regionRequested) as sig:
        pane.region_button.click()
    edit = sig.args[0]
    assert (edit.op, edit.levels, edit.gain, edit.channels) == ("region", (1, 2), 0.0, (1,))
    assert (edit.start_s, edit.stop_s) == (target.start_s, target.stop_s)
    assert model.edits == (edit,)
    i0, i1 = int(target.start_s * RATE), int(target.stop_s * RATE) + 1
    before = np.max(np.abs(model.original(1)[i0:i1]))
    after = np.max(np.abs(model.cleaned(1)[i0:i1]))
    assert after < 0.5 * before                                   # the click is mostly gone
    assert np.array_equal(model.cleaned(0), model.original(0))    # the other channel untouched


def test_export_writes_the_cli_csv_and_keeps_existing_files(pane, recording, tmp_path, capsys):
    path, _ = recording
    out = tmp_path / "pane.csv"
    pane.export_csv(str(out))
    ref = tmp_path / "cli.csv"
    assert main(["events", path, "--csv", str(ref)]) == 0
    capsys.readouterr()
    with open(out, newline="") as a, open(ref, newline="") as b:       # Python's csv module
        assert list(csv.reader(a)) == list(csv.reader(b))
    from scalesieve.errors import ScalesieveError

    out.write_text("keep me\n")
    with pytest.raises(ScalesieveError):
        pane.export_csv(str(out))
    assert out.read_text() == "keep me\n"
    with pytest.raises(ScalesieveError):
        pane.export_csv(path, force=True)                          # never the input


def test_summary_shows_count_and_train_rate(qtbot, tmp_path):
    # an invented impact train at 40 Hz on one channel
    rng = np.random.default_rng(1)
    n = 2 * RATE
    t = np.arange(n) / RATE
    x = rng.normal(0, 0.01, n)
    for tk in np.arange(0.05, 1.95, 1 / 40.0):
        seg = t[int(math.ceil(tk * RATE)):int(math.ceil(tk * RATE)) + 80] - tk
        i0 = int(math.ceil(tk * RATE))
        x[i0:i0 + seg.size] += 0.3 * np.exp(-seg / 0.0008) * np.sin(2 * np.pi * 5000 * seg)
    rec = api.Recording(x[:, None], RATE, ["rig"])
    p = EventsPane(api.build_model(rec))
    qtbot.addWidget(p)
    assert p.repetition is not None and p.repetition["rate_hz"] == pytest.approx(40.0, rel=0.01)
    assert p.summary.text().startswith(f"{len(p.events)} events")
    assert "40 Hz" in p.summary.text()
    assert "qualified people" in p.caution.text() and "not for diagnosis" in p.caution.text()


class _Adapter(QObject):
    """The parts of the window's model adapter the pane uses."""

    modelReplaced = Signal()

    def __init__(self):
        super().__init__()
        self.model = None
        self.recording = None
        self.added = []

    def add_edit(self, edit):
        self.added.append(edit)
        return True


def test_pane_follows_an_adapter(qtbot, recording):
    _, model = recording
    adapter = _Adapter()
    p = EventsPane(adapter)
    qtbot.addWidget(p)
    assert p.events == [] and "no recording" in p.summary.text()
    adapter.model, adapter.recording = model, model.recording
    adapter.modelReplaced.emit()
    assert p.events == model.events()[0]
    assert p.channel_box.count() == 3                              # all, ch 0, ch 1
    adapter.model = None                                           # lent to the worker
    adapter.modelReplaced.emit()
    assert p.events == [] and "waiting" in p.summary.text()
    adapter.model = model
    adapter.modelReplaced.emit()
    p.select_row(0)
    edit = p.mute_chosen()
    assert adapter.added == [edit] and model.edits == ()           # edits go through the adapter


def test_pane_with_the_window_adapter(qtbot, recording):
    # The window's own adapter decomposes in a worker thread and lends the
    # model away during a transform change; the pane follows it.
    adapter_mod = pytest.importorskip("scalesieve.gui.model_adapter")
    path, model = recording
    adapter = adapter_mod.ModelAdapter()
    try:
        p = EventsPane(adapter)
        qtbot.addWidget(p)
        with qtbot.waitSignal(adapter.modelReplaced, timeout=20000):
            adapter.open_recording(lambda: api.load(path), label="cable.wav")
        assert p.events == model.events()[0]
        p.select_row(0)
        edit = p.mute_chosen()
        assert adapter.model.edits == (edit,)
    finally:
        adapter.shutdown()


def test_mark_follows_the_channel_the_map_shows(qtbot, recording):
    _, model = recording
    scale_map = _Map()
    scale_map.channel = 0
    p = EventsPane(model, scale_map=scale_map)
    qtbot.addWidget(p)
    p.set_channel(0)
    asked = []
    p.channelRequested.connect(asked.append)
    other = next(e for e in p.events if e.channel == 1)
    p.select_event(other)
    assert asked == [1] and not p.mark.visible          # map still on channel 0
    scale_map.channel = 1                               # the window switched
    p.set_channel(1)
    assert p.mark.visible
    # a table showing one channel follows the window's channel
    p.channel_box.setCurrentIndex(p.channel_box.findData(0))
    p.set_channel(1)
    assert p.channel_box.currentData() == 1


def test_a_narrow_dock_needs_no_sideways_scroll_and_a_wide_one_shows_every_column(
        qtbot, pane):
    """At a side dock's ~330 px the table keeps time, score, level and channel whole and
    leaves out what does not fit (the row's tooltip still has it); widened, every column
    is back.  Widths are Qt's own (QHeaderView section sizes, the viewport's width)."""
    from PySide6.QtWidgets import QApplication

    qtbot.waitUntil(lambda: len(pane.events) > 0, timeout=10000)
    table, header = pane.table, pane.table.horizontalHeader()
    fields = [c[0] for c in COLUMNS]
    pane.resize(330, 500)
    QApplication.processEvents()
    shown = [f for f in fields if not header.isSectionHidden(fields.index(f))]
    assert {"peak_s", "score", "level", "channel"} <= set(shown)
    assert table.horizontalScrollBar().maximum() == 0
    assert header.length() <= table.viewport().width()
    fm = header.fontMetrics()
    for f in ("peak_s", "score", "level", "channel"):
        col = fields.index(f)
        assert fm.horizontalAdvance(COLUMNS[col][1]) <= header.sectionSize(col)
    row = pane.proxy.index(0, fields.index("peak_s"))
    tip = pane.proxy.data(row, Qt.ItemDataRole.ToolTipRole)
    start = pane.proxy.data(pane.proxy.index(0, fields.index("start_s")),
                            Qt.ItemDataRole.UserRole)
    assert f"from {start:.6f} to " in tip
    pane.resize(1000, 500)
    QApplication.processEvents()
    assert not any(header.isSectionHidden(c) for c in range(len(COLUMNS)))
