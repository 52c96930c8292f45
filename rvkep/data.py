"""Radial-velocity time series: the container (:class:`RVData`), the table layouts rvkep
reads (:mod:`rvkep.reading`), the limits on a star's data, and the checks
(:mod:`rvkep.data_checks`).

Accepted layouts (one or many files, each a text table):

* whitespace-, tab- or comma-separated; comment lines starting with ``#``, ``!`` or
  ``%`` (and ``#`` comments at the end of a row); Windows line endings; a UTF-8
  byte-order mark;
* with a header row naming the columns (also a commented header such as
  ``# bjd rv e_rv``), or without one: then 3 or more columns read as time, rv, err and,
  when the 4th is not numeric, the instrument; further numeric columns become extras;
* time, rv, err and instrument columns recognised by the names the trade uses (see
  :data:`COLUMN_NAMES`); any other numeric column is kept by name (activity indicators
  such as ``fwhm``, ``bis`` or ``rhk``);
* the instrument from its column when there is one, otherwise from the file's stem
  (``north.txt`` -> ``north``);
* velocities in m/s, or in km/s with ``kms=True`` (or a header that says ``km/s``);
  a warning (:class:`UnitWarning`) when m/s was assumed but the values look like km/s;
* times as full BJD or with an offset subtracted; they stay in the file's system (all
  files of one star must share it). The object records the reference epoch (the middle
  of the time span, a whole day) that the model subtracts before any phase arithmetic.

Every problem raises :class:`rvkep.errors.DataError` whose message names the file, the
line where a row is at fault, and the problem. Parsing runs in numpy's C reader; the
per-line Python scan only runs to locate an error.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from rvkep.data_checks import (
    DataWarning,
    LayoutWarning,
    UnitWarning,
)
from rvkep.errors import DataError

__all__ = [
    "RVData",
    "DataSummary",
    "UnitWarning",
    "DataWarning",
    "LayoutWarning",
    "COLUMN_NAMES",
    "MIN_POINTS",
    "MIN_SPAN_DAYS",
    "MAX_POINTS",
    "check_size",
]

#: Header names (lower case, with ``-``, ``.`` and spaces turned into ``_`` and any unit
#: in brackets removed) that identify each column.
COLUMN_NAMES: dict[str, tuple[str, ...]] = {
    "time": (
        "time", "t", "bjd", "jd", "mjd", "hjd", "rjd", "bjd_tdb", "bjd_utc", "hjd_utc",
        "date", "epoch", "jdb", "bjdtdb", "bjd_2450000", "bjd_2400000", "jd_2450000",
        "jd_2400000", "mjd_tdb", "btjd", "time_bjd", "obs_time",
    ),
    "rv": (
        "rv", "vrad", "v_rad", "velocity", "radial_velocity", "radvel", "vr", "v", "rv_mps",
        "rv_kms", "vel", "mnvel", "rv_m_s", "rv_km_s",
    ),
    "err": (
        "err", "error", "sigma", "e_rv", "rv_err", "err_rv", "erv", "sig", "svrad", "s_rv",
        "sigma_rv", "rv_sigma", "uncertainty", "unc", "e_vrad", "vrad_err", "errvel", "e_v",
        "sigma_v", "rv_error", "error_rv", "evrad", "e_velocity", "velocity_err",
    ),
    "instrument": (
        "instrument", "inst", "tel", "telescope", "spectrograph", "instr", "site", "source",
    ),
}  # fmt: skip

#: The shortest time span (days) accepted for one star: data from a single night
#: cannot separate an orbit from a drift.
MIN_SPAN_DAYS = 1.0

#: The most points the search, fit and sampler take for one star. Typical RV sets
#: hold 10 to 5,000 points; beyond this the sampler alone would run for hours, so larger
#: sets are refused with a pointer to binning (``--bin DAYS``, :meth:`RVData.binned`).
MAX_POINTS = 20_000

#: The fewest points rvkep accepts for one star (a one-companion fit has seven
#: parameters with one instrument).
MIN_POINTS = 8


@dataclass(frozen=True)
class DataSummary:
    """Per-instrument description of an RV data set.

    Attributes are parallel lists, one entry per instrument, plus the totals.
    """

    instruments: list[str]
    n_points: list[int]
    span_days: list[float]
    median_err: list[float]
    rms: list[float]
    total_points: int
    total_span_days: float

    def rows(self) -> list[tuple[str, int, float, float, float]]:
        return list(
            zip(
                self.instruments,
                self.n_points,
                self.span_days,
                self.median_err,
                self.rms,
                strict=True,
            )
        )

    def __str__(self) -> str:
        lines = [
            f"{'instrument':<16} {'points':>7} {'span [d]':>10} {'median err [m/s]':>17}"
            f" {'rms [m/s]':>10}"
        ]
        for name, n, span, med, rms in self.rows():
            lines.append(f"{name:<16} {n:>7d} {span:>10.1f} {med:>17.2f} {rms:>10.2f}")
        lines.append(f"{'total':<16} {self.total_points:>7d} {self.total_span_days:>10.1f}")
        return "\n".join(lines)

    __repr__ = __str__

    def _repr_markdown_(self) -> str:
        out = [
            "| instrument | points | span [d] | median err [m/s] | rms [m/s] |",
            "|---|---|---|---|---|",
        ]
        for name, n, span, med, rms in self.rows():
            out.append(f"| {name} | {n} | {span:.1f} | {med:.2f} | {rms:.2f} |")
        out.append(f"| total | {self.total_points} | {self.total_span_days:.1f} | | |")
        return "\n".join(out)

    def to_pandas(self):
        """The summary as a pandas DataFrame indexed by instrument."""
        try:
            import pandas as pd
        except ImportError as exc:  # pragma: no cover - pandas is in the test extra
            raise ImportError("to_pandas needs pandas: pip install pandas") from exc
        return pd.DataFrame(
            {
                "points": self.n_points,
                "span_days": self.span_days,
                "median_err_mps": self.median_err,
                "rms_mps": self.rms,
            },
            index=pd.Index(self.instruments, name="instrument"),
        )


@dataclass
class RVData:
    """Radial velocities of one star, from one or several instruments, sorted by time.

    Attributes
    ----------
    time : ndarray
        Times in the system of the input files (e.g. BJD, or BJD - 2450000), days.
    rv, err : ndarray
        Velocities and their 1-sigma errors, m/s.
    instrument : ndarray of str
        Instrument name of each point.
    extra : dict of str -> ndarray
        Further numeric columns by name (NaN where a file lacks the column).
    files : list of str
        The files read.
    epoch : float
        Reference epoch subtracted by the model before phase arithmetic (a whole day
        near the middle of the time span).
    """

    time: np.ndarray
    rv: np.ndarray
    err: np.ndarray
    instrument: np.ndarray
    extra: dict[str, np.ndarray] = field(default_factory=dict)
    files: list[str] = field(default_factory=list)
    epoch: float = 0.0

    def __post_init__(self) -> None:
        order = np.argsort(self.time, kind="stable")
        self.time = np.asarray(self.time, float)[order]
        self.rv = np.asarray(self.rv, float)[order]
        self.err = np.asarray(self.err, float)[order]
        self.instrument = np.asarray(self.instrument, dtype=str)[order]
        self.extra = {k: np.asarray(v, float)[order] for k, v in self.extra.items()}
        if self.epoch == 0.0 and self.time.size:
            self.epoch = float(np.round(0.5 * (self.time[0] + self.time[-1])))

    @property
    def instruments(self) -> list[str]:
        """Instrument names, in order of their first point in time."""
        names, first = np.unique(self.instrument, return_index=True)
        return [str(n) for n in names[np.argsort(first)]]

    @property
    def instrument_index(self) -> np.ndarray:
        """Index of each point's instrument in :attr:`instruments`."""
        lookup = {name: i for i, name in enumerate(self.instruments)}
        return np.array([lookup[n] for n in self.instrument], dtype=np.intp)

    @property
    def t_rel(self) -> np.ndarray:
        """Times minus :attr:`epoch` (days)."""
        return self.time - self.epoch

    def __len__(self) -> int:
        return int(self.time.size)

    def select(self, mask: np.ndarray) -> RVData:
        """A copy holding only the points where ``mask`` is true (same epoch)."""
        return RVData(
            self.time[mask],
            self.rv[mask],
            self.err[mask],
            self.instrument[mask],
            {k: v[mask] for k, v in self.extra.items()},
            list(self.files),
            self.epoch,
        )

    def binned(self, days: float) -> RVData:
        """Each instrument's points averaged in time bins ``days`` wide.

        Bins start at the first whole day of the time system (for BJD: noon UT, so a
        1-day bin holds one night in Europe, Africa and the Americas). Within a bin the
        time, velocity and extra columns are means weighted by 1/err^2 (extras over
        their finite values) and the error is that of the weighted mean, 1/sqrt(sum
        1/err^2); jitter is left to the model, which fits it on the binned points.
        Instruments are never mixed. A copy is returned; ``self`` is not changed.
        """
        if not (np.isfinite(days) and days > 0):
            raise ValueError(f"bin width must be a positive number of days, got {days!r}")
        start = float(np.floor(self.time.min()))
        b = np.floor((self.time - start) / days).astype(np.int64)
        codes = self.instrument_index.astype(np.int64)
        per_instrument = int(b.max()) + 1  # bins per instrument in the combined key
        keys = codes * per_instrument + b
        uniq, inv = np.unique(keys, return_inverse=True)
        w = 1.0 / self.err**2
        sw = np.bincount(inv, w)
        time = start + np.bincount(inv, w * (self.time - start)) / sw
        rv = np.bincount(inv, w * self.rv) / sw
        names = np.asarray(self.instruments)[uniq // per_instrument]
        extra = {}
        for k, v in self.extra.items():
            ok = np.isfinite(v)
            wk = np.bincount(inv, np.where(ok, w, 0.0))
            with np.errstate(invalid="ignore", divide="ignore"):
                extra[k] = np.bincount(inv, np.where(ok, w * v, 0.0)) / wk
        return RVData(time, rv, 1.0 / np.sqrt(sw), names, extra, list(self.files))

    def summary(self) -> DataSummary:
        """Per instrument: points, time span, median error and RMS of the velocities."""
        names = self.instruments
        n, span, med, rms = [], [], [], []
        for name in names:
            m = self.instrument == name
            t, v = self.time[m], self.rv[m]
            n.append(int(m.sum()))
            span.append(float(t.max() - t.min()))
            med.append(float(np.median(self.err[m])))
            rms.append(float(np.std(v)))
        return DataSummary(names, n, span, med, rms, len(self), float(self.time[-1] - self.time[0]))

    def __repr__(self) -> str:
        return f"RVData({len(self)} points, epoch {self.epoch:.1f})\n{self.summary()}"

    def _repr_markdown_(self) -> str:
        s = self.summary()._repr_markdown_()
        return f"**RVData**: {len(self)} points, reference epoch {self.epoch:.1f}\n\n{s}"

    def to_pandas(self):
        """All points as a pandas DataFrame."""
        import pandas as pd

        cols = {"time": self.time, "rv": self.rv, "err": self.err, "instrument": self.instrument}
        cols.update(self.extra)
        return pd.DataFrame(cols)


# ---------------------------------------------------------------------------
# reading one file
# ---------------------------------------------------------------------------


# ---------------------------------------------------------------------------
# several files
# ---------------------------------------------------------------------------


def check_size(data: RVData, max_points: int = MAX_POINTS) -> None:
    """Refuse a data set larger than the analysis takes, saying what to do instead.

    Parameters
    ----------
    data : RVData
        The velocities.
    max_points : int, optional
        The largest number of points accepted.

    Raises
    ------
    DataError
        When ``data`` has more points.
    """
    if len(data) > max_points:
        raise DataError(
            f"{', '.join(data.files)}: {len(data):,} points, more than the {max_points:,} "
            "rvkep fits directly; average them in time bins first with --bin DAYS (e.g. "
            "--bin 1: one point per instrument and day)"
        )
