"""Long recordings in the boundary modes that wrap, against PyWavelets and the in-memory model.

References: ``pywt.wavedec`` / ``pywt.waverec`` of the whole recording
(coefficients and cleaned samples within float round-off), and the in-memory
model (``api.build_model``) and its export for the same recipe.
"""

import numpy as np
import pytest
import pywt
import soundfile as sf

from scalesieve import api
from scalesieve.core.transforms import TransformSpec
from scalesieve.longview.span import open_long, why_not_long
from scalesieve.longview.sweep import CleanedSweep
from scalesieve.longview.wrapped import WrappedStretch
from scalesieve.recipe import Edit
from scalesieve.views import long_picture as lp
from scalesieve.views.decimate import minmax_columns

RATE = 20000


@pytest.fixture(autouse=True)
def _cache(tmp_path, monkeypatch):
    monkeypatch.setenv("SCALESIEVE_CACHE_DIR", str(tmp_path / "cache"))


@pytest.mark.parametrize("mode", ["periodic", "periodization"])
@pytest.mark.parametrize("wavelet", ["db4", "haar", "sym5"])
@pytest.mark.parametrize("n", [100003, 4096, 777])
def test_stretches_equal_wavedec_and_waverec(mode, wavelet, n):
    x = np.random.default_rng(3).standard_normal(n)
    level = min(6, pywt.dwt_max_level(n, wavelet))
    ws = WrappedStretch(lambda a, b: x[a:b].copy(), n,
                        TransformSpec(wavelet=wavelet, mode=mode, level=level))
    c = pywt.wavedec(x, wavelet, mode=mode, level=level)
    wanted = {}
    for key in [*range(1, level + 1), "a"]:
        m = (c[0] if key == "a" else c[-key]).shape[0]
        wanted[key] = [(0, min(3, m)), (m // 2, min(m, m // 2 + 5)), (max(0, m - 4), m)]
    details, approx = ws.forward(wanted)
    for key, runs in wanted.items():
        want = c[0] if key == "a" else c[-key]
        got = approx[level] if key == "a" else details[key]
        for a, b in runs:
            np.testing.assert_allclose(got.take(np.arange(a, b)), want[a:b], atol=1e-12)
    edited = list(c)
    edited[-1] = 0.3 * edited[-1]
    y = pywt.waverec(edited, wavelet, mode=mode)[:n]
    for t0, t1 in [(0, 50), (n // 2 - 100, n // 2 + 100), (n - 60, n), (0, n)]:
        got, _ = ws.synthesise(t0, t1, lambda key, k0, v: 0.3 * v if key == 1 else v)
        np.testing.assert_allclose(got, y[t0:t1], atol=1e-12)


def _wav(tmp_path, n):
    rng = np.random.default_rng(8)
    x = 0.3 * np.sin(np.arange(n) / 40.0) + 0.05 * rng.standard_normal(n)
    x[n // 3] += 1.0
    path = str(tmp_path / "gearbox_week.wav")
    sf.write(path, x, RATE, subtype="DOUBLE")
    return path, x


EDITS = (Edit("gain", levels=(2,), gain=0.5),
         Edit("threshold", levels="details", rule="universal", shape="soft", noise="finest"),
         Edit("region", levels=(1, 3), start_s=2.0137, stop_s=4.52, gain=0.0))


@pytest.mark.parametrize("mode", ["periodic", "periodization"])
def test_views_sweep_and_export_equal_the_in_memory_model(tmp_path, mode):
    n = 150_001
    path, x = _wav(tmp_path, n)
    spec = TransformSpec(wavelet="db4", mode=mode, level=7)
    assert why_not_long(spec) is None
    lr, _ = open_long(path, spec)
    lr.set_edits(EDITS)
    model = api.build_model(api.load(path), transform=spec, edits=EDITS)
    y = model.cleaned()[:, 0]
    # exact views at both ends (they read the other end) and in the middle
    for t0, t1 in [(0, 4000), (n - 5000, n), (70_000, 71_234)]:
        pic = lp.picture(lr, t0, t1, 600)
        assert pic.exact
        lo, hi = minmax_columns(y[t0:t1], 600)
        np.testing.assert_allclose(pic.cleaned[0], lo, atol=1e-12)
        np.testing.assert_allclose(pic.cleaned[1], hi, atol=1e-12)
    # a wide view's Scale map: every block exact, region edges included
    for key in lp.rows_of(7):
        series = lr.summary.bands[0][key]
        table, a, b = series.blocks_in(0, n, 128)
        starts, stops = series.values_of(table, a, b)
        c = np.abs(np.asarray(model.edited_coefficients(0, key, 0,
                                                        model.coefficients(0, key).shape[0])))
        _, got = lp.band_peaks(lr, 0, key, 0, n, 128)
        # the blocks in view (in periodic mode the last coefficients sit past the end)
        want = np.maximum.reduceat(c[:stops[-1]], starts)
        np.testing.assert_allclose(got, want, rtol=1e-12, atol=1e-15)
    # the wide view's cleaned trace, from a pass over the whole file
    sweep = CleanedSweep(lr, 0)
    assert sweep.run()
    pic = lp.picture(lr, 0, n, 100, exact_most=1 << 10, sweep=sweep)
    np.testing.assert_allclose(np.nanmax(pic.cleaned[1]), y.max(), atol=1e-12)
    np.testing.assert_allclose(np.nanmin(pic.removed[0]), (x - y).min(), atol=1e-12)
    # the export: the in-memory model's
    out = str(tmp_path / "cleaned.wav")
    lr.export(out, subtype="DOUBLE")
    want_path = str(tmp_path / "in_memory.wav")
    api.export(model, want_path, subtype="DOUBLE")
    np.testing.assert_allclose(sf.read(out)[0], sf.read(want_path)[0], atol=1e-12)
    lr.close()


def test_what_is_not_shown_says_what_to_use():
    swt = why_not_long(TransformSpec(kind="swt", level=4))
    assert "SWT" in swt and "--transform dwt" in swt
    packets = why_not_long(TransformSpec(kind="packet", level=3))
    assert "packets" in packets and "--transform dwt" in packets
