"""The Bands pane makes a lane's row when the lane opens; rows of lanes still open come
one per turn of the event loop (the window keeps answering)."""

from PySide6.QtCore import QCoreApplication, QTimer

from sample_files import open_sample


def test_rows_come_one_per_turn_and_in_order(window, qtbot):
    bands = window.bands
    keys = [1, 2, 3, 4, "a"]
    bands.open_keys[:] = [1, 2, 4, "a"]          # lanes left open by an earlier recording
    bands._ensure_rows(keys)
    assert bands.rows_pending() and bands.rows == {}
    assert window.adapter.bands_pending()        # wait_idle waits for them too
    ticks = []
    timer = QTimer()
    timer.setInterval(0)
    timer.timeout.connect(lambda: ticks.append(len(bands.rows)))
    timer.start()
    qtbot.waitUntil(lambda: not bands.rows_pending(), timeout=5000)
    timer.stop()
    # only the open lanes' rows are made, in band order
    assert list(bands.rows) == [1, 2, 4, "a"]
    # another event ran between rows: the loop was never held for all of them at once
    assert len(set(t for t in ticks if 0 < t < 4)) >= 2
    # the same bands again: nothing is rebuilt
    rows = dict(bands.rows)
    bands._ensure_rows(keys)
    assert not bands.rows_pending() and bands.rows == rows
    # a closed lane's row is made when it opens, in its place among the others
    bands.set_lane(3, True)
    assert list(bands.rows) == keys and bands.rows[3].isVisible()
    layout = [bands.body_layout.itemAt(i).widget() for i in range(len(keys))]
    assert layout == [bands.rows[k] for k in keys]


def test_a_recording_opens_without_rows_for_closed_lanes(window):
    m = open_sample(window, "pump_bearing.wav")
    bands = window.bands
    assert bands.open_keys and set(bands.rows) == set(bands.open_keys)
    assert len(bands.rows) < len(m.band_keys)


def test_rows_made_late_show_the_recipe(window, qtbot):
    # A row made after the model came in shows the band's state (a muted band).
    m = open_sample(window, "pump_bearing.wav")
    window.scale_map.headers[2].mute.click()
    assert m.edits[0].levels == (2,)
    window.bands.set_lane(2, True)
    window.bands._ensure_rows([])               # drop every row, then ask for them again
    window.bands._ensure_rows(m.band_keys)
    qtbot.waitUntil(lambda: not window.bands.rows_pending(), timeout=5000)
    QCoreApplication.processEvents()
    assert 2 in window.bands.rows and "muted" in window.bands.rows[2].info.text()
    assert window.scale_map.headers[2].mute.isChecked()
    assert not window.scale_map.headers[1].mute.isChecked()
