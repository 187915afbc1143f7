"""The one error type that reaches the user as a single line."""

from __future__ import annotations


class ScalesieveError(Exception):
    """Bad input or usage: shown as ``scalesieve: error: FILE: message``.

    ``source`` is the file (or recipe) the problem is in, ``line`` the
    1-based line number for text files.
    """

    def __init__(self, message: str, source: str | None = None, line: int | None = None):
        super().__init__(message)
        self.message = message
        self.source = source
        self.line = line

    def one_line(self) -> str:
        where = ""
        if self.source is not None:
            where = f"{self.source}: "
            if self.line is not None:
                where = f"{self.source}: line {self.line}: "
        return f"{where}{self.message}".replace("\n", " ")

    def __str__(self) -> str:  # pragma: no cover - trivial
        return self.one_line()
