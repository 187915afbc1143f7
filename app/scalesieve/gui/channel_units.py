"""Moved to :mod:`scalesieve.views.channel_units` (no Qt); this name stays importable.

The same module object, so names, state and patches are shared.
"""

import sys

from scalesieve.views import channel_units as _moved

sys.modules[__name__] = _moved
