"""Exceptions and warnings of filmstack.

Every error a user can cause derives from :class:`FilmstackError` *and* from a builtin
(`ValueError`), so callers can catch either. Messages say what was wrong, where (file, key path,
line) and what was expected. The command line turns an :class:`InputError` into exit code 2 and a
one-line message; any other exception is an internal error (exit code 3).
"""

from __future__ import annotations

__all__ = [
    "FilmstackError",
    "InputError",
    "OutOfRangeError",
    "ExtrapolationWarning",
    "FilmstackWarning",
]


class FilmstackError(Exception):
    """Base class of every error raised on purpose by filmstack."""


class InputError(FilmstackError, ValueError):
    """Bad input from a user: a file, a key, an argument or an option.

    Parameters
    ----------
    message
        What was wrong and what was expected.
    file
        The file the problem is in, if any.
    key
        The key path inside the file, e.g. ``layers[2].nm``.
    line
        1-based line number in the file, where known.
    """

    def __init__(self, message: str, *, file: str | None = None, key: str | None = None,
                 line: int | None = None):
        self.message = message
        self.file = None if file is None else str(file)
        self.key = key
        self.line = line
        super().__init__(self._format())

    def _format(self) -> str:
        where = []
        if self.file:
            where.append(self.file + (f":{self.line}" if self.line else ""))
        if self.key:
            where.append(f"key '{self.key}'")
        prefix = ", ".join(where)
        return f"{prefix}: {self.message}" if prefix else self.message


class OutOfRangeError(InputError):
    """A wavelength outside the range where a material's data are valid."""


class FilmstackWarning(UserWarning):
    """Base class of filmstack's warnings: conditions a user can recover from."""


class ExtrapolationWarning(FilmstackWarning):
    """A dispersion model was evaluated outside its valid range on explicit request."""
