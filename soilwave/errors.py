"""Exceptions and warnings raised by soilwave.

Every error soilwave raises on purpose derives from :class:`SoilwaveError`, so
callers can catch the package's own failures in one ``except`` clause. The
specific subclasses also derive from the matching built-in exception
(``ValueError``, ``FileExistsError`` ...) so generic handlers keep working.

Messages say what was wrong, the offending value, where it was found (file,
row, column) when that is known, and what was expected.
"""

from __future__ import annotations

__all__ = [
    "CalibrationError",
    "ConvergenceWarning",
    "FileFormatError",
    "InputError",
    "OutputExistsError",
    "PickTableError",
    "RangeWarning",
    "SoilwaveError",
    "SoilwaveWarning",
    "ValidRangeError",
    "location",
]


class SoilwaveError(Exception):
    """Base class of every error raised by soilwave."""


class InputError(SoilwaveError, ValueError):
    """An argument has the wrong value, shape, unit or type."""


class ValidRangeError(InputError):
    """A value lies outside the range where a model or relation is valid."""


class PickTableError(InputError):
    """A pick table (CSV or arrays) is malformed or physically inconsistent."""


class FileFormatError(SoilwaveError, ValueError):
    """A file is corrupt, truncated or inconsistent with its declared layout."""


class CalibrationError(SoilwaveError, ValueError):
    """A site calibration could not be fitted from the given pairs."""


class OutputExistsError(SoilwaveError, FileExistsError):
    """An output file exists and overwriting was not requested."""


class SoilwaveWarning(UserWarning):
    """Base class of every warning issued by soilwave."""


class RangeWarning(SoilwaveWarning):
    """A value lies outside a model's calibrated range; the result is an extrapolation."""


class ConvergenceWarning(SoilwaveWarning):
    """A sampler or optimiser did not meet its convergence criteria."""


def location(path=None, row=None, column=None) -> str:
    """Format where a problem was found, for error messages.

    Parameters
    ----------
    path : str or path-like, optional
        File name.
    row : int, optional
        1-based data row (header excluded) or line number.
    column : str, optional
        Column name.

    Returns
    -------
    str
        For example ``"picks.csv, row 4, column 'time_ns'"``; empty when nothing is known.

    Examples
    --------
    >>> location("picks.csv", 4, "time_ns")
    "picks.csv, row 4, column 'time_ns'"
    """
    parts = []
    if path is not None:
        parts.append(str(path))
    if row is not None:
        parts.append(f"row {row}")
    if column is not None:
        parts.append(f"column {column!r}")
    return ", ".join(parts)
