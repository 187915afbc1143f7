"""When the window shows a recording in long-recording mode (memory_guard.window_long)."""

import numpy as np
import soundfile as sf

from scalesieve import memory_guard
from scalesieve.core.transforms import TransformSpec


def test_over_the_budget_or_the_memory_free(tmp_path):
    path = str(tmp_path / "a.wav")
    sf.write(path, np.zeros((10_000, 2)), 8000, subtype="FLOAT")
    facts = memory_guard.probe_quietly(path)
    need = memory_guard.estimate(facts, transform=TransformSpec())
    assert not memory_guard.window_long(facts, transform=TransformSpec())      # small: in memory
    assert memory_guard.window_long(facts, transform=TransformSpec(), budget=need - 1)
    assert not memory_guard.window_long(facts, transform=TransformSpec(), budget=need)
    assert memory_guard.window_long(facts, transform=TransformSpec(), available=need - 1)
    # one channel needs less
    one = memory_guard.estimate(facts, channel=0, transform=TransformSpec())
    assert not memory_guard.window_long(facts, channel=0, transform=TransformSpec(), budget=one)


def test_text_tables_and_unreadable_files_are_read_as_before(tmp_path):
    table = tmp_path / "log.csv"
    table.write_text("time_s,a\n0,1\n0.1,2\n")
    assert not memory_guard.window_long(memory_guard.probe_quietly(str(table)), budget=0)
    assert not memory_guard.window_long(None, budget=0)
