"""A progress bar on stderr while a long recording is decomposed.

Shown only when stderr is a terminal and the recording is large, so pipes,
logs and scripts see nothing new.  The model reports ``(fraction, text)``;
tqdm draws it.
"""

from __future__ import annotations

import sys
from contextlib import closing, nullcontext

#: samples (all channels) from which a load takes long enough to show a bar, about a second
LARGE_SAMPLES = 4_000_000
#: seconds between redraws at most (tqdm's mininterval)
REFRESH_S = 0.1


class Bar:
    """A callable ``(fraction, text)`` drawing a tqdm bar; close it (or use ``with``)."""

    def __init__(self, stream, label: str = ""):
        from tqdm import tqdm

        self._bar = tqdm(total=1000, file=stream, leave=False, dynamic_ncols=True,
                         mininterval=REFRESH_S, desc=label,
                         bar_format="{desc}: {percentage:3.0f}%|{bar}| {elapsed}")

    def __call__(self, fraction: float, text: str) -> None:
        step = max(0, min(1000, int(round(1000 * fraction))))
        if text and text != self._bar.desc:
            self._bar.set_description_str(text, refresh=False)
        self._bar.update(step - self._bar.n)

    def close(self) -> None:
        self._bar.close()


def for_file(path: str, channel: int | None = None, stream=None, facts: dict | None = None):
    """A context giving a progress callable for loading ``path``, or None when not worth it.

    ``facts`` (from ``readers.probe`` or ``memory_guard.check``) saves a
    second probe.  A file that cannot be probed gets no bar: loading it will
    say what is wrong.
    """
    stream = sys.stderr if stream is None else stream
    isatty = getattr(stream, "isatty", None)
    if not (isatty and isatty()):
        return nullcontext(None)
    if facts is None:
        from scalesieve.errors import ScalesieveError
        from scalesieve.io.readers import probe

        try:
            facts = probe(path)
        except ScalesieveError:
            return nullcontext(None)
    samples = int(facts["frames"]) * (1 if channel is not None else int(facts["channels"]))
    if samples < LARGE_SAMPLES:
        return nullcontext(None)
    return closing(Bar(stream, "loading"))
