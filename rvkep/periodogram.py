"""Generalized Lomb-Scargle periodograms, false-alarm levels, window function, aliases.

The periodogram is astropy's :class:`~astropy.timeseries.LombScargle`: the generalized,
error-weighted form with a floating mean (Zechmeister & Kuerster 2009), "standard"
normalization (power in [0, 1], the fraction of chi-square explained by a sinusoid).
False-alarm probabilities follow Baluev (2008), as astropy computes them over the
searched frequency range; they are upper bounds, slightly conservative.

Several instruments: each instrument's error-weighted mean is subtracted before the
periodogram, so zero points do not leak in as a long-period signal. This is exact for
the mean of each instrument and leaves only a second-order coupling between an offset
and a sinusoid that happens to be unevenly sampled by one instrument; the best-fit
stage then fits all offsets jointly with the Keplerians, and the iterative search works
on the residuals of that joint fit (offsets included), so the coupling never
accumulates. Joint offset fitting inside the periodogram would need one linear solve
per instrument per frequency for little gain.

The frequency grid runs from 1 / max_period to 1 / min_period with spacing
1 / (oversampling x baseline).

References
----------
.. [1] Zechmeister, M. & Kuerster, M. (2009), A&A 496, 577.
.. [2] Baluev, R. V. (2008), MNRAS 385, 1279.
.. [3] Deeming, T. J. (1975), Ap&SS 36, 137 (the spectral window).
.. [4] Dawson, R. I. & Fabrycky, D. C. (2010), ApJ 722, 937 (aliases in RV data).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from rvkep.defaults import DEFAULT_MIN_PERIOD  # shortest period searched by default

__all__ = [
    "Periodogram",
    "AliasCandidate",
    "frequency_grid",
    "periodogram",
    "spectral_window",
    "alias_candidates",
    "centre_by_instrument",
    "power_many",
    "PowerBasis",
    "FAP_LEVELS",
    "SIDEREAL_DAY_FREQ",
    "YEAR_FREQ",
    "DEFAULT_MIN_PERIOD",
]

#: False-alarm probabilities whose power levels are reported.
FAP_LEVELS = (0.1, 0.01, 0.001)
#: One cycle per sidereal day (1.0027379 c/d) and per year (common practice, no source).
SIDEREAL_DAY_FREQ = 1.0027379
YEAR_FREQ = 1.0 / 365.25


def frequency_grid(
    t: np.ndarray,
    min_period: float | None = None,
    max_period: float | None = None,
    oversampling: float = 10.0,
) -> np.ndarray:
    """Frequencies (cycles per day) from 1/max_period to 1/min_period.

    Defaults: ``min_period`` = 1.2 d, ``max_period`` = the baseline; spacing
    1 / (oversampling x baseline) so each peak is sampled about ``oversampling`` times.

    Parameters
    ----------
    t : ndarray
        The times (days).
    min_period, max_period : float, optional
        The range (days).
    oversampling : float
        Grid points per 1 / baseline.

    Returns
    -------
    ndarray
        Increasing frequencies, cycles per day.
    """
    t = np.asarray(t, float)
    baseline = float(t.max() - t.min())
    if not baseline > 0:
        raise ValueError("the times span no interval")
    min_period = DEFAULT_MIN_PERIOD if min_period is None else float(min_period)
    max_period = baseline if max_period is None else float(max_period)
    if not 0 < min_period < max_period:
        raise ValueError(
            f"need 0 < min_period < max_period, got {min_period:g} and {max_period:g} d"
        )
    df = 1.0 / (oversampling * baseline)
    f_lo, f_hi = 1.0 / max_period, 1.0 / min_period
    n = int(np.ceil((f_hi - f_lo) / df)) + 1
    if n > 5_000_000:
        raise ValueError(f"frequency grid of {n:,} points: raise min_period or lower oversampling")
    return np.linspace(f_lo, f_hi, max(n, 2))


def centre_by_instrument(y: np.ndarray, dy: np.ndarray, instrument: np.ndarray) -> np.ndarray:
    """y minus each instrument's error-weighted mean.

    Parameters
    ----------
    y, dy : ndarray
        Values and their errors.
    instrument : ndarray
        Each point's instrument.

    Returns
    -------
    ndarray
        A new array.
    """
    out = np.asarray(y, float).copy()
    w = 1.0 / np.asarray(dy, float) ** 2
    for name in np.unique(instrument):
        m = instrument == name
        out[m] -= np.sum(w[m] * out[m]) / np.sum(w[m])
    return out


@dataclass
class Periodogram:
    """A periodogram on a frequency grid, with Baluev false-alarm levels."""

    frequency: np.ndarray
    power: np.ndarray
    t: np.ndarray
    y: np.ndarray
    dy: np.ndarray | None
    label: str = "velocities"
    fap_levels: dict[float, float] = field(default_factory=dict)

    @property
    def period(self) -> np.ndarray:
        return 1.0 / self.frequency

    def _ls(self):
        from astropy.timeseries import LombScargle

        return LombScargle(self.t, self.y, self.dy, fit_mean=True, center_data=True)

    def fap(self, power) -> np.ndarray:
        """Baluev (2008) false-alarm probability of ``power`` over this grid's range."""
        return self._ls().false_alarm_probability(
            power,
            method="baluev",
            minimum_frequency=self.frequency[0],
            maximum_frequency=self.frequency[-1],
        )

    def level(self, fap: float) -> float:
        """The power whose Baluev (2008) false-alarm probability over this grid's range
        is ``fap``."""
        f = self.frequency
        level = self._ls().false_alarm_level(fap, method="baluev", minimum_frequency=f[0],
                                             maximum_frequency=f[-1])  # fmt: skip
        return float(level)

    def peaks(self, n: int = 5, min_separation: float = 0.0) -> list[tuple[float, float]]:
        """The ``n`` highest local maxima as (period, power), highest first.

        Peaks closer than ``min_separation`` (in frequency; default one peak width,
        1 / baseline) to a higher one are skipped.
        """
        p = self.power
        if p.size < 3:
            return []
        local = np.flatnonzero((p[1:-1] >= p[:-2]) & (p[1:-1] >= p[2:])) + 1
        order = local[np.argsort(p[local])[::-1]]
        sep = min_separation or 1.0 / float(self.t.max() - self.t.min())
        chosen: list[int] = []
        for i in order:
            if all(abs(self.frequency[i] - self.frequency[j]) > sep for j in chosen):
                chosen.append(int(i))
            if len(chosen) >= n:
                break
        return [(float(1.0 / self.frequency[i]), float(p[i])) for i in chosen]

    def best(self) -> tuple[float, float, float]:
        """(period, power, fap) of the highest peak."""
        i = int(np.argmax(self.power))
        return float(self.period[i]), float(self.power[i]), float(self.fap(self.power[i]))

    def power_at(self, period: float) -> float:
        """Power interpolated at ``period``."""
        return float(np.interp(1.0 / period, self.frequency, self.power))


