"""What listeners of the model are told, and the list of them."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Callable


@dataclass
class Change:
    """What a listener is told.  ``span`` is the changed sample range, None = all."""

    kind: str                        # "transform", "recipe"
    channels: list[int]
    bands: list = field(default_factory=list)
    span: tuple[int, int] | None = None


class Listeners:
    """Callables told of every change, in the order they were added."""

    def __init__(self) -> None:
        self._fns: list[Callable[[Change], None]] = []

    def add(self, fn: Callable[[Change], None]) -> None:
        self._fns.append(fn)

    def remove(self, fn: Callable[[Change], None]) -> None:
        if fn in self._fns:
            self._fns.remove(fn)

    def notify(self, change: Change) -> None:
        for fn in list(self._fns):      # a listener may remove itself
            fn(change)
