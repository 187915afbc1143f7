"""The window in long-recording mode, forced on a small file, against the in-memory window.

References: the in-memory window's model (whose cleaned signal its own tests
hold to ``pywt.waverec``), its export (``api.export``), and
``soundfile`` for reading the files written.
"""

import os

import numpy as np
import pytest
import soundfile as sf

from scalesieve.core.transforms import TransformSpec
from scalesieve.views.decimate import minmax_columns

RATE = 20000
N = 400_001


@pytest.fixture
def long_file(tmp_path, monkeypatch):
    monkeypatch.setenv("SCALESIEVE_CACHE_DIR", str(tmp_path / "cache"))
    rng = np.random.default_rng(21)
    t = np.arange(N) / RATE
    x = 0.3 * np.sin(2 * np.pi * 31 * t) + 0.03 * rng.standard_normal(N)
    x[::4000] += 0.7                               # impacts, five a second
    path = str(tmp_path / "pump_day.wav")
    sf.write(path, x, RATE, subtype="DOUBLE")
    return path, x


@pytest.fixture
def long_window(qtbot, qapp):
    from scalesieve.gui.app import make_application
    from scalesieve.gui.long_window import LongWindow

    app = make_application()
    app.setProperty("scalesieve_quiet_errors", True)
    app.setProperty("scalesieve_last_error", "")
    w = LongWindow()
    w.exact_most = 1 << 15              # so that the whole view comes from the summary
    qtbot.addWidget(w)
    w.resize(1280, 800)
    w.show()
    yield w
    w.close()
    w.deleteLater()
    app.processEvents()
    app.setProperty("scalesieve_quiet_errors", None)
    app.setProperty("scalesieve_last_error", None)


SPEC = TransformSpec(wavelet="db4", mode="symmetric", level=8)


def _edit_in_window(w):
    rows = w.scale_map.rows
    rows.rows[1][1].click()                     # mute d1
    rows.rows[3][0].setValue(-6.0)              # d3 at -6 dB
    th = w.scale_map.threshold
    th.rule.setCurrentIndex(th.rule.findData("universal"))
    th.shape.setCurrentIndex(th.shape.findData("soft"))


def test_zoomed_out_from_the_summary_zoomed_in_exact_as_in_memory(long_window, window,
                                                                  long_file):
    path, x = long_file
    w = long_window
    w.open_long(path, SPEC)
    assert w.wait_idle() is None
    assert "shown from a summary" in w.mode_line.text()
    assert "not available for long recordings" in w.traces.elsewhere.text()
    assert w.picture.exact is False and w.picture.cleaned_done == 1.0   # nothing edited yet
    _edit_in_window(w)
    assert w.wait_idle() is None
    assert w.picture.cleaned is None and "zoom in" in w.traces.note.text()
    assert w.wait_idle() is None
    edits = w.edits()
    assert [e.op for e in edits] == ["gain", "gain", "threshold"]
    # the whole view's cleaned trace, from a pass over the file once the edits rest
    assert w.wait_idle(sweep=True) is None
    assert w.picture.exact is False and w.picture.cleaned_done == 1.0
    assert "Zoom in" not in w.traces.note.text()
    wide = w.picture
    # the in-memory window on the same file with the same transform and edits, as the
    # command line opens it
    from scalesieve import api

    window.open_recording(api.load(path), SPEC, edits)
    assert window.adapter.wait_idle() is None
    model = window.adapter.model
    assert model.spec == SPEC and tuple(model.edits) == edits
    cleaned = model.cleaned()[:, 0]
    # every block lands in one column: the columns' extremes are the signal's
    np.testing.assert_allclose(np.nanmax(wide.cleaned[1]), cleaned.max(), atol=1e-12)
    np.testing.assert_allclose(np.nanmin(wide.removed[0]), (x - cleaned).min(), atol=1e-12)
    t0, t1 = 123_457, 140_000
    w.set_view(t0, t1)
    assert w.wait_idle() is None
    pic = w.picture
    assert pic.exact and (pic.start, pic.stop) == (t0, t1)
    columns = pic.cleaned[0].shape[0]
    lo, hi = minmax_columns(cleaned[t0:t1], columns)
    np.testing.assert_allclose(pic.cleaned[0], lo, atol=1e-12)
    np.testing.assert_allclose(pic.cleaned[1], hi, atol=1e-12)
    # what the trace draws is that picture
    xs, ys = w.traces.curves["cleaned"].getData()
    np.testing.assert_allclose(ys[1::2], hi, atol=1e-12)
    assert "Zoom in" not in w.traces.note.text()


