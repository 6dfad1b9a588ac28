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


class CladewrightError(Exception):
    """Base class of every error cladewright raises on purpose."""


class InputError(CladewrightError, ValueError):
    """Bad input: the message names the file, the record and the fix."""

    def __init__(self, message, *, source=None):
        self.source = source
        if source:
            message = f"{source}: {message}"
        super().__init__(message)


class SaturationError(InputError):
    """A distance is undefined because a logarithm's argument is <= 0."""

    def __init__(self, message, pairs, *, source=None):
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

    def __init__(self, kind: str, message: str):
        self.kind = kind
        self.message = message
        super().__init__(message)

    def __reduce__(self):
        return type(self), (self.kind, self.message)

    def __eq__(self, other):
        return (isinstance(other, CladewrightWarning)
                and (self.kind, self.message) == (other.kind, other.message))

    def __hash__(self):
        return hash((self.kind, self.message))

    def __repr__(self):
        return f"CladewrightWarning({self.kind!r}, {self.message!r})"

    def __str__(self):
        return self.message
