"""The Bands pane makes its rows one per turn of the event loop (the window keeps answering)."""

from PySide6.QtCore import QCoreApplication, QTimer

from sample_files import open_sample


def test_rows_come_one_per_turn_and_in_order(window, qtbot):
    bands = window.bands
    keys = [1, 2, 3, 4, "a"]
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
    assert list(bands.rows) == keys
    # another event ran between rows: the loop was never held for all of them at once
    assert len(set(t for t in ticks if 0 < t < len(keys))) >= 2
    # the same bands again: nothing is rebuilt
    rows = dict(bands.rows)
    bands._ensure_rows(keys)
    assert not bands.rows_pending() and bands.rows == rows


def test_rows_made_late_show_the_recipe(window, qtbot):
    # A row made after the model came in shows the band's state (a muted band).
    m = open_sample(window, "pump_bearing.wav")
    window.scale_map.headers[2].mute.click()
    assert m.edits[0].levels == (2,)
    window.bands._ensure_rows([])               # drop every row, then ask for them again
    window.bands._ensure_rows(m.band_keys)
    qtbot.waitUntil(lambda: not window.bands.rows_pending(), timeout=5000)
    QCoreApplication.processEvents()
    assert window.scale_map.headers[2].mute.isChecked()
    assert not window.scale_map.headers[1].mute.isChecked()
