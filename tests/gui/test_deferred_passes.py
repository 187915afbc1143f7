"""A full-length edit on a long recording: drawn at once, made exact between events.

The demo recording stands in for a long one (the window's threshold for
deferring a pass is lowered).  References: PyWavelets' ``wavedec`` /
``waverec`` with the muted band zeroed (the cleaned signal it must come
to), and NumPy's min/max of that signal per block (the envelopes drawn).
"""

import numpy as np
import pytest
from PySide6.QtCore import Qt

from sample_files import open_sample

PUMP = "pump_bearing.wav"


def block_envelope(y, block):
    nb = -(-y.shape[0] // block)
    pad = np.full(nb * block, np.nan)
    pad[:y.shape[0]] = y
    pad = pad.reshape(nb, block)
    return np.nanmin(pad, axis=1), np.nanmax(pad, axis=1)


@pytest.fixture
def deferring(monkeypatch):
    from scalesieve import model
    from scalesieve.gui import decimate, model_adapter

    monkeypatch.setattr(model_adapter, "DEFER_FROM", 0)
    monkeypatch.setattr(model, "FLUSH_STEP", 10000)       # several sweep steps
    monkeypatch.setattr(decimate, "PREVIEW_SAMPLES", 4096)  # a sparse preview


def test_a_mute_is_drawn_first_and_made_exact_by_the_sweep(window, qtbot, deferring):
    from test_window import pywt_cleaned

    m = open_sample(window, PUMP)
    ref = pywt_cleaned(m.original(0), m.spec, [1])
    qtbot.mouseClick(window.scale_map.headers[1].mute, Qt.MouseButton.LeftButton)
    assert window.adapter.refining()            # the pass is still owed ...
    assert m.deferred(0) == 0
    ys = window.reconstruction.trace_data("cleaned")[1]
    assert ys.size                              # ... and the trace is drawn already,
    # from a sample of each block: never beyond the reference's extremes
    assert ys.max() <= ref.max() + 1e-12 and ys.min() >= ref.min() - 1e-12
    qtbot.waitUntil(lambda: not window.adapter.refining(), timeout=10000)
    assert m.deferred(0) is None
    pic = window.adapter.pictures(0)
    lo, hi = block_envelope(ref, pic.block)
    np.testing.assert_allclose(pic.cleaned.lo, lo, rtol=0, atol=1e-12)
    np.testing.assert_allclose(pic.cleaned.hi, hi, rtol=0, atol=1e-12)
    rlo, rhi = block_envelope(m.original(0) - ref, pic.block)
    np.testing.assert_allclose(pic.removed.lo, rlo, rtol=0, atol=1e-12)
    np.testing.assert_allclose(pic.removed.hi, rhi, rtol=0, atol=1e-12)
    qtbot.waitUntil(lambda: window.reconstruction.trace_data("cleaned")[1].max()
                    == pytest.approx(ref.max(), abs=1e-12), timeout=5000)
    np.testing.assert_allclose(m.cleaned(0), ref, rtol=0, atol=1e-12)


def test_zoomed_in_trace_is_exact_while_the_pass_is_owed(window, qtbot, deferring):
    from test_window import pywt_cleaned

    m = open_sample(window, PUMP)
    ref = pywt_cleaned(m.original(0), m.spec, [1])
    window.time_axis.set_range(2.0, 2.01)     # a few hundred samples: drawn sample by sample
    qtbot.wait(20)
    qtbot.mouseClick(window.scale_map.headers[1].mute, Qt.MouseButton.LeftButton)
    assert window.adapter.refining()
    window.reconstruction.redraw()
    xs, ys = window.reconstruction.trace_data("cleaned")
    idx = np.rint(xs * m.recording.rate).astype(int)
    np.testing.assert_allclose(ys, ref[idx], rtol=0, atol=1e-12)


def test_export_during_the_sweep_pays_the_pass(window, qtbot, deferring, tmp_path):
    # Reference: PyWavelets' waverec; the file read back by soundfile.
    import soundfile as sf

    from scalesieve import api
    from test_window import pywt_cleaned

    m = open_sample(window, PUMP)
    ref = pywt_cleaned(m.original(0), m.spec, [1])
    qtbot.mouseClick(window.scale_map.headers[1].mute, Qt.MouseButton.LeftButton)
    assert window.adapter.refining()
    out = tmp_path / "clean.wav"
    api.export(m, str(out), subtype="FLOAT")
    got, _ = sf.read(str(out), dtype="float64")
    np.testing.assert_allclose(got, ref.astype(np.float32), rtol=0, atol=1e-7)
    assert m.deferred(0) is None                 # the export paid what was owed
    qtbot.waitUntil(lambda: not window.adapter.refining(), timeout=10000)


def test_a_preview_is_made_exact_after_a_reader_paid_the_pass(window, qtbot, deferring):
    # The metrics (or an export) pay what is owed at once; the drawing that
    # was a preview must still end exact.  Reference: PyWavelets, as above.
    from test_window import pywt_cleaned

    m = open_sample(window, PUMP)
    ref = pywt_cleaned(m.original(0), m.spec, [1])
    qtbot.mouseClick(window.scale_map.headers[1].mute, Qt.MouseButton.LeftButton)
    pic = window.adapter.pictures(0)
    assert pic.provisional == (0, m.recording.n)
    window.reconstruction.update_metrics()       # pays the whole pass
    assert m.deferred(0) is None and window.adapter.refining()
    qtbot.waitUntil(lambda: not window.adapter.refining(), timeout=10000)
    lo, hi = block_envelope(ref, pic.block)
    np.testing.assert_allclose(pic.cleaned.lo, lo, rtol=0, atol=1e-12)
    np.testing.assert_allclose(pic.cleaned.hi, hi, rtol=0, atol=1e-12)
