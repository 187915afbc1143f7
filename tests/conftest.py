import os

# Every test runs headless; Qt (where used) draws offscreen.
os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
