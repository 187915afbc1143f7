"""Recordings longer than memory: the DWT, a recipe and the output, block by block.

``dwt`` pushes blocks of samples through the forward cascade of
``core.transforms`` and synthesises blocks of output from the coefficients
as they arrive; ``swt`` does the same for the SWT on the model's padded
recording read as a circle; ``statistics`` gathers, in first passes, the few whole-band
figures a threshold needs (medians for the noise, band sums for BayesShrink,
a band's values for SURE); ``pipeline`` cleans one file from guard to output,
with its parts beside it (``sources`` read the samples in blocks, ``targets``
write them, ``recipe_plan`` holds each band's edits and the passes its
thresholds need, ``swt_clean`` runs the SWT's passes, ``choice`` says what can
run in blocks); ``bands`` works out the band figures; ``events`` finds
transients; ``pieces`` shares one recording out to several workers in time
pieces.
"""
