"""The window with measurement files and clocked recordings.

References: npTDMS and edfio write the files (their values are the expected
ones); the clock labels are checked against Python's datetime arithmetic.
"""

import datetime

import numpy as np
import pytest
from PySide6.QtCore import QMimeData, QPointF, Qt, QUrl
from PySide6.QtGui import QDragEnterEvent

from sample_files import open_sample

nptdms = pytest.importorskip("nptdms")
edfio = pytest.importorskip("edfio")


def _tdms(path, groups=("run_a",)):
    x = np.sin(np.arange(4096) / 5.0)
    with nptdms.TdmsWriter(str(path)) as w:
        objs = []
        for g in groups:
            for name, unit in (("accel_x", "g"), ("accel_y", "g")):
                objs.append(nptdms.ChannelObject(g, name, x, properties={
                    "wf_increment": 1 / 4096, "unit_string": unit,
                    "wf_start_time": np.datetime64("2026-03-01T07:59:59")}))
        w.write_segment(objs)
    return x


def test_open_filter_and_drops_take_measurement_files(window, tmp_path):
    from scalesieve.gui.main_window import OPEN_FILTER

    for pattern in ("*.tdms", "*.edf", "*.bdf", "*.mat", "*.h5", "*.mf4", "*.xlsx"):
        assert pattern in OPEN_FILTER
    p = tmp_path / "rig.tdms"
    _tdms(p)
    mime = QMimeData()
    mime.setUrls([QUrl.fromLocalFile(str(p))])
    args = (Qt.DropAction.CopyAction, mime, Qt.MouseButton.LeftButton,
            Qt.KeyboardModifier.NoModifier)
    try:        # PySide6 6.12 takes a QPointF (the QPoint form is deprecated there)
        ev = QDragEnterEvent(QPointF(10, 10), *args)
    except TypeError:   # older PySide6: a QPoint
        ev = QDragEnterEvent(QPointF(10, 10).toPoint(), *args)
    window.dragEnterEvent(ev)
    assert ev.isAccepted()


def test_import_dialog_previews_groups_and_channels_and_loads_the_choice(qtbot, tmp_path):
    from scalesieve.gui.csv_import_dialog import MeasurementImportDialog

    p = tmp_path / "two.tdms"
    x = _tdms(p, groups=("run_a", "run_b"))
    dlg = MeasurementImportDialog(str(p), "tdms")
    qtbot.addWidget(dlg)
    assert [dlg.part.itemData(i) for i in range(dlg.part.count())] == ["run_a", "run_b"]
    labels = [dlg.channels.item(i).text() for i in range(dlg.channels.count())]
    assert labels[0].startswith("accel_x") and "[g]" in labels[0] and "4096 Hz" in labels[0]
    dlg.part.setCurrentIndex(1)
    dlg.channels.item(0).setCheckState(Qt.CheckState.Unchecked)
    rec = dlg.loader()()
    assert rec.channel_names == ["accel_y"] and rec.rate == 4096.0
    np.testing.assert_array_equal(rec.samples[:, 0], x)


def test_edf_channels_at_other_rates_are_not_loaded_together(qtbot, tmp_path):
    from scalesieve.gui.csv_import_dialog import MeasurementImportDialog

    p = tmp_path / "lab.edf"
    edfio.Edf([edfio.EdfSignal(np.zeros(500), 250, label="slow"),
               edfio.EdfSignal(np.zeros(2000), 1000, label="fast")]).write(p)
    dlg = MeasurementImportDialog(str(p), "edf")
    qtbot.addWidget(dlg)
    assert dlg.chosen_channels() == [0]       # only the first rate starts ticked
    dlg.channels.item(1).setCheckState(Qt.CheckState.Checked)
    assert not dlg.buttons.button(dlg.buttons.StandardButton.Ok).isEnabled()
    dlg.channels.item(0).setCheckState(Qt.CheckState.Unchecked)
    rec = dlg.loader()()
    assert rec.rate == 1000.0 and rec.n == 2000


def test_time_axis_shows_the_recordings_clock(window):
    open_sample(window, "cooling_loop_logger.csv")
    axis = window.time_axis
    start = datetime.datetime.fromisoformat("2026-03-31T23:59:40+02:00")
    assert axis.clock_start == start
    bottom = window.reconstruction.plot.getPlotItem().getAxis("bottom")
    # 22 s after the start is 00:00:02 on the next day (datetime arithmetic)
    assert bottom.tickStrings([22.0], 1.0, 1.0) == ["00:00:02"]
    axis._toggle_clock(False)
    assert bottom.tickStrings([22.0], 1.0, 1.0) == ["22"]   # seconds again
    axis._toggle_clock(True)


def test_clock_labels_follow_the_spacing():
    from scalesieve.gui.time_axis import clock_labels

    start = datetime.datetime(2026, 1, 31, 23, 59, 59, 750000)
    assert clock_labels([0.0, 0.25], 0.25, start) == ["23:59:59.75", "00:00:00.00"]
    assert clock_labels([0.0, 86400.0], 86400.0, start) == ["2026-01-31", "2026-02-01"]


def test_text_import_preview_reads_timestamp_cells(qtbot):
    from sample_files import sample

    from scalesieve.gui.csv_import_dialog import CsvImportDialog

    dlg = CsvImportDialog(sample("cooling_loop_logger.csv"))
    qtbot.addWidget(dlg)
    assert dlg.buttons.button(dlg.buttons.StandardButton.Ok).isEnabled()
    # 20 ms between rows (sample_signals/README.md): 50 Hz
    assert "50 Hz" in dlg.status.text()
    assert dlg.table.item(0, 0).text() == "2026-03-31 23:59:40.000+02:00"


def test_a_shortened_wav_is_opened_with_its_warning_in_the_window(window):
    import os

    import scipy

    path = os.path.join(os.path.dirname(scipy.__file__), "io", "tests", "data",
                        "test-44100Hz-le-1ch-4bytes-early-eof.wav")
    if not os.path.exists(path):
        pytest.skip("scipy's early-eof WAV is not installed")
    window.open_path(path, ask_text_settings=False)
    assert window.adapter.wait_idle(60) is None
    text = window.statusBar().currentMessage()
    # the header's data chunk declares 4410 frames; 236 are in the file
    assert "4410" in text and "236" in text
