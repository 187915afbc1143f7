"""Moved to :mod:`scalesieve.views.band_envelopes` (no Qt); this name stays importable.

The same module object, so names, state and patches are shared.
"""

import sys

from scalesieve.views import band_envelopes as _moved

sys.modules[__name__] = _moved
