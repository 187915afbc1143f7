import os
import sys

import pytest
from hypothesis import settings

from fuzz_budget import campaign_count

# Every test runs headless; Qt (where used) draws offscreen.
os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

# CI draws the same examples every run (a failure there is reproducible);
# a developer's run explores new ones.  The long randomized campaign
# (``SCALESIEVE_FUZZ_EXAMPLES=N``, see DEVELOPERS.md) draws fresh ones, N per fuzz test.
settings.register_profile("ci", derandomize=True, deadline=None, print_blob=True)
_CAMPAIGN = campaign_count()
if _CAMPAIGN is not None:
    settings.register_profile("fuzz-campaign", derandomize=False, deadline=None,
                              print_blob=True, max_examples=_CAMPAIGN)
    settings.load_profile("fuzz-campaign")
elif os.environ.get("CI"):
    settings.load_profile("ci")


@pytest.hookimpl(wrapper=True)
def pytest_runtest_teardown(item, nextitem):
    yield
    # After the test's fixtures are gone: where a GUI test moved cycle
    # collection to the window's thread (scalesieve.gui.window_thread_gc),
    # what fell due during the test is collected here, in the main thread,
    # before the next test starts its threads.
    gcmod = sys.modules.get("scalesieve.gui.window_thread_gc")
    if gcmod is not None and gcmod.active():
        gcmod.collect_due()
