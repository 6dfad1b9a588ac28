"""The project's own error types.

Every problem with what a user gave us (a file, a record, an option) is raised
as :class:`InputError` with a message that fits on one line and names the
file, the record or position, what is wrong and how to fix it. The command
line turns it into that line and exit status 2, with no traceback unless
``--debug`` is given.

What a user should know about a result that stands (saturated pairs set to a
cap, negative branch lengths, sequences with little data) is a
:class:`CladewrightWarning`: made once, as a record with a kind and a message,
and worded the same in the command line's summary and in the run report.
"""

from __future__ import annotations

import os
from collections.abc import Sequence

__all__ = ["CladewrightError", "InputError", "SaturationError", "CladewrightWarning"]


class CladewrightError(Exception):
    """Base class of every error cladewright raises on purpose."""


class InputError(CladewrightError, ValueError):
    """Bad input: the message names the file, the record and the fix."""

    #: The file (or other input) the message is about, or None.
    source: str | os.PathLike[str] | None

    def __init__(self, message: str, *, source: str | os.PathLike[str] | None = None) -> None:
        self.source = source
        if source:
            message = f"{source}: {message}"
        super().__init__(message)


class SaturationError(InputError):
    """A distance is undefined because a logarithm's argument is <= 0."""

    #: The pairs (row, column) whose distance is undefined.
    pairs: Sequence[tuple[int, int]]

    def __init__(self, message: str, pairs: Sequence[tuple[int, int]], *,
                 source: str | os.PathLike[str] | None = None) -> None:
        self.pairs = pairs
        super().__init__(message, source=source)


class CladewrightWarning(UserWarning):
    """A warning about a run whose result stands: one record per kind of problem.

    The library returns these in ``info["warnings"]`` (see
    :func:`cladewright.pipeline.run_warnings`) rather than issuing them, so
    that a run leaves no state behind; ``warnings.warn(w)`` issues one as a
    Python warning.

    Parameters
    ----------
    kind : str
        One of :data:`cladewright.choices.WARNING_KINDS`.
    message : str
        One line, in the library's terms (parameters, not command-line options).
    """

    kind: str
    message: str

    def __init__(self, kind: str, message: str) -> None:
        self.kind = kind
        self.message = message
        super().__init__(message)

    def __reduce__(self) -> tuple[type[CladewrightWarning], tuple[str, str]]:
        return type(self), (self.kind, self.message)

    def __eq__(self, other: object) -> bool:
        return (isinstance(other, CladewrightWarning)
                and (self.kind, self.message) == (other.kind, other.message))

    def __hash__(self) -> int:
        return hash((self.kind, self.message))

    def __repr__(self) -> str:
        return f"CladewrightWarning({self.kind!r}, {self.message!r})"

    def __str__(self) -> str:
        return self.message
