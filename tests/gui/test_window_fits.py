"""The window fits common laptop screens with the Impacts dock open, nothing cut or overlapping.

References: the PNG specification (IHDR: width and height as big-endian 32-bit
integers at bytes 16..24) for the snapshot's size; the sizes are the usual
laptop screens 1280×800 and 1366×768 (common practice).
"""

import struct

import pytest
from PySide6.QtWidgets import QApplication

from sample_files import sample
from scalesieve.core.transforms import TransformSpec

FAN = "fan_bearing.wav"
SCREENS = [(1280, 800), (1366, 768), (1920, 1080)]


def _open_with_impacts(window, qtbot, size):
    from scalesieve import api

    window.resize(*size)
    window.open_recording(api.load(sample(FAN)), TransformSpec("dwt", "db4", None, "symmetric"))
    assert window.adapter.wait_idle(60) is None
    dock = window.impacts_dock
    dock.show()
    QApplication.processEvents()
    qtbot.waitUntil(lambda: not (dock.impulse_map.busy or dock.envelope.busy), timeout=60000)
    dock.envelope.set_bearing("10,8.0,42.0,0", 29.5)
    window.resize(*size)
    QApplication.processEvents()
    return dock


def _below(upper, lower) -> bool:
    """``lower`` starts at or below the bottom of ``upper`` (both in window coordinates)."""
    top_of_lower = lower.mapTo(lower.window(), lower.rect().topLeft()).y()
    bottom_of_upper = upper.mapTo(upper.window(), upper.rect().bottomLeft()).y()
    return top_of_lower >= bottom_of_upper


@pytest.mark.parametrize("size", SCREENS)
def test_the_window_with_the_impacts_dock_fits_the_screen(window, qtbot, size):
    dock = _open_with_impacts(window, qtbot, size)
    assert window.minimumSizeHint().height() <= size[1]
    assert (window.width(), window.height()) == size
    # one toolbar row: the listening buttons beside the others, not below them
    assert window.listen_toolbar.y() == window.main_toolbar.y()
    # every pane keeps its least height (the splitter never squeezes one below it)
    for pane in (window.scale_map, window.bands, window.reconstruction):
        assert pane.height() >= pane.minimumHeight()
    # the fan's 13 DWT rows fit the map without scrolling its time axis away
    assert len(window.scale_map.keys) == 13 and not window.scale_map.row_scroll.scrolling
    imap, env = dock.impulse_map, dock.envelope
    for pane in (imap, env):
        assert pane.plot.height() >= pane.plot.minimumHeight()
        assert pane.readout.geometry().top() >= pane.plot.geometry().bottom()
        need = pane.readout.heightForWidth(pane.readout.width())
        assert pane.readout.height() >= min(need, 2 * pane.readout.fontMetrics().lineSpacing())
    # the caution sits under both panes, uncovered
    assert _below(env.readout, dock.caution) and _below(imap.readout, dock.caution)


def test_axis_names_of_the_impacts_plots_fit_at_their_least_height(window, qtbot):
    dock = _open_with_impacts(window, qtbot, (1280, 800))
    for plot in (dock.impulse_map.plot, dock.envelope.plot):
        plot.setFixedHeight(plot.minimumHeight())
    QApplication.processEvents()
    from PySide6.QtGui import QFontMetricsF

    for plot in (dock.impulse_map.plot, dock.envelope.plot):
        assert plot.height() == plot.minimumHeight()
        left = plot.getPlotItem().getAxis("left")
        # the name is drawn turned a quarter: its length runs along the axis's height
        assert left.label.isVisible()
        glyphs = QFontMetricsF(left.label.font()).horizontalAdvance(left.label.toPlainText())
        assert glyphs <= left.geometry().height()
        assert "x0." not in left.labelString()     # no scale factor beside the name


def test_reconstruction_lanes_and_figures_line_do_not_overlap(window, qtbot):
    _open_with_impacts(window, qtbot, (1280, 800))
    rec = window.reconstruction
    assert rec.removed_plot.height() >= rec.removed_plot.minimumHeight() > 30
    assert _below(rec.plot, rec.removed_plot)
    assert _below(rec.removed_plot, rec.metrics_label)
    # at 1280 px the figures take one line under the pane
    lines = rec.metrics_label.height() / rec.metrics_label.fontMetrics().lineSpacing()
    assert lines < 2


