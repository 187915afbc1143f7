"""Scalesieve: wavelet analysis and cleaning of recorded signals."""

__version__ = "0.1.0"
