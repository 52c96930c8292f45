"""Checks of the values of a radial-velocity table once read: ranges, one time system per
file (and per star), velocities that look like km/s, duplicated points.

Each check raises :class:`rvkep.errors.DataError` naming the file and the line, or
warns (:class:`rvkep.data.UnitWarning`); :mod:`rvkep.reading` runs them on every file.
"""

from __future__ import annotations

import warnings
from pathlib import Path

import numpy as np

from rvkep.errors import DataError

__all__ = [
    "DataWarning",
    "UnitWarning",
    "LayoutWarning",
    "check_ranges",
    "check_time_system",
    "warn_if_kms",
    "first_duplicate",
    "check_duplicates",
    "time_system",
]


class DataWarning(UserWarning):
    """Something about the input that the user should know (printed as one line)."""


class UnitWarning(DataWarning):
    """Velocities were read as m/s but look like km/s (or the reverse)."""


class LayoutWarning(DataWarning):
    """The header named no recognisable columns; they were read by position."""


#: The speed of light in m/s (exact, SI): no velocity or error can exceed it.
_C_MPS = 299_792_458.0


#: Times beyond this many days are no dates at all (full JDs are about 2.46e6).
_MAX_TIME = 1e8


#: Errors below this (m/s, i.e. 0.1 mm/s) are no measurement errors in either unit.
_MIN_PLAUSIBLE_ERR = 1e-4


def check_ranges(path: Path, line_numbers: np.ndarray, time, rv, err, scale: float) -> None:
    """Refuse values no spectrograph gives: speeds beyond light, times beyond dates.

    Parameters
    ----------
    path : Path
        The file, for the messages.
    line_numbers : ndarray
        Each row's line in the file.
    time, rv, err : ndarray
        The columns as read.
    scale : float
        What turns the velocities into m/s (1000 for km/s).
    """
    for label, values, limit, what in (
        ("time", time, _MAX_TIME, f"beyond {_MAX_TIME:g} days, not a date"),
        ("rv", rv * scale, _C_MPS, "faster than light (m/s)"),
        ("error", err * scale, _C_MPS, "larger than the speed of light (m/s)"),
    ):
        bad = np.abs(values) >= limit
        if np.any(bad):
            k = int(np.argmax(bad))
            raise DataError(f"{path}, line {line_numbers[k]}: {label} {values[k]:g} is {what}")


def check_time_system(path: Path, line_numbers: np.ndarray, time: np.ndarray) -> None:
    """All times of one file in one system (full JD, JD - 2400000 or MJD, a smaller
    offset): a mixture spans millions of days and no fit can make sense of it.

    Parameters
    ----------
    path : Path
        The file, for the messages.
    line_numbers : ndarray
        Each row's line in the file.
    time : ndarray
        The times.
    """
    classes = time_class(time)
    if classes.size and np.any(classes != classes[0]):
        common = np.bincount(classes).argmax()
        k = int(np.argmax(classes != common))
        raise DataError(
            f"{path}, line {line_numbers[k]}: time {float(time[k])!r} is in another time system "
            f"({_TIME_NAMES[classes[k]]}) than most of this file "
            f"({_TIME_NAMES[common]}); give all times in one system"
        )


def warn_if_kms(path: Path, rv: np.ndarray, err: np.ndarray) -> None:
    """Warn when errors are implausibly small (:class:`DataWarning`), or when velocities
    and errors look like km/s in a file read as m/s (:class:`UnitWarning`).

    Parameters
    ----------
    path : Path
        The file, for the message.
    rv, err : ndarray
        Velocities and errors as read.
    """
    med_err = float(np.median(err))
    spread = float(np.ptp(rv)) if rv.size else 0.0
    if med_err < _MIN_PLAUSIBLE_ERR:
        warnings.warn(
            f"{path}: errors implausibly small (median {med_err:g}); check the error column",
            DataWarning,
            stacklevel=3,
        )
    elif med_err < 0.05 and spread < 200.0:
        warnings.warn(
            f"{path}: velocities look like km/s (median error {med_err:g}, spread "
            f"{spread:g}); read as m/s. Pass kms=True (--kms) if they are km/s.",
            UnitWarning,
            stacklevel=3,
        )


def first_duplicate(time: np.ndarray, names: np.ndarray) -> tuple[int, int] | None:
    """Indices (i < j) of the first pair of rows with the same instrument and time.

    Parameters
    ----------
    time, names : ndarray
        Each row's time and instrument.

    Returns
    -------
    tuple of int or None
        The pair, or None when no row repeats another.
    """
    _, codes = np.unique(names, return_inverse=True)
    order = np.lexsort((time, codes))
    same = (time[order][1:] == time[order][:-1]) & (codes[order][1:] == codes[order][:-1])
    if not np.any(same):
        return None
    k = int(np.argmax(same))
    i, j = sorted((int(order[k]), int(order[k + 1])))
    return i, j


def check_duplicates(path: Path, line_numbers: np.ndarray, time, names) -> None:
    """Refuse a row that repeats another's instrument and time, naming both lines.

    Parameters
    ----------
    path : Path
        The file, for the messages.
    line_numbers : ndarray
        Each row's line in the file.
    time, names : ndarray
        Each row's time and instrument.
    """
    pair = first_duplicate(time, names)
    if pair is not None:
        first, second = pair
        raise DataError(
            f"{path}, line {line_numbers[second]}: duplicate of line {line_numbers[first]} "
            f"(same time {float(time[first])!r} and instrument {str(names[first])!r})"
        )


#: The time systems rvkep tells apart: the upper bounds (days, inclusive) of the first
#: two, and the name of each.
_TIME_BOUNDS = (30_000.0, 2_000_000.0)


_TIME_NAMES = (
    "JD - 2450000 or another offset (below 3e4)",
    "JD - 2400000 or MJD (about 5e4-6e4)",
    "full JD/BJD (about 2.4e6)",
)


def time_class(time) -> np.ndarray:
    """The index in :data:`_TIME_NAMES` of each time's system.

    Parameters
    ----------
    time : array_like
        Times.

    Returns
    -------
    ndarray
        One index per time.
    """
    return np.digitize(time, _TIME_BOUNDS, right=True)


def time_system(time: np.ndarray) -> str:
    """The name of the system the times' median lies in.

    Parameters
    ----------
    time : ndarray
        Times.

    Returns
    -------
    str
        For example ``"full JD/BJD (about 2.4e6)"``.
    """
    return _TIME_NAMES[int(time_class(np.median(time)))]
