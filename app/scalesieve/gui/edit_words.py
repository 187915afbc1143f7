"""Moved to :mod:`scalesieve.views.edit_words` (no Qt); this name stays importable.

The same module object, so names, state and patches are shared.
"""

import sys

from scalesieve.views import edit_words as _moved

sys.modules[__name__] = _moved
