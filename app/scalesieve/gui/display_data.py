"""Moved to :mod:`scalesieve.views.display_data` (no Qt); this name stays importable.

The same module object, so names, state and patches are shared.
"""

import sys

from scalesieve.views import display_data as _moved

sys.modules[__name__] = _moved
