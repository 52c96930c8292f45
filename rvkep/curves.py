"""The model curves the figures draw, as arrays (for a notebook or a report too).

:func:`timeseries_curves` gives the best-fit velocity curve over the data's span (and
ten years past it when an orbit is not closed), its
68% posterior band (from up to 300 posterior draws, one kernel call), the data with
offsets and trend removed and the residuals; :func:`phase_curves` gives one companion's
phase-folded points (the other companions, offsets, trend and any correlated activity
signal's conditional mean removed), its best-fit
curve over one period from conjunction, and its band, each posterior draw folded on its
own period and conjunction (one broadcast kernel call over draws and phases).
"""

from __future__ import annotations

import numpy as np

from rvkep.data import RVData
from rvkep.likelihood import keplerian_velocity
from rvkep.orbit import radial_velocity

__all__ = ["timeseries_curves", "phase_curves", "trend_curve"]

_BAND = [15.87, 84.13]


def trend_curve(params: dict, t: np.ndarray, epoch: float) -> np.ndarray:
    """The fitted trend at times ``t`` (years from the epoch, as in the model).

    Parameters
    ----------
    params : dict
        Parameter values by name (``trend.slope`` in m/s/yr, ``trend.curvature`` in
        m/s/yr^2; missing ones are 0).
    t : ndarray
        Times (days).
    epoch : float
        The model's reference epoch (days).

    Returns
    -------
    ndarray
        The trend (m/s) at ``t``.
    """
    x = (np.asarray(t, float) - epoch) / 365.25
    return params.get("trend.slope", 0.0) * x + params.get("trend.curvature", 0.0) * x * x


def _zero_points(results) -> tuple[dict, np.ndarray, np.ndarray]:
    """The best fit's offsets by instrument, each point's own offset, and each point's
    offset plus the trend and any decorrelation terms (what is removed from the data
    before drawing)."""
    data, p = results.data, results.fit.params
    offsets = {i.name: p[f"offset.{i.name}"] for i in results.fit.model.instruments}
    own = np.array([offsets[n] for n in data.instrument])
    return offsets, own, results.fit.model.linear_part(p)


def _activity(results, t_grid=None):
    """The correlated-noise model's conditional mean (and standard deviation) given the
    best fit's residuals, at the data times and, with ``t_grid``, on that grid; None
    when the noise model has no correlated part (white noise)."""
    fit, data = results.fit, results.data
    model = fit.model
    best = model.to_physical(fit.theta[None, :])
    resid = data.rv - model.linear_part(fit.params) - keplerian_velocity(model, best)[0]
    at_data = model.noise_model.conditional_mean(model, best, resid)
    if at_data is None:
        return None
    out = {"at_data": at_data[0], "data": resid}
    if t_grid is not None:
        mean, sd = model.noise_model.conditional_mean(model, best, resid, t_grid)
        out.update(time=t_grid, mean=mean, band=(mean - sd, mean + sd))
    return out


def _draws(results, n: int, rng):
    theta = getattr(results.posterior, "theta", None)
    if theta is None or not results.fit.model.companions:
        return None
    idx = np.random.default_rng(rng).choice(len(theta), size=min(n, len(theta)), replace=False)
    return results.fit.model.to_physical(theta[idx])


#: how far the time series runs past the data when an orbit is not closed (ten years)
FUTURE_DAYS = 3652.5


def timeseries_curves(results, n_grid: int = 3000, n_draws: int = 300, rng=0) -> dict:
    """Keys: ``time`` (grid), ``curve`` (best fit), ``band`` ((low, high) or None),
    ``data`` (RVData, the offsets and trend removed but each instrument's offset added
    back for display), ``offsets`` (by instrument), ``residuals`` (minus the activity's
    conditional mean when there is one), ``activity`` (None for white noise; else the
    correlated signal given the best fit: ``time``, ``mean``, ``band`` (mean +- one
    standard deviation) on the grid, ``at_data`` and ``data``: the velocities minus
    offsets, trend and companions).

    Parameters
    ----------
    results : Results
        A finished run.
    n_grid : int, optional
        Points of the time grid.
    n_draws : int, optional
        Posterior draws for the band.
    rng : int or numpy.random.Generator, optional
        Seed of the draws.

    Returns
    -------
    dict
        The curves (keys above).
    """
    data, fit = results.data, results.fit
    model, epoch = fit.model, data.epoch
    offsets, own, off = _zero_points(results)
    span = data.time[-1] - data.time[0]
    # an orbit not closed: the posterior's spread over the next ten years
    ahead = FUTURE_DAYS if any(not p.get("orbit_closed", True)
                               for p in results.to_dict()["planets"]) else 0.03 * span  # fmt: skip
    ct = np.linspace(data.time[0] - 0.03 * span, data.time[-1] + ahead, n_grid)
    best = model.to_physical(fit.theta[None, :])
    curve = keplerian_velocity(model, best, t=ct)[0]
    band = None
    phys = _draws(results, n_draws, rng)
    if phys is not None:
        curves = keplerian_velocity(model, phys, t=ct)
        band = np.percentile(curves, _BAND, axis=0)
    shown = RVData(data.time, data.rv - off + own, data.err, data.instrument, epoch=epoch)
    activity = _activity(results, ct)
    residuals = fit.residuals if activity is None else fit.residuals - activity["at_data"]
    return {"time": ct, "curve": curve, "band": band, "data": shown, "offsets": offsets,
            "residuals": residuals, "activity": activity}  # fmt: skip


def phase_curves(results, label: str, n_grid: int = 400, n_draws: int = 300, rng=0) -> dict:
    """Keys: ``phase`` and ``velocity`` of the points (phase 0 at conjunction),
    ``grid`` and ``curve`` (best fit over one period), ``band`` ((low, high) or None),
    ``period``.

    Parameters
    ----------
    results : Results
        A finished run.
    label : str
        The companion.
    n_grid : int, optional
        Points over one period.
    n_draws : int, optional
        Posterior draws for the band.
    rng : int or numpy.random.Generator, optional
        Seed of the draws.

    Returns
    -------
    dict
        The curves (keys above); the other companions and the trend are removed from the
        points.
    """
    data, fit = results.data, results.fit
    model, p = fit.model, fit.params
    comp = next(c for c in model.companions if c.label == label)
    single = model.with_companions([comp])
    best = model.to_physical(fit.theta[None, :])
    off = _zero_points(results)[2]
    others = keplerian_velocity(model, best)[0] - keplerian_velocity(single, best)[0]
    velocity = data.rv - off - others
    activity = _activity(results)
    if activity is not None:  # the correlated signal's conditional mean removed too
        velocity = velocity - activity["at_data"]
    P, tc = p[f"{label}.period"], p[f"{label}.tc"]
    phase = np.mod((data.time - tc) / P, 1.0)
    grid = np.linspace(0, 1, n_grid)
    curve = keplerian_velocity(single, best, t=tc + grid * P)[0]
    band = None
    phys = _draws(results, n_draws, rng)
    if phys is not None:
        col = {
            k: phys[f"{label}.{k}"][:, None] for k in ("period", "tc", "tp", "ecc", "omega", "K")
        }
        t = col["tc"] + grid[None, :] * col["period"]  # each draw on its own period
        curves = radial_velocity(t, col["period"], col["tp"], col["ecc"], col["omega"], col["K"])
        band = np.percentile(curves, _BAND, axis=0)
    return {"phase": phase, "velocity": velocity, "grid": grid, "curve": curve, "band": band,
            "period": P}  # fmt: skip
