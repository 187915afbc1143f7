"""The view models import and work with PySide6 and pyqtgraph blocked (no Qt at all)."""

import subprocess
import sys

VIEWS = ("decimate", "display_data", "band_envelopes", "band_labels", "channel_units",
         "band_edits", "edit_words", "thread_priority")

_BLOCKED = """
import sys
for name in ("PySide6", "shiboken6", "pyqtgraph"):
    sys.modules[name] = None          # any import of them now raises ImportError
import numpy as np
import importlib
for name in sys.argv[1:]:
    importlib.import_module("scalesieve.views." + name)
from scalesieve.views.decimate import minmax_columns
x = np.zeros(1000); x[123] = 5.0; x[777] = -4.0
lo, hi = minmax_columns(x, 10)
# min/max per column: the extremes of the whole array survive (by definition of min and max)
assert float(np.max(hi)) == 5.0 and float(np.min(lo)) == -4.0
print("ok", sorted(m for m, v in sys.modules.items()
                   if v is not None and m.startswith(("PySide6", "shiboken6", "pyqtgraph"))))
"""


def test_view_models_import_with_pyside6_blocked():
    r = subprocess.run([sys.executable, "-c", _BLOCKED, *VIEWS], capture_output=True,
                       text=True, timeout=120)
    assert r.returncode == 0, r.stderr
    assert r.stdout.strip() == "ok []"


def test_old_gui_names_are_the_same_modules():
    import importlib

    for name in VIEWS:
        old = importlib.import_module("scalesieve.gui." + name)
        new = importlib.import_module("scalesieve.views." + name)
        assert old is new


def test_envelope_thread_stops_and_joins():
    # threading.Thread keeps a method of its own named _stop (CPython's threading
    # module, from memory: join() calls it); a thread that shadowed it could not be joined
    from scalesieve.views.band_envelopes import FIGURES, EnvelopeThread

    done = []
    t = EnvelopeThread([(0, FIGURES, lambda: ["rows"])], lambda *a: None, done.append)
    t.start()
    t.stop()
    t.join(timeout=10)
    assert not t.is_alive() and done == [None]
