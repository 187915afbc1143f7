"""Exact stretches of a long recording against PyWavelets' whole-array wavedec / waverec.

The reference is ``pywt.waverec`` of the edited ``pywt.wavedec`` of the whole
recording (PyWavelets), the noise ``median(|d1|) / 0.6745`` and the universal
threshold ``sigma * sqrt(2 ln n)`` (Donoho & Johnstone 1994), BayesShrink
``sigma^2 / sqrt(max(mean(d^2) - sigma^2, eps))`` (Chang, Yu & Vetterli 2000);
region edits against the in-memory model, which its own tests hold to PyWavelets.
"""

import numpy as np
import pytest
import pywt
import soundfile as sf

from scalesieve.core.transforms import TransformSpec
from scalesieve.errors import ScalesieveError
from scalesieve.longview.samples import SampleReader
from scalesieve.longview.span import open_long
from scalesieve.recipe import Edit

MAD = 0.6744897501960817          # Phi^-1(0.75), Donoho & Johnstone 1994


@pytest.fixture(autouse=True)
def _cache(tmp_path, monkeypatch):
    monkeypatch.setenv("SCALESIEVE_CACHE_DIR", str(tmp_path / "cache"))


def _wav(tmp_path, n, channels=1, subtype="DOUBLE", seed=3, name="long.wav"):
    rng = np.random.default_rng(seed)
    t = np.arange(n)[:, None]
    x = 0.1 * rng.standard_normal((n, channels)) + 0.5 * np.sin(t / (40.0 + 7 * np.arange(channels)))
    x[n // 3] += 0.8                                   # an impact
    path = str(tmp_path / name)
    sf.write(path, x, 8000, subtype=subtype)
    back, _ = sf.read(path, dtype="float64", always_2d=True)    # what the file holds
    return path, back


def _reference(x, spec, gains=None, universal=None, bayes=False):
    c = pywt.wavedec(x, spec.wavelet, mode=spec.mode, level=spec.level)
    level = spec.level
    if gains:
        for j, g in gains.items():
            c[level - j + 1] = c[level - j + 1] * g
    if universal:
        d1 = np.abs(pywt.wavedec(x, spec.wavelet, mode=spec.mode, level=spec.level)[-1])
        sigma = np.median(d1[d1 != 0]) / MAD
        lam = sigma * np.sqrt(2 * np.log(x.shape[0]))
        c = [c[0]] + [pywt.threshold(v, lam, universal) for v in c[1:]]
    if bayes:
        d1 = np.abs(c[-1])
        sigma = np.median(d1[d1 != 0]) / MAD
        out = [c[0]]
        for v in c[1:]:
            lam = sigma ** 2 / np.sqrt(max(np.mean(v * v) - sigma ** 2, 1e-12))
            out.append(pywt.threshold(v, lam, "soft"))
        c = out
    return pywt.waverec(c, spec.wavelet, mode=spec.mode)[:x.shape[0]]


SPANS = [(0, 1), (0, 999), (5, 4100), (33333, 40001), (-2000, None), (-1, None)]


@pytest.mark.parametrize("wavelet,mode,level", [("db4", "symmetric", 6), ("haar", "zero", 9),
                                                ("sym5", "reflect", 5), ("bior3.5", "smooth", 4),
                                                ("coif2", "constant", 7),
                                                ("db2", "antisymmetric", 8)])
def test_spans_equal_whole_array_reconstruction(tmp_path, wavelet, mode, level):
    n = 65537 + 2 * level                                     # odd lengths
    path, x = _wav(tmp_path, n)
    spec = TransformSpec(wavelet=wavelet, mode=mode, level=level)
    lr, _ = open_long(path, spec)
    edits = [Edit("gain", levels=(1,), gain=0.3), Edit("gain", levels=(3,), gain=0.0),
             Edit("threshold", levels="details", rule="universal", shape="soft",
                  noise="finest")]
    lr.set_edits(edits)
    want = _reference(x[:, 0], spec, gains={1: 0.3, 3: 0.0}, universal="soft")
    assert not np.allclose(want, x[:, 0])                     # the edits do something
    for a, b in SPANS:
        t0 = a % n if a < 0 else a
        t1 = n if b is None else b
        s = lr.synthesise(t0, t1)
        assert s.cleaned.shape == (t1 - t0, 1)
        np.testing.assert_allclose(s.cleaned[:, 0], want[t0:t1], rtol=0, atol=1e-12)
        np.testing.assert_array_equal(s.original[:, 0], x[t0:t1, 0])


def test_bayes_and_two_channels(tmp_path):
    n = 40011
    path, x = _wav(tmp_path, n, channels=2, subtype="FLOAT")
    spec = TransformSpec(wavelet="db4", mode="symmetric", level=5)
    lr, _ = open_long(path, spec)
    lr.set_edits([Edit("threshold", levels="details", rule="bayes", shape="soft",
                       noise="finest")])
    for k in range(2):
        want = _reference(x[:, k], spec, bayes=True)
        s = lr.synthesise(12345, 23456)
        np.testing.assert_allclose(s.cleaned[:, k], want[12345:23456], rtol=0, atol=1e-12)


def test_region_edit_and_one_channel_match_the_model(tmp_path):
    from scalesieve import api

    n = 30001
    path, x = _wav(tmp_path, n, channels=2)
    spec = TransformSpec(wavelet="sym4", mode="symmetric", level=5)
    edits = [Edit("region", levels=(1, 2), start_s=1.0, stop_s=1.5, gain=0.0),
             Edit("threshold", levels=(1,), rule="sure", shape="hard", noise="level")]
    lr, _ = open_long(path, spec, channel=1)
    lr.set_edits(edits)
    model = api.build_model(api.load(path, channel=1), transform=spec, edits=edits)
    want = model.cleaned()[:, 0]
    s = lr.synthesise(7000, 13000)          # across the region (8000 .. 12000 samples)
    np.testing.assert_allclose(s.cleaned[:, 0], want[7000:13000], rtol=0, atol=1e-12)
    np.testing.assert_array_equal(s.original[:, 0], x[7000:13000, 1])


def test_coefficients_of_the_span_are_the_edited_bands(tmp_path):
    n = 20000
    path, x = _wav(tmp_path, n)
    spec = TransformSpec(wavelet="db4", mode="symmetric", level=4)
    lr, _ = open_long(path, spec)
    lr.set_edits([Edit("gain", levels=(2,), gain=0.5)])
    c = pywt.wavedec(x[:, 0], "db4", mode="symmetric", level=4)
    s = lr.synthesise(5000, 9000)
    k0, v = s.coefficients[0][2]
    np.testing.assert_allclose(v, 0.5 * c[3][k0:k0 + v.shape[0]], rtol=0, atol=1e-15)
    assert 1000 <= v.shape[0] <= 1010      # 4000 samples at level 2: about 1000 coefficients


def test_export_equals_whole_array_clean(tmp_path):
    n = 50001
    path, x = _wav(tmp_path, n)
    spec = TransformSpec(wavelet="db4", mode="symmetric", level=6)
    lr, _ = open_long(path, spec)
    lr.set_edits([Edit("threshold", levels="details", rule="universal", shape="soft",
                       noise="finest")])
    out = str(tmp_path / "out.wav")
    seen = []
    lr.export(out, subtype="DOUBLE", progress=lambda f, t: seen.append(f))
    y, _ = sf.read(out, dtype="float64")
    np.testing.assert_allclose(y, _reference(x[:, 0], spec, universal="soft"), atol=1e-12)
    assert seen and seen[-1] == 1.0
    with pytest.raises(ScalesieveError):
        lr.export(out)                       # never over an existing file without force


def test_transforms_not_shown_long_are_refused(tmp_path):
    path, _ = _wav(tmp_path, 5000)
    for spec in (TransformSpec(kind="packet", level=3), TransformSpec(kind="swt")):
        with pytest.raises(ScalesieveError, match="use --transform dwt"):
            open_long(path, spec)
    lr, _ = open_long(path, TransformSpec(mode="periodization"))     # the modes that wrap
    assert lr.spec.mode == "periodization"
    lr.close()


@pytest.mark.parametrize("subtype", ["PCM_16", "PCM_24", "PCM_32", "FLOAT", "DOUBLE"])
def test_direct_reads_equal_soundfile(tmp_path, subtype):
    # soundfile (libsndfile) is the reference for how each sample format reads as float
    path, x = _wav(tmp_path, 4097, channels=3, subtype=subtype)
    x = np.clip(x, -1, 1)
    r = SampleReader(path)
    assert r.direct
    np.testing.assert_array_equal(r.read(0, 4097), sf.read(path, dtype="float64",
                                                          always_2d=True)[0])
    np.testing.assert_array_equal(SampleReader(path, channel=2).read(100, 200),
                                  sf.read(path, dtype="float64", always_2d=True)[0][100:200, 2:])


def test_unmapped_formats_read_through_soundfile(tmp_path):
    path, x = _wav(tmp_path, 3001, subtype="PCM_16", name="a.flac")
    r = SampleReader(path)
    assert not r.direct
    np.testing.assert_array_equal(r.read(10, 2000), x[10:2000])


def test_rf64_is_read_directly_too(tmp_path):
    # an RF64 file (the WAV form past 4 GiB), written by libsndfile, read back by it
    rng = np.random.default_rng(4)
    x = rng.uniform(-1, 1, (3000, 2))
    path = str(tmp_path / "big.wav")
    sf.write(path, x, 48000, subtype="PCM_24", format="RF64")
    r = SampleReader(path)
    assert r.direct
    np.testing.assert_array_equal(r.read(7, 2999), sf.read(path, dtype="float64")[0][7:2999])


def test_damaged_headers_are_read_through_soundfile_or_refused_in_one_line(tmp_path):
    from scalesieve.io.wav_header import data_layout

    path, x = _wav(tmp_path, 2000, subtype="PCM_16")
    data = open(path, "rb").read()
    for cut in (5, 20, 40):
        bad = tmp_path / f"cut{cut}.wav"
        bad.write_bytes(data[:cut])
        assert data_layout(str(bad)) is None
        with pytest.raises(ScalesieveError, match="could not read"):
            SampleReader(str(bad))
    garbage = tmp_path / "garbage.wav"
    garbage.write_bytes(b"RIFF\xff\xff\xff\xffWAVEfmt \x02\x00\x00\x00" + bytes(100))
    assert data_layout(str(garbage)) is None
