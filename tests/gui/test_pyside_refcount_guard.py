"""The PySide6 reference-count guard: applied at application start-up, not at import."""

import subprocess
import sys

_RUN = """
import sys
before = {k: sys.getrefcount(v) for k, v in (("None", None), ("True", True), ("False", False))}
import scalesieve.gui, scalesieve.gui.main_window      # importing the gui changes nothing
from scalesieve.gui import pyside_refcount_guard as g
after = {k: sys.getrefcount(v) for k, v in (("None", None), ("True", True), ("False", False))}
assert all(after[k] < before[k] + g.BALLAST // 2 for k in before), (before, after)
leaks = [repr(o) for o in g.leaking()]
from scalesieve.gui.app import make_application
app = make_application()
guarded = {k: sys.getrefcount(v) for k, v in (("None", None), ("True", True), ("False", False))}
again = g.guard_leaked_singletons()                # a second call adds nothing
print(sorted(leaks))
print(sorted(k for k in guarded if guarded[k] > g.BALLAST // 2))
print(again)
"""


def test_guard_runs_at_start_up_for_exactly_the_leaking_singletons():
    r = subprocess.run([sys.executable, "-c", _RUN], capture_output=True, text=True,
                       timeout=120, env={**__import__("os").environ,
                                         "QT_QPA_PLATFORM": "offscreen"})
    assert r.returncode == 0, r.stderr
    leaks, guarded, again = r.stdout.strip().splitlines()
    if sys.version_info >= (3, 12):
        assert guarded == "[]"        # immortal objects (PEP 683): nothing to guard
    else:
        assert guarded == leaks       # each measured leak, and only those, got ballast
    assert again == "[]"


def test_a_long_run_of_bool_signals_survives():
    # Without the guard, PySide6 6.12 on 3.11 aborts after some thousands of these
    # (CPython's "bool_dealloc" fatal error); the count is far beyond that.
    r = subprocess.run([sys.executable, "-c", """
from scalesieve.gui.app import make_application
from PySide6.QtCore import QObject, Signal
app = make_application()
class P(QObject):
    flag = Signal(bool)
p = P()
for _ in range(200000):
    p.flag.emit(True)
    p.flag.emit(False)
p.setObjectName("x")
print("ok")
"""], capture_output=True, text=True, timeout=300,
        env={**__import__("os").environ, "QT_QPA_PLATFORM": "offscreen"})
    assert r.returncode == 0 and r.stdout.strip() == "ok", r.stderr
