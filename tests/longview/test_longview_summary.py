"""The summary's per-block figures against NumPy on the whole arrays, and its cache.

References: ``pywt.wavedec`` for the bands (PyWavelets), NumPy's min, max,
sum of squares and median over each block and band.
"""

import os

import numpy as np
import pytest
import pywt
import soundfile as sf

from scalesieve.core import transforms as tf
from scalesieve.core.transforms import TransformSpec
from scalesieve.longview import cache
from scalesieve.longview import summary as sm
from scalesieve.longview.span import open_long
from scalesieve.recipe import Edit
from scalesieve.stream.pipeline import _Source


@pytest.fixture(autouse=True)
def _cache(tmp_path, monkeypatch):
    monkeypatch.setenv("SCALESIEVE_CACHE_DIR", str(tmp_path / "cache"))


def _wav(tmp_path, n=70001, channels=2):
    rng = np.random.default_rng(11)
    x = rng.standard_normal((n, channels)) * np.linspace(0.1, 1.0, n)[:, None]
    path = str(tmp_path / "day.wav")
    sf.write(path, x, 51200, subtype="DOUBLE")
    return path, x


def _blocks(v, b):
    starts = np.arange(0, v.shape[0], b)
    return (np.minimum.reduceat(v, starts), np.maximum.reduceat(v, starts),
            np.add.reduceat(v * v, starts))


def test_figures_equal_numpy_on_the_whole_arrays(tmp_path):
    path, x = _wav(tmp_path)
    spec = TransformSpec(wavelet="db4", mode="symmetric", level=7)
    lr, how = open_long(path, spec)
    s = lr.summary
    assert how == "built" and s.n == x.shape[0] and s.channels == 2
    wanted = [(k, key) for k in range(2) for key in tf.band_keys(7)]
    assert s.missing(wanted) == wanted                  # medians wait until asked for
    assert s.find_medians(_Source(path, None), wanted) is True
    assert s.find_medians(_Source(path, None), wanted) is False      # known now
    for k in range(2):
        lo, hi, en = _blocks(x[:, k], 1 << sm.BASE)
        got = s.signal[k].tables[0]
        np.testing.assert_array_equal(got[0], lo)
        np.testing.assert_array_equal(got[1], hi)
        np.testing.assert_allclose(got[2], en, rtol=1e-12)
        # the coarsest table holds the whole signal: numpy's min, max and energy of it
        top = s.signal[k].tables[-1]
        assert top[0][0] == x[:, k].min() and top[1][0] == x[:, k].max()
        np.testing.assert_allclose(top[2][0], np.sum(x[:, k] ** 2), rtol=1e-12)
        c = pywt.wavedec(x[:, k], "db4", mode="symmetric", level=7)
        for key in tf.band_keys(7):
            band = c[tf.band_index(key, 7)]
            series = s.bands[k][key]
            assert series.count == band.shape[0]
            lo, hi, en = _blocks(band, sm.band_block(key, 7))
            np.testing.assert_array_equal(series.tables[0][0], lo)
            np.testing.assert_array_equal(series.tables[0][1], hi)
            np.testing.assert_allclose(series.tables[0][2], en, rtol=1e-12)
            a = np.abs(band)
            assert s.medians[k][key] == np.median(a[a != 0])


def test_window_picks_a_table_about_as_fine_as_the_columns(tmp_path):
    path, x = _wav(tmp_path, n=1 << 18, channels=1)
    lr, _ = open_long(path, TransformSpec(level=5))
    series = lr.summary.signal[0]
    times, lo, hi, en = series.window(0, 1 << 18, 64)        # 4096 samples a column
    assert series.block_samples(series.table_for(4096)) == 4096
    assert times.shape[0] == 64
    assert hi.max() == x.max() and lo.min() == x.min()
    times, lo, hi, en = series.window(1000, 3000, 2000)      # finer than a block: the finest
    assert times[0] == 512 and lo.shape[0] == 3


