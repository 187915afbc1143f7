"""Headless numerical core: numpy and PyWavelets only, no Qt."""
