"""Qt views of the shared decomposition model (PySide6 + pyqtgraph)."""

from scalesieve.gui import toolkit_fixes as _toolkit_fixes

_toolkit_fixes.apply()
