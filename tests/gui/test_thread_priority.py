"""Background threads run at a lower priority than the window's thread (Linux: per thread)."""

import os
import sys
import threading

import pytest

from scalesieve.gui.thread_priority import BACKGROUND_NICE, lower_this_thread


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="per-thread nice is Linux's")
def test_only_the_calling_thread_is_lowered():
    seen = {}

    def work():
        lower_this_thread()
        seen["worker"] = os.getpriority(os.PRIO_PROCESS, threading.get_native_id())

    before = os.getpriority(os.PRIO_PROCESS, threading.get_native_id())
    t = threading.Thread(target=work)
    t.start()
    t.join()
    assert seen["worker"] == max(before, BACKGROUND_NICE)
    assert os.getpriority(os.PRIO_PROCESS, threading.get_native_id()) == before
