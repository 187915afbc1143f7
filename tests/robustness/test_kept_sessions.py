"""Kept sessions: what a normal close, a save or an export leaves, and for how long.

Hashes are checked against hashlib's SHA-256 of the file's bytes; "same size
and modification time" is made as ``cp -p`` makes it (os.utime with the old
time stamps, shutil.copystat being what ``cp -p`` does in Python).
"""

from __future__ import annotations

import datetime
import hashlib
import json
import os
import shutil

import pytest

from scalesieve import autosave
from scalesieve.core.transforms import TransformSpec
from scalesieve.errors import ScalesieveError
from scalesieve.recipe import Edit, Recipe

RECIPE = Recipe(TransformSpec("dwt", "db4", 6, "symmetric"),
                (Edit("gain", levels=(1,), gain=0.0),
                 Edit("threshold", levels="details", rule="universal")))


@pytest.fixture
def data_dir(tmp_path, monkeypatch):
    folder = tmp_path / "user-data"
    monkeypatch.setenv(autosave.DATA_DIR_ENV, str(folder))
    return folder


@pytest.fixture
def recording(tmp_path):
    p = tmp_path / "fan_run2.wav"
    p.write_bytes(b"RIFF" + bytes(range(256)) * 64)
    return p


def test_same_size_and_time_but_other_bytes_is_a_change(data_dir, recording, tmp_path):
    autosave.save_session(recording, RECIPE, {})
    other = tmp_path / "other.wav"
    raw = bytearray(recording.read_bytes())
    raw[2000] ^= 0x5A
    other.write_bytes(bytes(raw))
    shutil.copystat(recording, other)           # what `cp -p other recording` keeps
    st = os.stat(recording)
    recording.write_bytes(other.read_bytes())
    os.utime(recording, ns=(st.st_atime_ns, st.st_mtime_ns))
    assert os.stat(recording).st_size == st.st_size
    assert os.stat(recording).st_mtime_ns == st.st_mtime_ns
    info = autosave.pending_restore(recording)
    assert info.changed and "SHA-256" in info.change_reason
    assert info.current.sha256 == hashlib.sha256(bytes(raw)).hexdigest()


def test_a_normal_close_after_saving_leaves_nothing(data_dir, recording):
    autosave.save_session(recording, RECIPE, {})
    assert autosave.finish_session(recording, RECIPE.to_json()) is None
    assert autosave.pending_restore(recording) is None and autosave.list_sessions() == []


def test_a_normal_close_with_unsaved_edits_keeps_them_without_offering(data_dir, recording):
    autosave.save_session(recording, RECIPE, {})
    kept = autosave.finish_session(recording, captured=None)
    assert kept and ".kept-" in kept
    assert autosave.pending_restore(recording) is None         # no "did not close normally"
    [listed] = autosave.list_sessions()
    assert listed["kept"] and listed["edits"] == 2 and listed["file"] == kept
    recipe, data = autosave.read_kept(kept)
    assert recipe == RECIPE and data["recording"]["given_path"] == str(recording)


def test_kept_twice_in_one_second_keeps_both(data_dir, recording):
    autosave.save_session(recording, RECIPE, {})
    first = autosave.keep_aside(recording)
    autosave.save_session(recording, Recipe(None, (Edit("gain", levels=(2,), gain=0.5),)), {})
    second = autosave.keep_aside(recording)
    assert first != second and os.path.exists(first) and os.path.exists(second)
    assert sorted(s["edits"] for s in autosave.list_sessions()) == [1, 2]


def test_kept_sessions_are_pruned_after_the_stated_age_only(data_dir, recording, tmp_path):
    autosave.save_session(recording, RECIPE, {})
    kept = autosave.keep_aside(recording)
    other = tmp_path / "pump.wav"
    other.write_bytes(b"RIFF" + bytes(100))
    autosave.save_session(other, RECIPE, {})                # a crashed window's session
    now = datetime.datetime.now(datetime.timezone.utc)
    assert autosave.prune_kept(now=now + datetime.timedelta(days=autosave.KEPT_DAYS - 1)) == []
    gone = autosave.prune_kept(now=now + datetime.timedelta(days=autosave.KEPT_DAYS + 1))
    assert gone == [kept] and not os.path.exists(kept)
    assert autosave.pending_restore(other) is not None       # never pruned


def test_deleting_a_kept_session_only_inside_the_sessions_folder(data_dir, recording, tmp_path):
    autosave.save_session(recording, RECIPE, {})
    kept = autosave.keep_aside(recording)
    stranger = tmp_path / "notes.json"
    stranger.write_text(json.dumps({"a": 1}))
    with pytest.raises(ScalesieveError):
        autosave.delete_kept(str(stranger))
    assert stranger.exists()
    autosave.delete_kept(kept)
    assert autosave.list_sessions() == []
