"""Exceptions and warnings raised by iqsift.

Every error iqsift raises on purpose derives from :class:`IqsiftError`. Errors
caused by a bad value (a file's content, a parameter) also derive from
:class:`ValueError`, so code that already catches ``ValueError`` keeps working.
Messages name the file or the parameter, echo the offending value and state the
rule; the command-line interface prints them as one line and exits with status 2.
"""

from __future__ import annotations

__all__ = [
    "IqsiftError",
    "InputError",
    "CaptureError",
    "ParameterError",
    "OutputExistsError",
    "IqsiftWarning",
]


class IqsiftError(Exception):
    """Base class of every error iqsift raises on purpose.

    Parameters
    ----------
    message : str
        What is wrong, in the caller's words: Python parameter names (``tone_hz``), file names.
    parameters : tuple of str
        The Python parameter names the message speaks of, so that the command line can say the
        same in its own words (``tone_hz`` becomes ``--tone``).
    """

    def __init__(self, message: str = "", *, parameters: tuple[str, ...] = ()) -> None:
        super().__init__(message)
        self.parameters = tuple(parameters)


class InputError(IqsiftError, ValueError):
    """A value given to iqsift (file content or parameter) breaks a rule."""


class CaptureError(InputError):
    """A capture file (or its metadata) cannot be read as described."""


class ParameterError(InputError):
    """A parameter (frequency, bandwidth, mode, plan entry ...) is invalid.

    The message starts with the parameter's Python name (``"tone_hz: got 50000.0; ..."``).
    """


class OutputExistsError(IqsiftError, FileExistsError):
    """An output file exists and overwriting it was not asked for."""


class IqsiftWarning(UserWarning):
    """Something questionable that iqsift worked around (e.g. a dropped partial sample)."""
