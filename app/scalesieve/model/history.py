"""The edit history: every recipe state, and where undo and redo stand."""

from __future__ import annotations

from scalesieve.recipe import Edit


class EditHistory:
    """Edit lists in the order they were made; ``current`` is the one in force.

    Pure bookkeeping: nothing here computes a signal.
    """

    def __init__(self, edits: tuple[Edit, ...] = ()) -> None:
        self._states: list[tuple[Edit, ...]] = [tuple(edits)]
        self._pos = 0

    @property
    def current(self) -> tuple[Edit, ...]:
        return self._states[self._pos]

    def record(self, edits: tuple[Edit, ...]) -> bool:
        """Make ``edits`` a new step (dropping what redo could reach); False if unchanged."""
        edits = tuple(edits)
        if edits == self.current:
            return False
        del self._states[self._pos + 1:]
        self._states.append(edits)
        self._pos += 1
        return True

    def replace_current(self, edits: tuple[Edit, ...]) -> None:
        """Change the state in force without making an undo step."""
        self._states[self._pos] = tuple(edits)

    @property
    def can_undo(self) -> bool:
        return self._pos > 0

    @property
    def can_redo(self) -> bool:
        return self._pos < len(self._states) - 1

    def undo(self) -> bool:
        if not self.can_undo:
            return False
        self._pos -= 1
        return True

    def redo(self) -> bool:
        if not self.can_redo:
            return False
        self._pos += 1
        return True