def periodogram(
    t: np.ndarray,
    y: np.ndarray,
    dy: np.ndarray | None = None,
    instrument: np.ndarray | None = None,
    frequency: np.ndarray | None = None,
    min_period: float | None = None,
    max_period: float | None = None,
    oversampling: float = 10.0,
    label: str = "velocities",
) -> Periodogram:
    """Generalized Lomb-Scargle periodogram (astropy), instruments centred first.

    Parameters
    ----------
    t, y, dy : arrays
        Times (days), values and their errors (None: unweighted).
    instrument : array of str, optional
        Each point's instrument; each one's weighted mean is subtracted first.
    frequency : array, optional
        The grid (c/d); default from :func:`frequency_grid`.
    min_period, max_period, oversampling : float, optional
        The default grid's range (days) and oversampling.
    label : str
        What the periodogram is of (figures and reports).

    Returns
    -------
    Periodogram
        The power on the grid with the Baluev false-alarm levels.
    """
    from astropy.timeseries import LombScargle

    t = np.asarray(t, float)
    y = np.asarray(y, float)
    weights_dy = dy if dy is not None else np.ones_like(y)
    if instrument is not None:
        y = centre_by_instrument(y, weights_dy, np.asarray(instrument))
    if frequency is None:
        frequency = frequency_grid(t, min_period, max_period, oversampling)
    t0 = t - np.round(np.mean(t))  # keep phases precise for BJD-sized times
    ls = LombScargle(t0, y, dy, fit_mean=True, center_data=True)
    power = ls.power(frequency, method="fast" if frequency.size > 200_000 else "auto")
    pg = Periodogram(frequency, np.asarray(power, float), t0, y, dy, label)
    levels = ls.false_alarm_level(
        FAP_LEVELS,
        method="baluev",
        minimum_frequency=frequency[0],
        maximum_frequency=frequency[-1],
    )
    pg.fap_levels = {f: float(v) for f, v in zip(FAP_LEVELS, np.atleast_1d(levels), strict=True)}
    return pg


