"""Domain exceptions.

Every error a user can cause by handing us bad data is a :class:`ProfileError`
(a :class:`ValueError`), whose message names *where* (level, field, file, line
or group), *what* was found and *what was expected*.  The command line prints
the message on one line; the HTTP layer maps it to a 4xx JSON body.
"""

from __future__ import annotations


class ProfileError(ValueError):
    """A sounding profile (or a document describing one) is not acceptable.

    Attributes
    ----------
    field:
        Dotted path of the offending field when known, e.g. ``levels[3].temperature_c``.
    """

    def __init__(self, message: str, *, field: str | None = None):
        super().__init__(message)
        self.field = field

    @property
    def message(self) -> str:
        """The message without the exception's class name."""
        return str(self.args[0]) if self.args else ""


class ReaderError(ProfileError):
    """A file or message could not be read; the message names the source and the line or group."""


class OptionError(ValueError):
    """An option given to a library call (method name, member count, ...) is not valid."""

    def __init__(self, message: str, *, field: str | None = None):
        super().__init__(message)
        self.field = field


class WorkLimitError(OptionError):
    """A request asks for more work than allowed (``asked`` > ``limit``, both in ``unit``),
    found before any of it is done."""

    def __init__(self, message: str, *, asked: int, limit: int, unit: str,
                 field: str | None = None):
        super().__init__(message, field=field)
        self.asked = asked
        self.limit = limit
        self.unit = unit


class DeadlineExceeded(RuntimeError):
    """A computation ran past the time limit it was given (:mod:`ptype.engine.deadline`)."""

    def __init__(self, message: str, *, seconds: float):
        super().__init__(message)
        self.seconds = seconds