def test_band_lanes_hint_is_cut_at_its_end_never_its_start(window, qtbot):
    _open_with_impacts(window, qtbot, (1280, 800))
    hint = window.bands.hint
    assert hint.toolTip() == hint.text()
    for width in (600, 200, 60):
        hint.setFixedWidth(width)
        shown = hint.shown_text()
        assert shown == hint.text() or (shown.endswith("…")
                                        and hint.text().startswith(shown[:-1]))
        assert hint.fontMetrics().horizontalAdvance(shown) <= hint.contentsRect().width()


def test_toolbars_fall_back_to_two_rows_only_when_one_cannot_hold_them(window):
    window.resize(1920, 1080)
    QApplication.processEvents()
    assert not window.toolbars.compact and not window.toolbars.listen_on_own_row
    window.resize(1280, 800)
    QApplication.processEvents()
    assert window.toolbars.compact and not window.toolbars.listen_on_own_row
    undo = window.main_toolbar.widgetForAction(window.act_undo)
    assert undo.toolTip()                        # an icon alone still says what it does
    # narrower than even the compact row (the window's panes keep it wider than this;
    # a long channel name does the same): full words again, the listening row below
    window.toolbars.fit(900)
    QApplication.processEvents()
    assert window.toolbars.listen_on_own_row and not window.toolbars.compact
    assert window.listen_toolbar.y() > window.main_toolbar.y()
    window.toolbars.fit(window.width())
    QApplication.processEvents()
    assert not window.toolbars.listen_on_own_row
    assert window.listen_toolbar.y() == window.main_toolbar.y()


@pytest.mark.parametrize("size", [(1280, 800), (1366, 768)])
def test_snapshot_at_a_laptop_size_is_that_size(window, tmp_path, size):
    from scalesieve import api
    from scalesieve.gui.impacts_dock import wait_drawn

    window.resize(*size)
    window.open_recording(api.load(sample(FAN)), TransformSpec("dwt", "db4", None, "symmetric"))
    assert window.adapter.wait_idle(60) is None
    window.impacts_dock.show()
    wait_drawn(window.impacts_dock)
    window.resize(*size)
    out = tmp_path / "look.png"
    window.snapshot(str(out))
    head = out.read_bytes()[:24]
    assert head[:8] == b"\x89PNG\r\n\x1a\n"
    assert struct.unpack(">II", head[16:24]) == size


def test_a_missing_xcb_cursor_library_is_one_line_not_an_abort(monkeypatch):
    # Qt's documentation for its X11 platform (Qt 6.5 and later) lists libxcb-cursor
    # among the libraries the plugin needs; without it Qt aborts the process
    import ctypes.util

    from scalesieve.gui import app

    monkeypatch.setattr(ctypes.util, "find_library",
                        lambda name: None if name == "xcb-cursor" else "lib" + name + ".so")
    monkeypatch.setattr("PySide6.QtCore.qVersion", lambda: "6.8.1")
    problem = app._xcb_cursor_problem()
    assert problem and "libxcb-cursor" in problem and "\n" not in problem
    monkeypatch.setattr("PySide6.QtCore.qVersion", lambda: "6.4.3")
    assert app._xcb_cursor_problem() is None


def test_the_first_start_fits_a_small_screen():
    from PySide6.QtCore import QRect

    from scalesieve.gui.main_window import FIRST_SIZE, first_size

    class Screen:
        def __init__(self, w, h):
            self.free = QRect(0, 0, w, h)

        def availableGeometry(self):  # noqa: N802 - Qt's name
            return self.free

    assert first_size(Screen(1280, 770)) == (1280, 770)
    assert first_size(Screen(2560, 1400)) == FIRST_SIZE
    assert first_size(None) == FIRST_SIZE


