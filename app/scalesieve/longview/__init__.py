"""The window's view of a recording longer than memory, without Qt.

``samples`` reads any stretch of the file on demand (a memory map of a WAV's
samples where their layout allows, soundfile otherwise); ``summary`` makes,
in one streamed forward pass, per-block minimum, maximum and energy of the
signal and of every band's coefficients at several block sizes (and, when a
threshold first needs them, the bands' exact medians in a pass to their
depth); ``cache`` keeps that summary in the user cache folder, keyed by the
file; ``sweep`` works out a wide view's cleaned trace in one pass; ``span`` synthesises exactly any
stretch with the current edits (read it with the filters' margins, forward,
edit, inverse, crop) and exports the whole recording through the streaming
pipeline.
"""
