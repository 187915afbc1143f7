"""Recordings longer than memory: the DWT, a recipe and the output, block by block.

``dwt`` pushes blocks of samples through the forward cascade of
``core.transforms`` and synthesises blocks of output from the coefficients
as they arrive; ``swt`` does the same for the SWT on the model's padded
recording read as a circle; ``statistics`` gathers, in first passes, the few whole-band
figures a threshold needs (medians for the noise, band sums for BayesShrink,
a band's values for SURE); ``pipeline`` cleans one file and works out its
band figures from guard to output; ``events`` finds transients; ``pieces``
shares one recording out to several workers in time pieces.
"""
