"""Default priors and ranges: the one place that builds them.

Every path that needs a default (the search, the best fit, a model file that leaves a
prior out, the sampler) asks this module, so one companion gets one prior whichever
way it was found.

=================  ==========================================================
parameter          default prior
=================  ==========================================================
period P           log-uniform over the search range (1.2 d to the time span,
                   or what the user gave), widened to [0.8 P, 1.25 P] when
                   the start period lies near or beyond an end, and to 10
                   spans when the start period exceeds half the span
tc                 uniform over one period centred on the start (one phase mode)
e                  uniform on [0, 0.99]
K                  uniform on [0, max(2 x peak-to-peak of the velocities with
                   each instrument's zero point removed, 2 x start K, 1)] m/s
jitter             uniform on [0, max(10, 3 x the instrument's RMS)] m/s
=================  ==========================================================
"""

from __future__ import annotations

import numpy as np

from rvkep.data import RVData
from rvkep.options import DEFAULT_MIN_PERIOD, TREND_DEGREES, parse_trend
from rvkep.priors import Fixed, LogUniform, Prior, Uniform

__all__ = [
    "DEFAULT_MIN_PERIOD",
    "DEFAULT_MAX_ECC",
    "default_period_range",
    "period_prior",
    "tc_prior",
    "ecc_prior",
    "K_prior",
    "jitter_prior",
    "start_jitter",
    "centred_velocities",
    "TREND_DEGREES",
    "parse_trend",
]

def baseline(data: RVData) -> float:
    """Time span of the data (days).

    Parameters
    ----------
    data : RVData
        The velocities.

    Returns
    -------
    float
        Last time minus first, days.
    """
    return float(data.time.max() - data.time.min())


def default_period_range(
    data: RVData, min_period: float | None = None, max_period: float | None = None
) -> tuple[float, float]:
    """The search range: ``min_period`` (default :data:`DEFAULT_MIN_PERIOD`, 1.2 d) to
    ``max_period`` (default the time span).

    Parameters
    ----------
    data : RVData
        The velocities.
    min_period, max_period : float, optional
        The range's ends in days, when given.

    Returns
    -------
    tuple of float
        (shortest, longest) period, days.
    """
    lo = DEFAULT_MIN_PERIOD if min_period is None else float(min_period)
    hi = baseline(data) if max_period is None else float(max_period)
    return lo, hi


#: a companion whose start period exceeds half the span may not have closed its orbit:
#: its period prior reaches this many spans (rvkep's rule: beyond it the orbit's arc
#: is a trend, which the trend degrees describe)
LONG_PERIOD_SPANS = 10.0


def period_prior(
    data: RVData, period: float, period_range: tuple[float, float] | None = None
) -> LogUniform:
    """Log-uniform over the search range, widened to hold [0.8 P, 1.25 P]; for a start
    period beyond half the span, up to LONG_PERIOD_SPANS spans (an open orbit).

    Parameters
    ----------
    data : RVData
        The velocities.
    period : float
        The companion's start period, days.
    period_range : tuple of float, optional
        The search range (default :func:`default_period_range`).

    Returns
    -------
    LogUniform
        The period prior.
    """
    lo, hi = period_range if period_range is not None else default_period_range(data)
    span = baseline(data)
    if span > 0 and period > 0.5 * span:
        hi = max(hi, LONG_PERIOD_SPANS * span)
    return LogUniform(min(lo, 0.8 * period), max(hi, 1.25 * period))


def tc_prior(tc: float, period: float) -> Uniform:
    """Uniform over one period centred on ``tc`` (data time system).

    Parameters
    ----------
    tc, period : float
        Start time of conjunction and period, days.

    Returns
    -------
    Uniform
        The prior on the time of conjunction.
    """
    return Uniform(tc - 0.5 * period, tc + 0.5 * period)


#: upper bound of the default eccentricity prior
DEFAULT_MAX_ECC = 0.99
#: a companion found below this period (days) is fitted on a circular orbit: orbits that
#: short are tidally circularized in practice (common practice, no source), and an
#: eccentric fit there is the daily alias of a longer eccentric orbit (searched from
#: 0.5 d, the demo's 143-d orbit had an e = 0.37 alias at 1.004 d within 1.7 in ln L)
CIRCULAR_BELOW = 1.2


def ecc_prior(circular: bool = False) -> Prior:
    """Uniform on [0, 0.99], or fixed at 0 for a circular orbit.

    Parameters
    ----------
    circular : bool
        Fix the orbit circular.

    Returns
    -------
    Prior
        The eccentricity prior.
    """
    return Fixed(0.0) if circular else Uniform(0.0, DEFAULT_MAX_ECC)


def centred_velocities(data: RVData) -> np.ndarray:
    """Velocities with each instrument's median (its zero point) subtracted.

    Parameters
    ----------
    data : RVData
        The velocities.

    Returns
    -------
    ndarray
        A new array, m/s.
    """
    out = np.array(data.rv, dtype=float, copy=True)
    for name in data.instruments:
        m = data.instrument == name
        out[m] -= np.median(out[m])
    return out


def K_prior(data: RVData, K: float = 0.0) -> Uniform:  # noqa: N802 - the trade's symbol
    """Uniform on [0, max(2 x peak-to-peak of the zero-point-free velocities, 2 K, 1)].

    Parameters
    ----------
    data : RVData
        The velocities.
    K : float
        The companion's start semi-amplitude, m/s.

    Returns
    -------
    Uniform
        The prior on K, m/s.
    """
    spread = float(np.ptp(centred_velocities(data))) if len(data) else 0.0
    return Uniform(0.0, max(2.0 * spread, 2.0 * float(K), 1.0))


def jitter_prior(data: RVData, name: str) -> Uniform:
    """Uniform on [0, max(10, 3 x RMS of the instrument's velocities)] m/s.

    Parameters
    ----------
    data : RVData
        The velocities.
    name : str
        The instrument.

    Returns
    -------
    Uniform
        The prior on its jitter, m/s.
    """
    m = data.instrument == name
    rms = float(np.std(data.rv[m])) if m.sum() > 1 else 10.0
    return Uniform(0.0, max(10.0, 3.0 * rms))


def start_jitter(data: RVData, name: str, prior: Prior | None = None) -> float:
    """A start value for the jitter: half the median error, moved inside ``prior``.

    Parameters
    ----------
    data : RVData
        The velocities.
    name : str
        The instrument.
    prior : Prior, optional
        The jitter's prior (its fixed value when fixed).

    Returns
    -------
    float
        The start jitter, m/s.
    """
    m = data.instrument == name
    value = max(0.5 * float(np.median(data.err[m])), 0.1)
    if prior is None:
        return value
    if prior.is_fixed:
        return float(prior.value)
    lo, hi = prior.bounds
    if not lo <= value <= hi:
        value = 0.5 * (lo + min(hi, lo + 20.0))
    return value
