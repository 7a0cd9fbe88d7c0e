"""
Exceptions and warnings of thermorc.

Bad input raises :class:`InputError`, a :class:`ValueError` that knows where the problem is
(file, row, column), so the command line can print one line and exit with code 2. Problems
that can be recovered from are warnings in the :class:`ThermorcWarning` family, which users can
filter as a group and which results repeat in their ``warnings`` list.

Row numbers are the line numbers a user sees in a text editor: the header is row 1, the
first data row is row 2.
"""

from __future__ import annotations

import os

__all__ = [
    "ThermorcError",
    "InputError",
    "NetworkError",
    "ThermorcWarning",
    "DataQualityWarning",
    "LumpValidityWarning",
    "FitQualityWarning",
    "IdentifiabilityWarning",
    "ConvergenceWarning",
    "SafetyWarning",
    "PrecisionWarning",
]


class ThermorcError(Exception):
    """Base class of thermorc's own exceptions."""


class InputError(ThermorcError, ValueError):
    """
    Bad input, with where it was found.

    Parameters
    ----------
    message : str
        What is wrong, and what was expected.
    path : str or os.PathLike, optional
        The file the problem is in.
    row : int, optional
        Line number in that file (header = 1).
    column : str, optional
        Column, key or field name.
    """

    def __init__(self, message, path=None, row=None, column=None):
        self.message = str(message)
        self.path = None if path is None else os.fspath(path)
        self.row = None if row is None else int(row)
        self.column = None if column is None else str(column)
        super().__init__(self.__str__())

    def __str__(self):
        where = []
        if self.path is not None:
            where.append(os.path.basename(self.path) or self.path)
        if self.row is not None:
            where.append(f"row {self.row}")
        if self.column is not None:
            where.append(f"column '{self.column}'")
        text = " ".join(self.message.split())  # one line, always
        return f"{', '.join(where)}: {text}" if where else text

    def located(self, path=None, row=None, column=None):
        """Return a copy with missing location fields filled in."""
        return type(self)(
            self.message,
            path=self.path if self.path is not None else path,
            row=self.row if self.row is not None else row,
            column=self.column if self.column is not None else column,
        )


class NetworkError(InputError):
    """An RC network that is not physical (bad R or C, a node with no path to a boundary)."""


class ThermorcWarning(UserWarning):
    """Base class of thermorc's warnings."""


class DataQualityWarning(ThermorcWarning):
    """Something in the data was repaired, dropped or looks suspicious."""


class LumpValidityWarning(ThermorcWarning):
    """A construction element is too thick or too insulating to lump into one node."""


class FitQualityWarning(ThermorcWarning):
    """A calibration misses the stated accuracy criteria."""


class IdentifiabilityWarning(ThermorcWarning):
    """The data cannot pin down a parameter (strong correlation, wide interval, bound hit)."""


class ConvergenceWarning(ThermorcWarning):
    """The optimiser stopped without meeting its convergence test."""


class PrecisionWarning(ThermorcWarning):
    """A computation lost digits (a very stiff network, a near-singular matrix)."""


class SafetyWarning(ThermorcWarning):
    """An outcome that can hurt people or property (cold rooms, freezing pipes, undersizing)."""
