"""Exceptions raised by orbweigh.

Every user-facing mistake raises an ``OrbweighError`` subclass; the command line turns
those into a one-paragraph message and exit status 2 instead of a traceback.
"""
from __future__ import annotations

__all__ = ["OrbweighError", "LogFormatError", "InputError", "FitError", "OutputError"]


class OrbweighError(Exception):
    """Base class of every error orbweigh raises on purpose."""


class InputError(OrbweighError, ValueError):
    """A command-line value or file the user gave cannot be used."""


class LogFormatError(OrbweighError, ValueError):
    """A measurement or velocity log cannot be read.

    Attributes
    ----------
    path : str
        The file.
    line : int or None
        1-based line number in the file, when one line is at fault.
    column : str or None
        Column name, when one column is at fault.
    reason : str
        What was wrong and how to fix it.
    """

    def __init__(self, path, reason, line=None, column=None):
        self.path, self.reason, self.line, self.column = str(path), reason, line, column
        where = self.path
        if line is not None:
            where += f", line {line}"
        if column is not None:
            where += f", column '{column}'"
        super().__init__(f"{where}: {reason}")


class FitError(OrbweighError, RuntimeError):
    """The data cannot support an orbit solution (too few points, degenerate input)."""


class OutputError(OrbweighError, OSError):
    """An output file cannot be written (refused target, full disk, no permission).

    The message names the target file, never the temporary file written first.
    """

    def __init__(self, path, reason):
        self.path, self.reason = str(path), reason
        super().__init__(f"{self.path}: {reason}")

    def __str__(self):
        return f"{self.path}: {self.reason}"
