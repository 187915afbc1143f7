import os

from hypothesis import settings

# Every test runs headless; Qt (where used) draws offscreen.
os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

# CI draws the same examples every run (a failure there is reproducible);
# a developer's run explores new ones.
settings.register_profile("ci", derandomize=True, deadline=None, print_blob=True)
if os.environ.get("CI"):
    settings.load_profile("ci")
