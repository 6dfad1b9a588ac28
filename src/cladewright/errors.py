"""The project's own error types.

Every problem with what a user gave us (a file, a record, an option) is raised
as :class:`InputError` with a message that fits on one line and names the
file, the record or position, what is wrong and how to fix it. The command
line turns it into that line and exit status 2, with no traceback unless
``--debug`` is given.
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
