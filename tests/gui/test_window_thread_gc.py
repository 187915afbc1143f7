"""Cycle collection stays in the window's thread (scalesieve.gui.window_thread_gc).

Reference: Python's ``gc`` module documentation -- ``gc.callbacks`` are
called by the thread that runs a collection, with ``info["generation"]``;
``get_count``/``get_threshold`` are the counts and thresholds automatic
collection uses (a generation is collected when its count exceeds its
threshold).
"""

from __future__ import annotations

import gc
import threading

import pytest


class _Cycle:
    def __init__(self):
        self.me = self


@pytest.fixture
def collections():
    seen = []

    def note(phase, info):
        if phase == "start":
            seen.append((threading.get_ident(), info["generation"]))

    gc.callbacks.append(note)
    yield seen
    gc.callbacks.remove(note)


def test_the_window_application_turns_automatic_collection_off(qapp):
    from scalesieve.gui import window_thread_gc
    from scalesieve.gui.app import make_application

    make_application()
    assert window_thread_gc.active()
    assert not gc.isenabled()


def test_cycles_made_by_a_worker_thread_are_collected_in_the_window_thread(qapp, qtbot,
                                                                          collections):
    from scalesieve.gui.app import make_application

    make_application()
    main = threading.get_ident()

    def work():
        for _ in range(20 * gc.get_threshold()[0]):     # many times what starts a collection
            _Cycle()

    t = threading.Thread(target=work)
    t.start()
    t.join()
    assert all(ident == main for ident, _ in collections)   # none ran in the worker
    qtbot.wait(800)                                          # the window's timer
    assert any(ident == main for ident, _ in collections)


def test_collect_due_follows_the_thresholds(qapp, collections):
    from scalesieve.gui.window_thread_gc import collect_due

    old = gc.get_threshold()
    gc.collect()
    try:
        gc.set_threshold(100, 3, 2)
        assert collect_due() is None                  # nothing allocated since: nothing due
        junk = [_Cycle() for _ in range(300)]
        del junk
        assert gc.get_count()[0] > 100
        assert collect_due() == 0
        assert collections[-1][1] == 0
        for _ in range(4):                            # four young collections: gen 1 due
            [_Cycle() for _ in range(300)]
            gc.collect(0)
        assert gc.get_count()[1] > 3
        [_Cycle() for _ in range(300)]
        assert collect_due() == 1
    finally:
        gc.set_threshold(*old)
