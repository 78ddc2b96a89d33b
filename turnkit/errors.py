"""Errors raised by turnkit.

Every error about a user's input names the field, the value received (with
its unit) and what is allowed, so that the message alone says what to fix.
The numbers are also stored on the exception for programs that catch it.
"""

from __future__ import annotations

__all__ = [
    "TurnkitError",
    "DesignValueError",
    "DesignFileError",
    "TurnkitWarning",
]


class TurnkitError(Exception):
    """Base class of every error turnkit raises on purpose."""


class DesignValueError(TurnkitError, ValueError):
    """A design value is outside what turnkit can accept.

    Parameters
    ----------
    field : str
        Where the value lives, as a path a user can find, e.g.
        ``"gear_train[2].lead_mm"`` or ``"GearStage.teeth_driven"``.
    value : object
        The value received.
    allowed : str
        What would be accepted, in words, e.g. ``"an integer >= 1"`` or
        ``"in (0, 1]"``.
    unit : str, optional
        The unit the value is in (``"mm"``, ``"uA"``); empty for counts and
        ratios.
    hint : str, optional
        One more sentence of advice.
    """

    def __init__(self, field: str, value: object, allowed: str, unit: str = "", hint: str = ""):
        self.field = field
        self.value = value
        self.allowed = allowed
        self.unit = unit
        self.hint = hint
        shown = f"{value!r} {unit}".rstrip() if unit else repr(value)
        message = f"{field} must be {allowed}, not {shown}"
        if unit and unit not in allowed:
            message += f" (values in {unit})"
        if hint:
            message += f". {hint}"
        super().__init__(message)


class DesignFileError(TurnkitError, ValueError):
    """A design file cannot be read: bad syntax, unknown key, wrong unit.

    Parameters
    ----------
    path : str
        The dotted path of the offending entry, e.g. ``"schedule.poll_period"``;
        empty for whole-file problems.
    message : str
        What is wrong and what is allowed.
    source : str, optional
        The file the entry came from.
    line : int, optional
        The line number in that file, when known.
    """

    def __init__(self, path: str, message: str, source: str = "", line: int | None = None):
        self.path = path
        self.source = source
        self.line = line
        where = source
        if line is not None:
            where = f"{where}:{line}" if where else f"line {line}"
        prefix = f"{where}: " if where else ""
        field = f"{path}: " if path else ""
        super().__init__(f"{prefix}{field}{message}")


class TurnkitWarning(UserWarning):
    """A design that works but deserves a second look (e.g. pinion undercut)."""