def test_export_equals_the_in_memory_export(long_window, long_file, tmp_path):
    from scalesieve import api

    path, x = long_file
    w = long_window
    w.open_long(path, SPEC)
    assert w.wait_idle() is None
    _edit_in_window(w)
    assert w.wait_idle() is None
    out = str(tmp_path / "cleaned.wav")
    assert w.export(out, subtype="DOUBLE")
    assert w.wait_idle() is None
    assert "exported cleaned.wav" in w.progress_text.text()
    got, rate = sf.read(out, dtype="float64")
    model = api.build_model(api.load(path), transform=SPEC, edits=w.edits())
    want_path = str(tmp_path / "in_memory.wav")
    api.export(model, want_path, subtype="DOUBLE")
    want, _ = sf.read(want_path, dtype="float64")
    assert rate == RATE and got.shape == want.shape == (N,)
    np.testing.assert_allclose(got, want, atol=1e-12)
    # never over an existing file without being asked
    w.export(out, subtype="DOUBLE")
    assert w.wait_idle() is not None
    assert "exists" in w.worker.last_failure


def test_recipe_edits_applied_on_opening_and_kept(long_window, long_file):
    from scalesieve.recipe import Edit

    path, x = long_file
    w = long_window
    region = Edit("region", levels=(1, 2), start_s=5.0, stop_s=6.0, gain=0.0)
    w.open_long(path, SPEC, (region,))
    assert w.wait_idle() is None
    assert w.edits() == (region,)
    w.set_view(int(5.2 * RATE), int(5.4 * RATE))
    assert w.wait_idle() is None
    # inside the region, d1 and d2 are gone from the Scale map
    assert np.all(w.picture.magnitudes[0] == 0) and np.all(w.picture.magnitudes[1] == 0)
    assert np.any(w.picture.magnitudes[2] > 0)


def test_window_command_opens_long_mode_over_the_budget(long_file, tmp_path, monkeypatch):
    from scalesieve.cli import main
    from scalesieve.commands import window as cmd

    path, _ = long_file
    out = str(tmp_path / "look.png")
    monkeypatch.setattr(cmd, "LONG_ABOVE", 0)
    seen = {}
    import scalesieve.gui.app as gui_app

    real = gui_app.run_long_window

    def spy(*a, **k):
        seen["long"] = True
        return real(*a, **k)
    monkeypatch.setattr(gui_app, "run_long_window", spy)
    assert main([path, "--snapshot", out, "--snapshot-size", "1280x800",
                 "--wavelet", "db4", "--level", "8"]) == 0
    assert seen.get("long") and os.path.getsize(out) > 10_000


def test_long_mode_refuses_what_it_cannot_show(long_file, tmp_path, monkeypatch, capsys):
    from scalesieve.cli import main
    from scalesieve.commands import window as cmd

    path, _ = long_file
    monkeypatch.setattr(cmd, "LONG_ABOVE", 0)
    code = main([path, "--snapshot", str(tmp_path / "x.png"), "--transform", "swt"])
    err = capsys.readouterr().err
    assert code == 2 and "long-recording view cannot show it" in err
    assert "SWT" in err and "--transform dwt" in err and "Traceback" not in err
    assert not os.path.exists(tmp_path / "x.png")
    # the modes that wrap are shown
    out = str(tmp_path / "wrapped.png")
    assert main([path, "--snapshot", out, "--mode", "periodization", "--level", "8"]) == 0
    assert os.path.getsize(out) > 10_000


def test_file_open_over_the_budget_opens_a_long_window(window, long_file, monkeypatch):
    from scalesieve import memory_guard

    path, x = long_file
    monkeypatch.setattr(memory_guard, "WINDOW_ABOVE", 0)
    window.open_path(path, ask_text_settings=False)
    (w,) = window.long_windows
    try:
        assert w.wait_idle() is None
        assert w.lr.n == N and "shown from a summary" in w.mode_line.text()
        assert window.adapter.model is None            # nothing read whole
    finally:
        w.close()


def test_long_mode_checks_channel_and_rate_before_any_window(long_file, tmp_path, monkeypatch,
                                                             capsys):
    from scalesieve.cli import main
    from scalesieve.commands import window as cmd

    path, _ = long_file
    monkeypatch.setattr(cmd, "LONG_ABOVE", 0)
    assert main([path, "--snapshot", str(tmp_path / "x.png"), "--channel", "3"]) == 2
    assert "channel" in capsys.readouterr().err
    assert main([path, "--snapshot", str(tmp_path / "x.png"), "--rate", "1000"]) == 2
    assert "--rate" in capsys.readouterr().err
    assert not os.path.exists(tmp_path / "x.png")


