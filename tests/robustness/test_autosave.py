"""No lost work in the window: sessions saved after each edit, offered back after a crash.

Hashes are checked against hashlib's SHA-256 of the file's bytes; the data
folder comes from $SCALESIEVE_DATA_DIR (set to a temporary folder here) and
otherwise from platformdirs, compared with platformdirs itself.
"""

from __future__ import annotations

import hashlib
import json
import os
import signal
import subprocess
import sys
import time

import pytest

from scalesieve import autosave
from scalesieve.errors import ScalesieveError
from scalesieve.recipe import Edit, Recipe, from_json
from scalesieve.core.transforms import TransformSpec


@pytest.fixture
def data_dir(tmp_path, monkeypatch):
    folder = tmp_path / "user-data"
    monkeypatch.setenv(autosave.DATA_DIR_ENV, str(folder))
    return folder


@pytest.fixture
def recording(tmp_path):
    p = tmp_path / "pump_bearing_run3.wav"
    p.write_bytes(b"RIFF" + bytes(range(256)) * 40)
    return p


RECIPE = Recipe(TransformSpec("dwt", "db4", 6, "symmetric"),
                (Edit("gain", levels=(1,), gain=0.0),
                 Edit("region", levels=(1, 2), start_s=0.5, stop_s=0.6, gain=0.0)))


def touch_later(p, seconds=5):
    st = os.stat(p)
    os.utime(p, ns=(st.st_atime_ns, st.st_mtime_ns + seconds * 10 ** 9))


def test_saved_edits_are_offered_back_with_the_view(data_dir, recording):
    file = autosave.save_session(recording, RECIPE.to_json(), {"zoom_s": [0.4, 0.7],
                                                               "band": "d2"})
    assert file.startswith(str(data_dir / "sessions"))
    info = autosave.pending_restore(recording)
    assert info is not None and info.edit_count == 2 and not info.changed
    assert info.recipe == RECIPE and info.problem is None
    assert info.view_state == {"zoom_s": [0.4, 0.7], "band": "d2"}
    # The recorded hash is the SHA-256 of the file's bytes (hashlib as the reference).
    assert info.recorded.sha256 == hashlib.sha256(recording.read_bytes()).hexdigest()
    assert info.recorded.method == "sha256" and info.recorded.size == recording.stat().st_size
    assert "2 edits saved" in info.summary()


def test_recipe_given_as_text_or_recipe_object(data_dir, recording):
    autosave.save_session(recording, RECIPE.dumps(), {})
    assert autosave.pending_restore(recording).recipe == RECIPE
    autosave.save_session(recording, RECIPE, {})
    assert autosave.pending_restore(recording).recipe == RECIPE


def test_later_saves_only_stat_the_recording(data_dir, recording, monkeypatch):
    calls = []
    real = autosave.fingerprint
    monkeypatch.setattr(autosave, "fingerprint", lambda *a, **k: calls.append(a) or real(*a, **k))
    for k in range(5):
        autosave.save_session(recording, RECIPE.to_json(), {"step": k})
    assert len(calls) == 1  # the first save; the others keep the session's fingerprint
    assert autosave.pending_restore(recording).view_state == {"step": 4}


def test_changed_contents_are_detected_by_hash(data_dir, recording):
    autosave.save_session(recording, RECIPE.to_json(), {})
    raw = bytearray(recording.read_bytes())
    raw[100] ^= 0xFF                       # same size, one byte different
    recording.write_bytes(bytes(raw))
    touch_later(recording)
    info = autosave.pending_restore(recording)
    assert info.changed and "SHA-256" in info.change_reason
    assert info.current.sha256 == hashlib.sha256(bytes(raw)).hexdigest()
    assert "changed on disk" in info.summary()


def test_a_touched_but_unchanged_file_is_not_reported(data_dir, recording):
    autosave.save_session(recording, RECIPE.to_json(), {})
    touch_later(recording)
    info = autosave.pending_restore(recording)
    assert not info.changed and info.current is not None


def test_size_change_and_missing_file(data_dir, recording):
    autosave.save_session(recording, RECIPE.to_json(), {})
    with open(recording, "ab") as fh:
        fh.write(b"more")
    info = autosave.pending_restore(recording)
    assert info.changed and "size changed" in info.change_reason
    recording.unlink()
    info = autosave.pending_restore(recording)
    assert info.changed and "no longer there" in info.change_reason


