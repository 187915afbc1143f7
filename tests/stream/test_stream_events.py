"""`events` block by block: the events and noise of the whole-array detection, identical."""

import json

import numpy as np
import pytest
import pywt
import soundfile as sf

from scalesieve import memory_guard
from scalesieve.cli import main
from scalesieve.core import events as ev
from scalesieve.core.transforms import TransformSpec
from scalesieve.stream.events import SwtStream, events_stream

RATE = 20_000


@pytest.fixture(scope="module")
def impacts(tmp_path_factory):
    n = 400_003
    rng = np.random.default_rng(0)
    x = np.stack([0.01 * rng.standard_normal(n), 0.02 * rng.standard_normal(n)], axis=1)
    for s in range(1000, n - 1000, 2001):
        x[s:s + 5, 0] += 0.2 * rng.standard_normal(5)
    x[3:6, 1] += 0.5                                  # at the very edges too
    x[-5:, 1] += 0.4
    path = tmp_path_factory.mktemp("ev") / "impacts.wav"
    sf.write(path, x, RATE, subtype="DOUBLE")
    return path, x


@pytest.mark.parametrize("kind,mode,wavelet,levels", [
    ("swt", "symmetric", "db4", (1, 2)), ("swt", "periodization", "sym5", (1, 3)),
    ("dwt", "symmetric", "db4", (1, 2, 3)), ("dwt", "zero", "haar", (1,)),
    ("dwt", "reflect", "coif1", (2, 4)), ("dwt", "periodic", "sym5", (1, 3)),
    ("dwt", "periodization", "db4", (1, 2, 3))])
def test_events_in_blocks_are_the_whole_array_events(impacts, kind, mode, wavelet, levels):
    # the whole-array detection (core.events, itself checked against the normal
    # distribution's false-alarm rate in tests/core) on the same samples
    path, x = impacts
    spec = TransformSpec(kind, wavelet, None, mode).resolved(x.shape[0])
    got, noise, facts = events_stream(str(path), spec, levels, 5.0)
    prepared = {c: ev.prepare_signal(x[:, c], spec, levels) for c in range(2)}
    want, want_noise = ev.detect_channels(prepared, lambda c: x[:, c], RATE, 5.0)
    assert len(want) > 150
    assert got == want
    assert noise == want_noise
    assert facts["samples"] == x.shape[0] and facts["channels"] == 2


def test_swt_blocks_are_pywavelets_swt_away_from_the_edges():
    # reference: pywt.swt of the whole (padded) recording, norm=True
    n = 50_000
    x = np.random.default_rng(4).standard_normal(n)
    spec = TransformSpec("swt", "db3", 4, "symmetric")
    got = {}
    s = SwtStream(n, spec, (1, 2, 4), lambda j, k0, v: got.setdefault(j, []).append((k0, v)),
                  block=3001)
    for i in range(0, n, 4096):
        s.feed(x[i:i + 4096])
    whole = pywt.swt(x, "db3", level=4, trim_approx=True, norm=True)
    for j in (1, 2, 4):
        k0 = got[j][0][0]
        c = np.concatenate([v for _, v in got[j]])
        r = ev.support(spec, j)
        assert k0 <= max(0, -r[0]) and k0 + c.shape[0] >= n - r[1]
        lo, hi = max(0, -r[0]), n - r[1]                # coefficients that read no padding
        np.testing.assert_allclose(c[lo - k0:hi - k0], whole[4 - j + 1][lo:hi], rtol=0,
                                   atol=1e-12)


def test_the_command_finds_the_same_events_in_blocks(impacts, monkeypatch, capsys):
    path, _ = impacts
    assert main(["events", str(path), "--json"]) == 0
    whole = json.loads(capsys.readouterr().out)
    monkeypatch.setattr(memory_guard, "STREAM_ABOVE", 1 << 16)
    import scalesieve.stream.events as se

    calls = []
    real = se.events_stream
    monkeypatch.setattr(se, "events_stream", lambda *a, **kw: calls.append(1) or real(*a, **kw))
    assert main(["events", str(path), "--json"]) == 0
    blocks = json.loads(capsys.readouterr().out)
    assert calls and blocks == whole
