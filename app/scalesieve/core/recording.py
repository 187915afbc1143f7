"""A loaded recording: samples, rate, channel names and where it came from."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np


@dataclass
class Recording:
    """Samples as ``float64`` of shape ``(n, channels)``.

    ``subtype`` and ``format`` are the soundfile names of the source file
    (``None`` for text input) so that writers can keep them.
    """

    samples: np.ndarray
    rate: float
    channel_names: list[str]
    source: str = ""
    format: str | None = None
    subtype: str | None = None
    meta: dict = field(default_factory=dict)

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
                         self.format, self.subtype, dict(self.meta))