def spectral_window(t: np.ndarray, frequency: np.ndarray, chunk: int | None = None) -> np.ndarray:
    """Spectral window |sum exp(2 pi i f t)|^2 / N^2 of the sampling (Deeming 1975).

    Equals 1 at f = 0; peaks at the sidereal day and the year reveal where aliases of
    any signal will appear.

    Parameters
    ----------
    t : ndarray
        The times (days).
    frequency : ndarray
        Cycles per day.
    chunk : int, optional
        Frequencies per block (bounds the memory).

    Returns
    -------
    ndarray
        The window's power at each frequency.
    """
    t = np.asarray(t, float)
    t = t - np.round(np.mean(t))
    frequency = np.asarray(frequency, float)
    out = np.empty(frequency.size)
    if chunk is None:  # about 2 million phases (16 MB) at a time, whatever the sizes
        chunk = max(1, 2_000_000 // max(t.size, 1))
    for i in range(0, frequency.size, chunk):
        ph = 2.0 * np.pi * np.outer(frequency[i : i + chunk], t)
        out[i : i + chunk] = (np.cos(ph).sum(1) ** 2 + np.sin(ph).sum(1) ** 2) / t.size**2
    return out


@dataclass(frozen=True)
class AliasCandidate:
    """A possible alias of a peak: where it would fall, and whether it is plausible."""

    kind: str  # "day-", "day+", "year-", "year+"
    period: float
    window_power: float  # spectral window at the offset frequency
    power: float  # periodogram power at the alias
    flagged: bool


def _window_peak(t: np.ndarray, nominal: float, half_width: float) -> tuple[float, float]:
    """Frequency and height of the spectral window's highest point near ``nominal``.

    Observing at a fixed clock time puts the daily peak at 1 c/d, observing at a fixed
    hour angle at 1 sidereal day; the sampling decides, so look for the actual peak.
    """
    baseline = float(np.ptp(t))
    df = 1.0 / (10.0 * baseline)
    f = np.arange(max(nominal - half_width, df), nominal + half_width + df, df)
    w = spectral_window(t, f)
    i = int(np.argmax(w))
    return float(f[i]), float(w[i])


def alias_candidates(
    pg: Periodogram,
    period: float,
    t: np.ndarray,
    window_threshold: float = 0.2,
    power_fraction: float = 0.5,
) -> list[AliasCandidate]:
    """Aliases of a peak at ``period``: f +- one day and f +- one year.

    The day and year offsets are the spectral window's actual peaks near 1 c/d (solar
    or sidereal, 0.98-1.02 c/d) and near 1/yr (1/420 to 1/320 c/d). A candidate is
    *flagged* when the window's peak there is high (>= ``window_threshold``) and the
    periodogram at the alias reaches at least ``power_fraction`` of the peak's power:
    then the other peak could be the true signal and the chosen one its alias (Dawson &
    Fabrycky 2010).

    Parameters
    ----------
    pg : Periodogram
        The periodogram the peak is in.
    period : float
        The peak's period (days).
    t : ndarray
        The times (their window).
    window_threshold, power_fraction : float
        The flagging rule's two levels.

    Returns
    -------
    list of AliasCandidate
        The aliases in the periodogram's range.
    """
    f0 = 1.0 / period
    p0 = pg.power_at(period)
    width = 1.0 / float(pg.t.max() - pg.t.min())
    day_f, day_w = _window_peak(t, SIDEREAL_DAY_FREQ, 0.02)
    year_f, year_w = _window_peak(t, YEAR_FREQ, 0.5 * (1 / 320 - 1 / 420))
    out = []
    for kind, df, w in (
        ("day-", -day_f, day_w),
        ("day+", day_f, day_w),
        ("year-", -year_f, year_w),
        ("year+", year_f, year_w),
    ):
        f = abs(f0 + df)
        if f < 0.5 * width:
            continue
        inside = pg.frequency[0] <= f <= pg.frequency[-1]
        near = (pg.frequency >= f - width) & (pg.frequency <= f + width)
        pw = float(pg.power[near].max()) if inside and near.any() else float("nan")
        flagged = bool(inside and w >= window_threshold and pw >= power_fraction * p0)
        out.append(AliasCandidate(kind, 1.0 / f, w, pw, flagged))
    return out


class PowerBasis:
    """The data-free part of :func:`periodogram` for fixed times, errors and
    instruments: per frequency the cosines and sines at the times and the weighted
    sums C, S, CC, SS, CS (Zechmeister & Kuerster 2009 eqs. 5-13), computed once;
    :meth:`power` then costs two matrix products per batch of series. The matrices are
    kept when they fit in ``max_bytes``, else recomputed chunk by chunk per call."""

    def __init__(self, t, dy, instrument, frequency, chunk: int = 4096,
                 max_bytes: float = 256e6):  # fmt: skip
        self.t0 = np.asarray(t, float) - np.round(np.mean(t))
        self.dy = np.asarray(dy, float)
        self.instrument = None if instrument is None else np.asarray(instrument)
        self.frequency = np.asarray(frequency, float)
        w = 1.0 / self.dy**2
        self.w = w / w.sum()
        self.chunk = chunk
        keep = 2 * 8 * self.t0.size * self.frequency.size <= max_bytes
        self._chunks = [self._chunk(lo) for lo in self._starts()] if keep else None

    def _starts(self):
        return range(0, self.frequency.size, self.chunk)

    def _chunk(self, lo):
        f = self.frequency[lo : lo + self.chunk]
        arg = 2 * np.pi * self.t0[:, None] * f[None, :]
        cos, sin = np.cos(arg), np.sin(arg)
        w = self.w
        C, S = w @ cos, w @ sin
        CC = w @ (cos * cos) - C * C
        SS = w @ (sin * sin) - S * S
        CS = w @ (cos * sin) - C * S
        return cos, sin, CC, SS, CS, CC * SS - CS * CS

    def power(self, y) -> np.ndarray:
        """Powers (B, F) of the series ``y`` (B, N)."""
        y = np.atleast_2d(np.asarray(y, float))
        if self.instrument is not None:
            y = np.stack([centre_by_instrument(row, self.dy, self.instrument) for row in y])
        Y = y @ self.w
        yc = y - Y[:, None]
        YY = (yc**2) @ self.w
        wy = yc * self.w[None, :]
        out = np.empty((y.shape[0], self.frequency.size))
        for k, lo in enumerate(self._starts()):
            cos, sin, CC, SS, CS, D = self._chunks[k] if self._chunks else self._chunk(lo)
            YC = wy @ cos
            YS = wy @ sin
            num = SS * YC**2 + CC * YS**2 - 2 * CS * YC * YS
            out[:, lo : lo + self.chunk] = num / (YY[:, None] * D)
        return out


def power_many(
    t: np.ndarray,
    y: np.ndarray,
    dy: np.ndarray,
    instrument: np.ndarray | None,
    frequency: np.ndarray,
    chunk: int = 4096,
) -> np.ndarray:
    """The periodogram of :func:`periodogram` (instruments centred, generalized
    Lomb-Scargle with a floating mean, "standard" normalization) for many series on the
    same times and errors at once. For many calls on the same times, build a
    :class:`PowerBasis` once.

    Parameters
    ----------
    t, dy : ndarray
        The times (days) and errors, (N,).
    y : ndarray
        The series, (B, N).
    instrument : ndarray or None
        Each point's instrument.
    frequency : ndarray
        Cycles per day, (F,).
    chunk : int
        Frequencies per block.

    Returns
    -------
    ndarray
        The power, (B, F).
    """
    return PowerBasis(t, dy, instrument, frequency, chunk).power(y)
