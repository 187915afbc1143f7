"""What the window shows, computed without Qt: view models a headless test can import.

Decimation of long traces (``decimate``), the per-channel data the panes draw
(``display_data``, ``band_envelopes``), how bands, gains and edits are written
on screen (``band_labels``, ``edit_words``, ``channel_units``), the edits a
band's controls make (``band_edits``) and the priority of the worker threads
that compute them (``thread_priority``).  Nothing here imports PySide6 or
pyqtgraph; ``scalesieve.gui`` draws what these return.
"""
