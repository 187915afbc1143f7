"""The summaries' cache folder is pruned by age and size, never a summary in use.

Expected files worked out by hand from the files' sizes and modification times
(os.stat); the cap and age settings as documented in longview.cache.
"""

import os
import time

import numpy as np
import pytest
import soundfile as sf

from scalesieve.core.transforms import TransformSpec
from scalesieve.longview import cache
from scalesieve.longview.span import open_long

SPEC = TransformSpec(wavelet="db4", mode="symmetric", level=6)


@pytest.fixture(autouse=True)
def _cache(tmp_path, monkeypatch):
    monkeypatch.setenv("SCALESIEVE_CACHE_DIR", str(tmp_path / "cache"))
    monkeypatch.delenv("SCALESIEVE_CACHE_MAX_GIB", raising=False)
    monkeypatch.delenv("SCALESIEVE_CACHE_DAYS", raising=False)
    monkeypatch.setattr(cache, "IN_USE", set())


def _recording(tmp_path, name, seed):
    x = np.random.default_rng(seed).standard_normal(60_000)
    path = str(tmp_path / name)
    sf.write(path, x, 8000, subtype="FLOAT")
    return path


def _aged(file, hours):
    t = time.time() - hours * 3600
    os.utime(file, (t, t))


def test_the_oldest_go_beyond_the_cap_and_the_one_in_use_stays(tmp_path, monkeypatch):
    paths = [_recording(tmp_path, f"shift{i}.wav", i) for i in range(4)]
    files = [cache.cache_path(p, SPEC.resolved(60_000), None) for p in paths]
    held, _ = open_long(paths[0], SPEC)                # open now: in use
    for p in paths[1:3]:
        lr, how = open_long(p, SPEC)
        assert how == "built"
        lr.close()                                     # let go: may be pruned
    for f, hours in zip(files[:3], (5, 2, 3)):         # the one in use is the oldest
        _aged(f, hours)
    size = os.path.getsize(files[1])
    monkeypatch.setenv("SCALESIEVE_CACHE_MAX_GIB", str(2.5 * size / (1 << 30)))
    lr, how = open_long(paths[3], SPEC)                # built and kept: the folder pruned
    # 4 summaries, room for 2.5: the in-use one is skipped, then 3 h and 2 h old go
    assert how == "built"
    assert [os.path.exists(f) for f in files] == [True, False, False, True]
    lr.close()
    held.close()
    # let go now, and over the cap: the next prune may take it (not a file used this hour)
    _aged(files[0], 5)
    assert cache.prune(max_bytes=size) == [files[0]]


def test_unused_for_too_long_goes_even_under_the_cap_and_a_recent_one_stays(tmp_path):
    paths = [_recording(tmp_path, f"night{i}.wav", 10 + i) for i in range(2)]
    files = []
    for p in paths:
        lr, _ = open_long(p, SPEC)
        lr.close()
        files.append(cache.cache_path(p, SPEC.resolved(60_000), None))
    _aged(files[0], 24 * (cache.KEEP_DAYS + 1))
    assert cache.prune() == [files[0]]                 # under 4 GiB, but two months unused
    # a summary used in the last hour may be open in another window: kept whatever the cap
    assert cache.prune(max_bytes=0) == [] and os.path.exists(files[1])
    # read back: used now (its time), so the last to go
    _aged(files[1], 30)
    lr, how = open_long(paths[1], SPEC)
    assert how == "kept" and time.time() - os.path.getmtime(files[1]) < 60
    lr.close()
