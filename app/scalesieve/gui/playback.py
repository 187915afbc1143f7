"""Listening: play a span of the original, cleaned or removed signal.

Sound goes out through the optional ``sounddevice`` package when it is
installed and finds an output device; otherwise the window disables its
play actions and says why.  Nothing here is needed to start the program or
to run the tests.
"""

from __future__ import annotations

import numpy as np

#: text shown once before the first playback
CAUTION = ("Playback can be loud: clicks, knocks and impacts in a recording are much louder "
           "than its background, and cleaning changes the level. Start with the volume low, "
           "especially on headphones.")
#: recordings that are not audio (text tables) are scaled to this peak before playback
TEXT_PEAK = 0.5


def output_status() -> tuple[bool, str]:
    """``(True, device name)`` when sound can be played, else ``(False, reason)``."""
    try:
        import sounddevice as sd  # optional; never a dependency
    except Exception:  # ImportError, or PortAudio missing (OSError)
        return False, ("no audio output: the optional 'sounddevice' package is not installed "
                       "(pip install sounddevice)")
    try:
        dev = sd.query_devices(kind="output")
    except Exception as exc:  # sounddevice raises PortAudioError and others
        return False, f"no audio output device found ({exc})"
    return True, str(dev.get("name", "default output"))


def prepare(samples: np.ndarray, is_audio: bool) -> np.ndarray:
    """Samples ready for the sound card: float32 within ±1.

    Audio keeps its level (clipped at full scale); a text table's values are
    in physical units, so its peak is brought to TEXT_PEAK.
    """
    x = np.asarray(samples, dtype=np.float64)
    if not is_audio:
        peak = float(np.max(np.abs(x))) if x.size else 0.0
        x = x * (TEXT_PEAK / peak) if peak > 0 else x
    return np.clip(x, -1.0, 1.0).astype(np.float32)


class Player:
    """Plays one buffer at a time; ``stop`` ends it."""

    def play(self, samples: np.ndarray, rate: float) -> None:
        import sounddevice as sd

        sd.stop()
        sd.play(samples, int(round(rate)))

    def stop(self) -> None:
        try:
            import sounddevice as sd
        except Exception:  # nothing can be playing without it
            return
        sd.stop()
