"""A loaded recording: samples, rate, channel names and where it came from."""

from __future__ import annotations

from dataclasses import dataclass, field
from datetime import datetime

import numpy as np


@dataclass
class Recording:
    """Samples as ``float64`` of shape ``(n, channels)``.

    ``subtype`` and ``format`` are the soundfile names of the source file
    (``None`` for text input) so that writers can keep them.

    ``start_time`` is the recording's own clock at its first sample (from a
    timestamp column or a file's header), else ``None``; ``warnings`` holds
    one-line notes on what the reader found wrong but could read (a header
    declaring more frames than the file holds, a filled clock gap);
    ``units`` one unit string per channel (``""`` where the file names none).
    """

    samples: np.ndarray
    rate: float
    channel_names: list[str]
    source: str = ""
    format: str | None = None
    subtype: str | None = None
    meta: dict = field(default_factory=dict)
    start_time: datetime | None = None
    warnings: tuple[str, ...] = ()
    units: list[str] | None = None

    def __post_init__(self) -> None:
        s = np.asarray(self.samples)
        if s.ndim == 1:
            s = s[:, None]
        if s.ndim != 2:
            raise ValueError(f"samples must be 1-D or 2-D, got shape {s.shape}")
        if s.dtype not in (np.float64, np.float32):
            s = s.astype(np.float64)
        self.samples = s
        if len(self.channel_names) != s.shape[1]:
            raise ValueError(
                f"{len(self.channel_names)} channel names for {s.shape[1]} channels")
        self.rate = float(self.rate)
        self.warnings = tuple(str(w) for w in self.warnings)
        if self.units is None:
            self.units = [""] * s.shape[1]
        elif len(self.units) != s.shape[1]:
            raise ValueError(f"{len(self.units)} units for {s.shape[1]} channels")

    @property
    def n(self) -> int:
        return int(self.samples.shape[0])

    @property
    def channels(self) -> int:
        return int(self.samples.shape[1])

    @property
    def duration_s(self) -> float:
        return self.n / self.rate

    def channel(self, k: int) -> np.ndarray:
        return self.samples[:, k]

    def select(self, channels: list[int]) -> "Recording":
        """A recording holding only the given channels (0-based)."""
        return Recording(self.samples[:, channels], self.rate,
                         [self.channel_names[k] for k in channels], self.source,
                         self.format, self.subtype, dict(self.meta), self.start_time,
                         self.warnings, [self.units[k] for k in channels])

    def file_index(self, k: int) -> int:
        """Channel ``k``'s index in the file it was read from (``--channel`` keeps one)."""
        pick = self.meta.get("channel_index")
        return int(pick) if pick is not None and self.channels == 1 else k

    def clock_at(self, seconds: float) -> datetime | None:
        """The recording's own clock ``seconds`` after its first sample, or ``None``."""
        if self.start_time is None:
            return None
        from datetime import timedelta

        return self.start_time + timedelta(seconds=float(seconds))
