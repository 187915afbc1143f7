"""A long recording's view against whole-array numbers.

Exact views: the cleaned samples of ``pywt.waverec`` of the edited
``pywt.wavedec`` (PyWavelets), the in-memory model's cleaned signal and edited
coefficients, reduced per column as the in-memory window reduces them.
Zoomed-out views: NumPy's min and max over each column's samples; the
edited block peaks against ``pywt.threshold`` applied to every coefficient.
"""

import numpy as np
import pytest
import pywt
import soundfile as sf

from scalesieve import api
from scalesieve.core import transforms as tf
from scalesieve.core.transforms import TransformSpec
from scalesieve.longview.span import open_long
from scalesieve.recipe import Edit
from scalesieve.views import long_picture as lp
from scalesieve.views.decimate import maxabs_columns, minmax_columns


@pytest.fixture(autouse=True)
def _cache(tmp_path, monkeypatch):
    monkeypatch.setenv("SCALESIEVE_CACHE_DIR", str(tmp_path / "cache"))


def _wav(tmp_path, n):
    rng = np.random.default_rng(5)
    x = 0.05 * rng.standard_normal(n) + 0.3 * np.sin(np.arange(n) / 30.0)
    x[n // 2] = 0.9
    path = str(tmp_path / "night.wav")
    sf.write(path, x, 20000, subtype="DOUBLE")
    return path, x


EDITS = [Edit("gain", levels=(2,), gain=0.5),
         Edit("threshold", levels="details", rule="universal", shape="soft", noise="finest")]


def test_exact_view_equals_the_in_memory_model(tmp_path):
    n = 200003
    path, x = _wav(tmp_path, n)
    spec = TransformSpec(wavelet="db4", mode="symmetric", level=6)
    lr, _ = open_long(path, spec)
    lr.set_edits(EDITS)
    model = api.build_model(api.load(path), transform=spec, edits=EDITS)
    cleaned = model.cleaned()[:, 0]
    t0, t1, columns = 90000, 110001, 700
    pic = lp.picture(lr, t0, t1, columns)
    assert pic.exact and pic.rows == [f"d{j}" for j in range(1, 7)] + ["a6"]
    lo, hi = minmax_columns(cleaned[t0:t1], columns)
    np.testing.assert_allclose(pic.cleaned[0], lo, atol=1e-12)
    np.testing.assert_allclose(pic.cleaned[1], hi, atol=1e-12)
    lo, hi = minmax_columns(x[t0:t1], columns)
    np.testing.assert_array_equal(pic.original[0], lo)
    for r, key in enumerate(lp.rows_of(6)):
        c = model.edited_coefficients(0, key, 0, model.coefficients(0, key).shape[0])
        step, shift = tf._position_formula(key, spec)
        want = maxabs_columns(np.asarray(c), shift / 20000, step / 20000, t0 / 20000,
                              t1 / 20000, columns)
        np.testing.assert_allclose(pic.magnitudes[r], want, rtol=1e-12, atol=1e-15)


def test_short_view_shows_every_sample(tmp_path):
    path, x = _wav(tmp_path, 50000)
    lr, _ = open_long(path, TransformSpec(level=8))
    pic = lp.picture(lr, 1000, 1100, 800)
    assert pic.times.shape == (100,)
    np.testing.assert_array_equal(pic.original[0], x[1000:1100])
    assert np.all(pic.magnitudes[-1] > 0)       # the coarsest band paints the whole view


def test_zoomed_out_view_from_the_summary(tmp_path):
    n = 1 << 22
    path, x = _wav(tmp_path, n)
    lr, _ = open_long(path, TransformSpec(wavelet="db4", level=8))
    lr.set_edits(EDITS)
    pic = lp.picture(lr, 0, n, 1024)                 # 4096 samples a column
    assert not pic.exact and pic.cleaned is None
    starts = np.arange(0, n, 4096)
    np.testing.assert_array_equal(pic.original[0], np.minimum.reduceat(x, starts))
    np.testing.assert_array_equal(pic.original[1], np.maximum.reduceat(x, starts))
    # the impact's column is the brightest of d1 as edited
    assert int(np.argmax(pic.magnitudes[0])) == (n // 2) // 4096


def test_edited_block_peaks_equal_editing_every_coefficient():
    rng = np.random.default_rng(9)
    c = rng.standard_normal(4096)
    starts = np.arange(0, 4096, 16)                     # 16 coefficients a block
    stops = starts + 16
    sl = slice(500, 901)                                # the region's coefficients

    def cover(e):
        inside = (starts >= sl.start) & (stops <= sl.stop)
        return inside, (starts < sl.stop) & (stops > sl.start) & ~inside
    for shape in ("hard", "soft", "garrote"):
        chain = [Edit("gain", levels=(1,), gain=-0.7),
                 Edit("threshold", levels=(1,), rule="manual", value=0.6, shape=shape),
                 Edit("region", levels=(1,), start_s=5.0, stop_s=9.0, gain=0.25)]
        every = pywt.threshold(c * -0.7, 0.6, mode=shape)      # PyWavelets' shapes
        every[sl] *= 0.25
        want = np.maximum.reduceat(np.abs(every), starts)
        peaks = np.maximum.reduceat(np.abs(c), starts)
        got, straddling = lp.edited_peaks(peaks, chain, [0.6], cover)
        # blocks 31 (496..511) and 56 (896..911) hold coefficients on both sides of an edge
        assert list(np.flatnonzero(straddling)) == [31, 56]
        np.testing.assert_allclose(got[~straddling], want[~straddling], rtol=1e-12)


@pytest.mark.parametrize("mode", ["symmetric", "zero", "smooth"])
def test_zoomed_out_region_edges_are_exact(tmp_path, mode):
    """Every band's column peaks of a wide view with region edits equal the largest
    |c| of PyWavelets' whole-array coefficients, edited, in the same blocks."""
    n = 1 << 20
    path, x = _wav(tmp_path, n)
    rate = 20000
    spec = TransformSpec(wavelet="db4", mode=mode, level=8)
    lr, _ = open_long(path, spec)
    edits = [Edit("gain", levels=(2,), gain=0.5),
             Edit("region", levels=(1, 2, 3), start_s=10.0037, stop_s=23.3311, gain=0.0),
             Edit("region", levels=("a", 8), start_s=30.01, stop_s=40.5, gain=0.1)]
    lr.set_edits(edits)
    model = api.build_model(api.load(path), transform=spec, edits=edits)
    for key in lp.rows_of(8):
        series = lr.summary.bands[0][key]
        table, a, b = series.blocks_in(0, n, 256)
        starts, stops = series.values_of(table, a, b)
        c = np.abs(np.asarray(model.edited_coefficients(0, key, 0,
                                                        model.coefficients(0, key).shape[0])))
        want = np.maximum.reduceat(c, starts)
        _, got = lp.band_peaks(lr, 0, key, 0, n, 256)
        np.testing.assert_allclose(got, want, rtol=1e-12, atol=1e-15)
    assert lr.ranges.made > 0           # the straddling blocks were read from the file


def test_zoomed_out_cleaned_trace_from_a_sweep_equals_numpy(tmp_path):
    from scalesieve.longview.sweep import CleanedSweep

    n = 1 << 21
    path, x = _wav(tmp_path, n)
    spec = TransformSpec(wavelet="db4", mode="symmetric", level=8)
    lr, _ = open_long(path, spec)
    lr.set_edits(EDITS)
    assert lp.picture(lr, 0, n, 512).cleaned is None          # no sweep yet
    model = api.build_model(api.load(path), transform=spec, edits=EDITS)
    y = model.cleaned()[:, 0]
    sweep = CleanedSweep(lr, 0)
    seen = []
    stopped = CleanedSweep(lr, 0)
    assert stopped.run(cancelled=lambda: True) is False and stopped.done == 0
    assert sweep.run(publish=lambda s: seen.append((s.done, s.finished)), every_s=0.0)
    assert seen[-1] == (n, True) and len(seen) > 2
    assert [d for d, _ in seen] == sorted(d for d, _ in seen)
    pic = lp.picture(lr, 0, n, 512, sweep=sweep)              # 4096 samples a column
    starts = np.arange(0, n, 4096)
    np.testing.assert_allclose(pic.cleaned[0], np.minimum.reduceat(y, starts), atol=1e-12)
    np.testing.assert_allclose(pic.cleaned[1], np.maximum.reduceat(y, starts), atol=1e-12)
    np.testing.assert_allclose(pic.removed[1], np.maximum.reduceat(x - y, starts), atol=1e-12)
    assert pic.cleaned_done == 1.0
    # a sweep made for other edits is not drawn
    lr.set_edits(EDITS[:1])
    assert lp.picture(lr, 0, n, 512, sweep=sweep).cleaned is None


def test_a_sweep_part_way_draws_only_what_it_has_done(tmp_path):
    from scalesieve.longview.sweep import CleanedSweep

    n = 1 << 21
    path, x = _wav(tmp_path, n)
    lr, _ = open_long(path, TransformSpec(level=6))
    lr.set_edits(EDITS)
    partial = []

    def publish(s):
        if not s.finished and s.done and not partial:
            partial.append(lp.picture(lr, 0, n, 256, sweep=s))
    CleanedSweep(lr, 0).run(publish=publish, every_s=0.0)
    pic = partial[0]
    drawn = np.isfinite(pic.cleaned[0])
    assert 0 < pic.cleaned_done < 1 and drawn.any() and not drawn.all()
    assert drawn[0] and not drawn[-1]


@pytest.mark.parametrize("mode", ["symmetric", "periodization"])
def test_a_region_change_is_patched_into_a_finished_sweep_exactly(tmp_path, mode):
    from dataclasses import replace

    from scalesieve.longview.sweep import CleanedSweep, patched

    n = 1 << 20
    path, x = _wav(tmp_path, n)
    lr, _ = open_long(path, TransformSpec(wavelet="db4", mode=mode, level=8))
    region = Edit("region", levels=(1, 2), start_s=10.0, stop_s=12.5, gain=0.0)
    lr.set_edits(EDITS + [region])
    first = CleanedSweep(lr, 0)
    assert first.run()
    moved = replace(region, start_s=20.0, stop_s=21.0, gain=0.1)
    more = Edit("region", levels=("a",), start_s=40.0, stop_s=41.0, gain=0.5)
    lr.set_edits(EDITS + [moved, more])
    got = patched(first, lr)
    assert got is not None and got.finished and got.edits == lr.edits
    full = CleanedSweep(lr, 0)                       # the whole pass for the new edits
    assert full.run()
    for a, b in ((got.cleaned, full.cleaned), (got.removed, full.removed)):
        for ta, tb in zip(a.tables, b.tables):
            for va, vb in zip(ta, tb):
                np.testing.assert_allclose(va, vb, rtol=1e-12, atol=1e-12)
    # a change in anything but trailing region edits needs the whole pass again
    lr.set_edits(EDITS[:1] + [moved, more])
    assert patched(full, lr) is None
    # as does a region reaching further than the patch's limit
    lr.set_edits(EDITS + [moved, replace(more, start_s=0.0, stop_s=50.0)])
    assert patched(full, lr, most=1 << 16) is None
