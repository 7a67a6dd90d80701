"""Exceptions and exit codes of flatcheck.

Every error that a user can cause derives from :class:`FlatcheckError`. Each
subclass also inherits the matching built-in exception (``ValueError``,
``OSError``...) so that generic callers can still catch it. The command line
catches :class:`FlatcheckError` in one place and prints its message on one line.

A message says *what* is wrong, *where* (file, line, field) and *how to fix it*.
"""

from __future__ import annotations

import enum

__all__ = [
    "ExitStatus",
    "FlatcheckError",
    "InputFormatError",
    "InputValueError",
    "UnitError",
    "LayoutError",
    "UnobservableError",
    "GeometryError",
    "OutputError",
]


class ExitStatus(enum.IntEnum):
    """Process exit codes of the ``flatcheck`` command."""

    OK = 0  #: the command did its job, whatever verdict it reports
    REJECT = 1  #: only with an explicit opt-in flag: a verdict said "reject"
    BAD_INPUT = 2  #: bad input or usage (Click uses 2 for usage errors too)
    INTERNAL = 3  #: a bug in flatcheck; the traceback is shown with --traceback


class FlatcheckError(Exception):
    """Base class of all errors a user can cause or fix."""

    def __init__(self, message: str, *, where: str | None = None, fix: str | None = None):
        self.message = message
        self.where = where
        self.fix = fix
        super().__init__(self.one_line())

    def one_line(self) -> str:
        """The message as one line: ``where: what is wrong; how to fix it``."""
        parts = []
        if self.where:
            parts.append(f"{self.where}: ")
        parts.append(self.message)
        if self.fix:
            parts.append(f"; {self.fix}")
        return " ".join("".join(parts).split())

    def __str__(self) -> str:  # pragma: no cover - trivial
        return self.one_line()


class InputFormatError(FlatcheckError, ValueError):
    """A file cannot be parsed: not TOML/CSV, binary, empty, wrong header, missing field."""


class InputValueError(FlatcheckError, ValueError):
    """A value parsed but is not acceptable: NaN, negative spacing, wrong count."""


class UnitError(FlatcheckError, ValueError):
    """An unknown or unsuitable unit name."""


class LayoutError(FlatcheckError, ValueError):
    """A survey layout that cannot be built (odd steps, lines off the plate...)."""


class UnobservableError(FlatcheckError, ValueError):
    """The layout and instrument cannot observe some shape of the surface."""


class GeometryError(FlatcheckError, ValueError):
    """Point sets that cannot be evaluated (fewer than three non-collinear points...)."""


class OutputError(FlatcheckError, OSError):
    """An output file cannot be written."""