def test_kept_summary_is_read_back_stale_and_damaged_are_rebuilt(tmp_path):
    path, x = _wav(tmp_path)
    spec = TransformSpec(wavelet="db4", mode="symmetric", level=6)
    first, how = open_long(path, spec)
    assert how == "built"
    # a threshold finds d1's median once and keeps it with the summary
    first.set_edits([Edit("threshold", levels="details", rule="universal", noise="finest")])
    assert first.summary.medians[0][1] is not None and first.summary.medians[0][2] is None
    again, how = open_long(path, spec)
    assert how == "kept"
    assert again.summary.medians[0][1] == np.median(np.abs(
        pywt.wavedec(x[:, 0], "db4", mode="symmetric", level=6)[-1]))
    for k in range(2):
        for key in tf.band_keys(6):
            for t in range(3):
                np.testing.assert_array_equal(again.summary.bands[k][key].tables[0][t],
                                              first.summary.bands[k][key].tables[0][t])
        assert again.summary.medians[k] == first.summary.medians[k]
    # another transform or channel: its own summary
    assert open_long(path, TransformSpec(wavelet="db2", level=6))[1] == "built"
    assert open_long(path, spec, channel=1)[1] == "built"
    kept = cache.cache_path(path, again.spec, None)
    # damaged: cut short, then garbage
    data = open(kept, "rb").read()
    with open(kept, "wb") as fh:
        fh.write(data[:len(data) // 2])
    assert open_long(path, spec)[1] == "built"
    with open(kept, "wb") as fh:
        fh.write(b"not a summary at all")
    assert open_long(path, spec)[1] == "built"
    assert open_long(path, spec)[1] == "kept"
    # stale: the recording changed (same size, new samples and time)
    y = x.copy()
    y[:100] = 0.0
    sf.write(path, y, 51200, subtype="DOUBLE")
    st = os.stat(path)
    os.utime(path, ns=(st.st_atime_ns, st.st_mtime_ns + 10 ** 9))
    lr, how = open_long(path, spec)
    assert how == "built"
    assert lr.summary.signal[0].tables[0][1][0] == y[:1 << sm.BASE, 0].max()


def test_damaged_arrays_are_not_trusted(tmp_path):
    path, x = _wav(tmp_path)
    spec = TransformSpec(wavelet="db4", mode="symmetric", level=6)
    lr, _ = open_long(path, spec)
    kept = cache.cache_path(path, lr.spec, None)
    with np.load(kept) as z:
        arrays = {k: z[k] for k in z.files}
    arrays["s3_lo"] = arrays["s3_lo"][:-1]                     # one block short
    with open(kept, "wb") as fh:
        np.savez(fh, **arrays)
    assert open_long(path, spec)[1] == "built"
    arrays["s3_lo"] = np.concatenate([arrays["s3_lo"], [np.nan]])
    with open(kept, "wb") as fh:
        np.savez(fh, **arrays)
    assert open_long(path, spec)[1] == "built"
    with np.load(kept) as z:
        arrays = {k: z[k] for k in z.files}
    arrays["c0_d1_counts"] = -arrays["c0_d1_counts"]            # noise counts that cannot be
    with open(kept, "wb") as fh:
        np.savez(fh, **arrays)
    assert open_long(path, spec)[1] == "built"
    assert open_long(path, spec)[1] == "kept"


def test_a_cache_folder_that_cannot_be_written_only_costs_the_keeping(tmp_path, monkeypatch):
    path, _ = _wav(tmp_path)
    blocker = tmp_path / "file-not-folder"
    blocker.write_text("x")
    monkeypatch.setenv("SCALESIEVE_CACHE_DIR", str(blocker))
    lr, how = open_long(path, TransformSpec(level=4))
    assert how == "built" and lr.summary.n == 70001


def test_progress_is_told_and_cancel_stops(tmp_path):
    path, _ = _wav(tmp_path, n=1 << 19, channels=1)
    seen = []
    open_long(path, TransformSpec(level=4), progress=lambda f, t: seen.append(f))
    assert seen == sorted(seen) and seen[-1] == 1.0 and len(seen) > 2
    with pytest.raises(InterruptedError):
        open_long(path, TransformSpec(level=5), cancelled=lambda: True)


def test_cache_folder_default(monkeypatch):
    monkeypatch.delenv("SCALESIEVE_CACHE_DIR")
    import platformdirs

    assert cache.cache_folder() == platformdirs.user_cache_dir("scalesieve", appauthor=False)