def test_edits_are_kept_unless_saved_or_exported(qtbot, qapp, long_file, tmp_path, monkeypatch):
    from scalesieve import autosave
    from scalesieve.gui.app import make_application
    from scalesieve.gui.long_window import LongWindow

    monkeypatch.setenv("SCALESIEVE_DATA_DIR", str(tmp_path / "data"))
    path, _ = long_file
    app = make_application()
    app.setProperty("scalesieve_quiet_errors", True)

    def session(edit=True, save=None):
        w = LongWindow(keep_sessions=True)
        qtbot.addWidget(w)
        w.show()
        w.open_long(path, SPEC)
        assert w.wait_idle() is None
        if edit:
            w.scale_map.rows.rows[2][1].click()          # mute d2
            assert w.wait_idle() is None
            assert os.path.exists(autosave.session_file(path))   # saved after the edit
        if save:
            assert w.save_recipe(str(tmp_path / save))
        w.close()
        return w

    try:
        session()
        kept = [s for s in autosave.list_sessions() if s["kept"]]
        assert len(kept) == 1 and kept[0]["edits"] == 1
        session(save="r.json")                           # saved: nothing more kept
        assert len([s for s in autosave.list_sessions() if s["kept"]]) == 1
        assert not os.path.exists(autosave.session_file(path))
    finally:
        app.setProperty("scalesieve_quiet_errors", None)


def test_channels_are_shown_one_at_a_time(long_window, tmp_path, monkeypatch):
    monkeypatch.setenv("SCALESIEVE_CACHE_DIR", str(tmp_path / "cache"))
    rng = np.random.default_rng(2)
    x = np.stack([0.1 * rng.standard_normal(100_000), 0.5 * np.sin(np.arange(100_000) / 9.0)],
                 axis=1)
    path = str(tmp_path / "two.wav")
    sf.write(path, x, RATE, subtype="DOUBLE")
    w = long_window
    w.open_long(path, SPEC)
    assert w.wait_idle() is None
    assert w.channel_box.count() == 2 and w.channel_box.isEnabled()
    w.set_view(1000, 2000)
    assert w.wait_idle() is None
    cols = w.picture.original[0].shape[0]
    np.testing.assert_array_equal(w.picture.original[1], minmax_columns(x[1000:2000, 0], cols)[1])
    w.channel_box.setCurrentIndex(1)
    assert w.wait_idle() is None
    np.testing.assert_array_equal(w.picture.original[1], minmax_columns(x[1000:2000, 1], cols)[1])


def test_zooming_one_pane_moves_the_others_and_redraws(long_window, long_file):
    path, _ = long_file
    w = long_window
    w.open_long(path, SPEC)
    assert w.wait_idle() is None
    # what a wheel or a drag on the traces does to their view box
    w.traces.plot.getPlotItem().getViewBox().setXRange(4.0, 4.5, padding=0)
    assert w.wait_idle() is None
    a, b = w.scale_map.plot.getPlotItem().getViewBox().viewRange()[0]
    assert abs(a - 4.0) < 1e-3 and abs(b - 4.5) < 1e-3
    assert w.picture.exact and abs(w.picture.start - 4.0 * RATE) <= 1
    assert "4–4.5 s of" in w.overview.span.text()
    # a view set in samples stays where it was when the panes are resized
    w.set_view(123_457, 140_000)
    w.resize(1100, 760)
    assert w.wait_idle() is None
    assert (w.picture.start, w.picture.stop) == (123_457, 140_000)
    w.show_all()
    assert w.wait_idle() is None
    assert (w.picture.start, w.picture.stop) == (0, N) and not w.picture.exact


def test_the_finest_noise_is_found_ahead_of_the_first_threshold(long_window, long_file, qtbot):
    import pywt

    path, x = long_file
    w = long_window
    w.open_long(path, SPEC)
    assert w.wait_idle() is None
    qtbot.waitUntil(lambda: w.lr.summary.medians[0][1] is not None, timeout=30_000)
    d1 = np.abs(pywt.wavedec(x, "db4", mode="symmetric", level=8)[-1])
    assert w.lr.summary.medians[0][1] == np.median(d1[d1 != 0])      # NumPy's median
    assert w.lr.summary.medians[0][2] is None                         # only what is needed


def test_a_file_that_does_not_read_says_so_in_one_line(long_window, tmp_path):
    bad = tmp_path / "broken.wav"
    bad.write_bytes(b"RIFF\x10\x00\x00\x00WAVEjunk")
    w = long_window
    w.open_long(str(bad), SPEC)
    problem = w.wait_idle()
    assert problem and "broken.wav" in problem and "Traceback" not in problem
    assert w.scale_map.waiting.isVisible() and "Not opened" in w.scale_map.waiting.toPlainText()
    assert not w.export_action.isEnabled()