def test_restoring_onto_a_changed_file_then_saving_takes_its_new_fingerprint(data_dir,
                                                                             recording):
    autosave.save_session(recording, RECIPE.to_json(), {})
    recording.write_bytes(b"RIFF" + bytes(1000))
    info = autosave.pending_restore(recording)
    assert info.changed
    # The user restores anyway; the window passes the file as it is now.
    autosave.save_session(recording, info.recipe, info.view_state,
                          fingerprint=autosave.fingerprint(recording))
    assert not autosave.pending_restore(recording).changed


def test_large_files_get_a_sampled_hash(data_dir, recording, monkeypatch):
    monkeypatch.setattr(autosave, "FULL_HASH_BYTES", 1000)
    fp = autosave.fingerprint(recording, full_limit=1000)
    assert fp.method == "sampled-sha256" and fp.size == recording.stat().st_size
    assert fp.sha256 != hashlib.sha256(recording.read_bytes()).hexdigest()
    autosave.save_session(recording, RECIPE.to_json(), {}, fingerprint=fp)
    raw = bytearray(recording.read_bytes())
    raw[10] ^= 1                           # in the first MiB: always sampled
    recording.write_bytes(bytes(raw))
    touch_later(recording)
    info = autosave.pending_restore(recording)
    assert info.changed and "SHA-256" in info.change_reason
    # Same bytes, new time stamp: a sampled hash cannot rule out a change, so it says so.
    recording.write_bytes(bytes(raw[:10]) + bytes([raw[10] ^ 1]) + bytes(raw[11:]))
    touch_later(recording, 9)
    info = autosave.pending_restore(recording)
    assert info.changed and "modified since" in info.change_reason


def test_fingerprint_progress_and_cancel(recording):
    seen = []
    autosave.fingerprint(recording, progress=seen.append)
    assert seen and seen[-1] == 1.0 and seen == sorted(seen)
    with pytest.raises(autosave.Cancelled):
        autosave.fingerprint(recording, cancel=lambda: True)


def test_nothing_to_offer_without_edits_or_after_clear(data_dir, recording):
    assert autosave.pending_restore(recording) is None
    autosave.save_session(recording, Recipe(None, ()).to_json(), {"zoom_s": [0, 1]})
    assert autosave.pending_restore(recording) is None      # a view alone is not offered
    autosave.save_session(recording, RECIPE.to_json(), {})
    assert autosave.clear_session(recording) is True
    assert autosave.pending_restore(recording) is None
    assert autosave.clear_session(recording) is False


def test_one_session_per_file_however_it_is_named(data_dir, recording, tmp_path):
    link = tmp_path / "link-to-run3.wav"
    link.symlink_to(recording)
    autosave.save_session(link, RECIPE.to_json(), {})
    assert autosave.session_key(link) == autosave.session_key(recording)
    assert autosave.pending_restore(recording).edit_count == 2
    other = tmp_path / "run4.wav"
    other.write_bytes(b"x")
    assert autosave.pending_restore(other) is None


def test_view_state_nan_becomes_null_and_objects_are_refused(data_dir, recording):
    autosave.save_session(recording, RECIPE.to_json(), {"zoom_s": [float("nan"), 1.0],
                                                        "y": float("inf"), "t": (1, 2)})
    assert autosave.pending_restore(recording).view_state == {"zoom_s": [None, 1.0], "y": None,
                                                              "t": [1, 2]}
    with pytest.raises(ScalesieveError, match="view state holds a object"):
        autosave.save_session(recording, RECIPE.to_json(), {"widget": object()})
    # The refused save left the earlier one in place.
    assert autosave.pending_restore(recording).view_state["t"] == [1, 2]


def test_unreadable_session_is_set_aside_not_deleted(data_dir, recording):
    file = autosave.save_session(recording, RECIPE.to_json(), {})
    with open(file, "w") as fh:
        fh.write('{"scalesieve_session": 1, "recording": ')   # cut off
    assert autosave.pending_restore(recording) is None
    kept = [n for n in os.listdir(os.path.dirname(file)) if ".unreadable-" in n]
    assert len(kept) == 1 and not os.path.exists(file)


