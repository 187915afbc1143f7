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


def test_row_headers_of_many_bands_come_a_few_per_turn(window, qtbot):
    # 64 packet bands: the first headers come with the model, the rest in later turns
    # of the event loop, another timer running between them; all end up in band order,
    # one per row, top to bottom.
    from scalesieve import api
    from scalesieve.core.transforms import TransformSpec
    from scalesieve.gui.row_headers import HEADERS_PER_TURN

    from sample_files import sample

    column = window.scale_map.header_column
    seen = []
    window.adapter.modelReplaced.connect(
        lambda: seen.append((len(column.headers), column.filling(),
                             window.adapter.bands_pending())))
    ticks = []
    timer = QTimer()
    timer.setInterval(0)
    timer.timeout.connect(lambda: ticks.append(len(column.headers)))
    timer.start()
    window.open_recording(api.load(sample("fan_bearing.wav")),
                          TransformSpec("packet", "db4", 6, "symmetric"))
    assert window.adapter.wait_idle(60) is None
    timer.stop()
    m = window.adapter.model
    assert seen == [(HEADERS_PER_TURN, True, True)]
    assert not column.filling()
    assert list(window.scale_map.headers) == list(m.band_keys)
    assert [h.name.text() for h in window.scale_map.headers.values()] == \
        [f"w6.{k}" for k in range(64)]
    tops = [h.geometry().top() for h in window.scale_map.headers.values()]
    assert tops == sorted(tops) and len(set(tops)) == 64
    # the loop ran between turns: other timers saw the column part filled
    assert len({t for t in ticks if HEADERS_PER_TURN <= t < 64}) >= 3


def test_a_lane_opened_before_its_header_is_made_shows_open_on_it(window, qtbot):
    from scalesieve import api
    from scalesieve.core.transforms import TransformSpec

    from sample_files import sample

    column = window.scale_map.header_column
    late = []

    def mark_late_lane():
        key = window.adapter.model.band_keys[-1]     # w6.63: its header comes last
        assert key not in column.headers
        column.set_lane_open(key, True)
        late.append(key)

    window.adapter.modelReplaced.connect(mark_late_lane)
    window.open_recording(api.load(sample("fan_bearing.wav")),
                          TransformSpec("packet", "db4", 6, "symmetric"))
    assert window.adapter.wait_idle(60) is None
    [key] = late
    assert window.scale_map.headers[key].lane.isChecked()
    window.adapter.modelReplaced.disconnect(mark_late_lane)
    # the lanes the window opened itself (the most impulsive band, the largest share)
    # show open on their headers, whichever turn made them
    column.set_lane_open(key, False)
    assert not window.scale_map.headers[key].lane.isChecked()
    opened = {k for k, h in window.scale_map.headers.items() if h.lane.isChecked()}
    assert opened == set(window.bands.open_keys) and len(opened) >= 1


def test_the_most_impulsive_band_is_found_off_the_window_thread(window, monkeypatch):
    import threading

    from scalesieve.gui import bands_pane

    threads = []
    find = bands_pane._most_impulsive_key

    def watched(*args):
        threads.append(threading.current_thread())
        return find(*args)

    monkeypatch.setattr(bands_pane, "_most_impulsive_key", watched)
    m = open_sample(window, "pump_bearing.wav")
    assert threads and threading.main_thread() not in threads
    # and the lanes it chose opened: the largest share's band among them
    shares = {k: r["energy_fraction"] for k, r in window.scale_map._table.items()}
    assert max(shares, key=shares.get) in window.bands.open_keys
    assert set(window.bands.rows) == set(window.bands.open_keys)
    assert all(k in m.band_keys for k in window.bands.open_keys)
