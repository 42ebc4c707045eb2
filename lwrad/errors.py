"""Exceptions and warnings raised by lwrad.

Every problem with user input (files, job files, arguments at the public API)
raises :class:`InputError`, whose message names the file and, where it
applies, the line, key, dataset or column and what was expected.
"""

from __future__ import annotations

__all__ = ["InputError", "ConvergenceWarning", "ConvergenceError"]


class InputError(ValueError):
    """Bad user input: a malformed file, a wrong unit, an invalid argument.

    Parameters
    ----------
    message : str
        What is wrong and what was expected.
    source : str, optional
        The file (or job file, or argument) the problem was found in.
    location : str, optional
        Where inside the source: ``"line 12"``, ``"dataset /particles/x"``,
        ``"key observer.distance"``, ``"column px"``.
    """

    def __init__(self, message: str, *, source: str | None = None, location: str | None = None):
        self.source = None if source is None else str(source)
        self.location = location
        self.detail = message
        parts = []
        if self.source:
            parts.append(self.source)
        if location:
            parts.append(location)
        prefix = ", ".join(parts)
        super().__init__(f"{prefix}: {message}" if prefix else message)


class ConvergenceWarning(UserWarning):
    """A numerical tolerance was not reached; the result carries the figures achieved."""


class ConvergenceError(RuntimeError):
    """A numerical tolerance could not be reached and no result can be trusted."""
