"""Qt views of the shared decomposition model (PySide6 + pyqtgraph).

What the views compute without Qt lives in ``scalesieve.views``.
"""
