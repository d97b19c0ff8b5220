"""Exception hierarchy of qwell.

Every error a user can cause derives from :class:`QwellError`; the command
line turns any of them into one line on stderr and exit status 2.  Errors
about input files carry the file, the line and the key so that the message
points at the exact place to fix.
"""

from __future__ import annotations

__all__ = [
    "one_line",
    "QwellError",
    "StackError",
    "LibraryError",
    "MaterialError",
    "UnitError",
    "ConvergenceError",
    "ParameterError",
    "QwellWarning",
    "ValidityWarning",
]


def one_line(text: str) -> str:
    """``text`` with line breaks and other control characters escaped (``\\n``), so that
    a file name or value can never split a one-line message."""
    if text.isprintable():
        return text
    return "".join(ch if ch.isprintable() else ch.encode("unicode_escape").decode("ascii")
                   for ch in text)


class QwellError(Exception):
    """Base class of every error qwell raises on purpose."""


class StackError(ValueError, QwellError):
    """A layer-stack file (or stack dictionary) is invalid.

    Parameters
    ----------
    message : str
        What is wrong and what is expected.
    file : str, optional
        Path of the stack file.
    line : int, optional
        1-based line number in the file (from the YAML marks).
    key : str, optional
        Dotted path of the offending key, e.g. ``layers[2].thickness``.
    """

    def __init__(self, message: str, *, file: str | None = None,
                 line: int | None = None, key: str | None = None):
        self.message = message
        self.file = file
        self.line = line
        self.key = key
        super().__init__(message)

    def __str__(self) -> str:
        where = ""
        if self.file:
            where = one_line(str(self.file))
            if self.line is not None:
                where += f":{self.line}"
            where += ": "
        elif self.line is not None:
            where = f"line {self.line}: "
        key = f"{self.key}: " if self.key else ""
        return f"{where}{key}{self.message}"


class LibraryError(StackError):
    """A material-library file is invalid (same ``FILE:LINE: KEY: message`` form).

    A library is an input file like a stack, so it shares the stack error's
    file/line/key fields and message layout.
    """


class MaterialError(ValueError, QwellError):
    """Unknown material name, bad composition, or missing parameter."""


class UnitError(ValueError, QwellError):
    """A quantity is missing its unit or has the wrong dimension."""


class ParameterError(ValueError, QwellError):
    """A design parameter path or range is invalid (sweeps, sizing)."""


class ConvergenceError(RuntimeError, QwellError):
    """A numerical procedure did not reach its tolerance.

    Attributes
    ----------
    tolerance_reached : float or None
        The best accuracy achieved, in the unit named by the message.
    history : list
        Optional iteration history for diagnosis.
    """

    def __init__(self, message: str, *, tolerance_reached: float | None = None,
                 history: list | None = None):
        self.tolerance_reached = tolerance_reached
        self.history = list(history or [])
        super().__init__(message)


class QwellWarning(UserWarning):
    """Base class of qwell's warnings."""


class ValidityWarning(QwellWarning):
    """A model is used outside the range where it is reliable."""
