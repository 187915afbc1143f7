"""Moved to :mod:`scalesieve.views.thread_priority` (no Qt); this name stays importable.

The same module object, so names, state and patches are shared.
"""

import sys

from scalesieve.views import thread_priority as _moved

sys.modules[__name__] = _moved