def test_saved_recipe_that_no_longer_reads_is_reported(data_dir, recording):
    doc = RECIPE.to_json()
    doc["edits"].append({"op": "sharpen", "levels": [1]})
    autosave.save_session(recording, doc, {})
    info = autosave.pending_restore(recording)
    assert info.recipe is None and "sharpen" in info.problem and info.edit_count == 3
    assert info.recipe_json == doc   # the raw edits are still there to show or copy


def test_a_failed_save_keeps_the_previous_one(data_dir, recording, monkeypatch):
    from scalesieve.io import atomic

    autosave.save_session(recording, RECIPE.to_json(), {"k": 1})

    def full_disk(path):
        raise OSError(28, "No space left on device")

    with monkeypatch.context() as m:
        m.setattr(atomic, "_fsync_file", full_disk)
        with pytest.raises(ScalesieveError, match="disk space"):
            autosave.save_session(recording, RECIPE.to_json(), {"k": 2})
    assert autosave.pending_restore(recording).view_state == {"k": 1}
    assert not [n for n in os.listdir(data_dir / "sessions") if ".tmp-" in n]


def test_default_folder_is_platformdirs_user_data_dir(monkeypatch):
    from platformdirs import user_data_dir

    monkeypatch.delenv(autosave.DATA_DIR_ENV, raising=False)
    assert autosave.data_dir() == user_data_dir("scalesieve", appauthor=False)


def test_list_sessions(data_dir, recording, tmp_path):
    other = tmp_path / "fan.csv"
    other.write_text("t,x\n0,1\n")
    autosave.save_session(recording, RECIPE.to_json(), {})
    autosave.save_session(other, Recipe(None, (Edit("gain", levels=(1,), gain=0.5),)), {})
    found = {os.path.basename(s["path"]): s["edits"] for s in autosave.list_sessions()}
    assert found == {"pump_bearing_run3.wav": 2, "fan.csv": 1}


_SAVER = r"""
import sys, itertools
from scalesieve import autosave
from scalesieve.recipe import Edit, Recipe
path = sys.argv[1]
print("ready", flush=True)
for k in itertools.count(1):
    edits = tuple(Edit("gain", levels=(1 + j % 3,), gain=0.5) for j in range(k % 40 + 1))
    autosave.save_session(path, Recipe(None, edits), {"step": k, "pad": "x" * (k % 5000)})
"""


@pytest.mark.skipif(not hasattr(signal, "SIGKILL"), reason="needs SIGKILL (POSIX)")
def test_a_window_killed_while_saving_leaves_a_whole_session(data_dir, recording):
    # A process saving as fast as it can, killed at random moments, as a crash would.
    import random

    rng = random.Random(5)
    env = dict(os.environ)
    for trial in range(8):
        proc = subprocess.Popen([sys.executable, "-c", _SAVER, str(recording)],
                                stdout=subprocess.PIPE, text=True, env=env)
        assert proc.stdout.readline().strip() == "ready"
        time.sleep(rng.uniform(0.01, 0.15))
        proc.send_signal(signal.SIGKILL)
        proc.wait()
        proc.stdout.close()
        file = autosave.session_file(recording)
        if not os.path.exists(file):
            continue  # killed before the first save finished: nothing was promised yet
        data = json.loads(open(file, encoding="utf-8").read())   # whole, never torn
        info = autosave.pending_restore(recording)
        assert info is not None and info.edit_count == len(data["recipe"]["edits"])
        assert from_json(data["recipe"]).edits == info.recipe.edits
    leftovers = [n for n in os.listdir(data_dir / "sessions") if ".tmp-" in n]
    autosave.save_session(recording, RECIPE, {})   # the next save sweeps them away
    assert not [n for n in os.listdir(data_dir / "sessions") if ".tmp-" in n]
    assert len(leftovers) <= 8


def test_kept_aside_edits_are_not_overwritten_by_new_ones(data_dir, recording):
    autosave.save_session(recording, RECIPE, {})
    kept = autosave.keep_aside(recording)
    assert kept and ".kept-" in kept and autosave.pending_restore(recording) is None
    autosave.save_session(recording, Recipe(None, (Edit("gain", levels=(3,), gain=2.0),)), {})
    sessions = autosave.list_sessions()
    assert sorted((s["kept"], s["edits"]) for s in sessions) == [(False, 1), (True, 2)]
    with open(kept, encoding="utf-8") as fh:
        assert from_json(json.load(fh)["recipe"]) == RECIPE
    assert autosave.keep_aside(recording.with_name("none.wav")) is None
