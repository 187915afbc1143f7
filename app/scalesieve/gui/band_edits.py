"""Moved to :mod:`scalesieve.views.band_edits` (no Qt); this name stays importable.

The same module object, so names, state and patches are shared.
"""

import sys

from scalesieve.views import band_edits as _moved

sys.modules[__name__] = _moved