def _x_span(widget):
    """(left, right) of a widget in its window's coordinates."""
    left = widget.mapTo(widget.window(), widget.rect().topLeft()).x()
    return left, left + widget.width()


def test_sixty_four_packet_rows_stay_readable_and_scroll(window, qtbot):
    from scalesieve import api
    from scalesieve.gui.map_scroll import ROW_MIN

    window.resize(1280, 800)
    window.open_recording(api.load(sample(FAN)), TransformSpec("packet", "db4", 6, "symmetric"))
    assert window.adapter.wait_idle(60) is None
    QApplication.processEvents()
    smap = window.scale_map
    heads = [smap.headers[k] for k in smap.keys]
    assert len(heads) == 64                        # 2^6 bands at depth 6 (the packet tree)
    assert smap.row_scroll.scrolling
    for h in heads:
        assert h.height() >= ROW_MIN
        assert h.name.width() >= h.name.fontMetrics().horizontalAdvance(h.name.text())
        assert h.hz.geometry().right() < h.name.geometry().left()
        assert h.name.geometry().right() < h.share.geometry().left()
    assert heads[63].name.text() == "w6.63"
    # with the scroll bar shown, the map still ends where the Reconstruction's plot ends
    assert _x_span(smap.plot)[1] == _x_span(window.reconstruction.plot)[1]
    # scrolled to the end, the last band's header is in view beside its own row
    bar = smap.row_scroll.verticalScrollBar()
    bar.setValue(bar.maximum())
    QApplication.processEvents()
    last = heads[-1]
    port = smap.row_scroll.viewport()
    y = last.mapTo(port, last.rect().center()).y()
    assert 0 <= y <= port.height()
    view = smap.view
    row_top = view.mapViewToScene(pg_point(0, 63)).y()
    row_bottom = view.mapViewToScene(pg_point(0, 64)).y()
    centre = smap.plot.mapFromScene(pg_point(0, (row_top + row_bottom) / 2))
    assert abs(smap.plot.mapTo(port, centre).y() - y) <= 2


def pg_point(x, y):
    from PySide6.QtCore import QPointF

    return QPointF(x, y)


def test_the_wheel_over_a_gain_field_scrolls_instead_of_changing_the_gain(window, qtbot):
    from PySide6.QtCore import QPoint, QPointF, Qt
    from PySide6.QtGui import QWheelEvent

    from scalesieve import api

    window.resize(1280, 800)
    window.open_recording(api.load(sample(FAN)), TransformSpec("packet", "db4", 6, "symmetric"))
    assert window.adapter.wait_idle(60) is None
    QApplication.processEvents()
    field = window.scale_map.headers[window.scale_map.keys[3]].gain
    before = field.value()
    ev = QWheelEvent(QPointF(5, 5), QPointF(field.mapToGlobal(QPoint(5, 5))), QPoint(0, 0),
                     QPoint(0, -120), Qt.MouseButton.NoButton, Qt.KeyboardModifier.NoModifier,
                     Qt.ScrollPhase.NoScrollPhase, False)
    QApplication.sendEvent(field, ev)
    assert field.value() == before and not ev.isAccepted()
    assert window.adapter.edits == () or len(window.adapter.edits) == 0


def test_long_channel_names_keep_one_toolbar_row_at_1280(window, qtbot):
    # the invented logger's channels are "pressure [bar]" and "flow [l/min]"
    # (sample_signals/README.md): the list widens, the row goes compact, not in two
    from scalesieve import api

    window.resize(1280, 800)
    window.open_recording(api.load(sample("cooling_loop_logger.csv")))
    assert window.adapter.wait_idle(60) is None
    qtbot.waitUntil(lambda: window.channel_box.count() == 2, timeout=5000)
    QApplication.processEvents()
    QApplication.processEvents()
    assert window.channel_box.currentText().endswith("pressure [bar]")
    assert window.listen_toolbar.y() == window.main_toolbar.y()
    right = window.listen_toolbar.x() + window.listen_toolbar.width()
    assert right <= window.width()
    assert window.listen_toolbar.width() >= window.listen_toolbar.sizeHint().width()
    assert window.scope_box.text() and window.scope_box.toolTip()
