"""Posterior predictions: the velocity each companion, the star and an instrument
should show at any time, from the kept posterior samples (not from best-fit values).

For every posterior draw the Keplerian curve of each companion is evaluated at the
requested times (one vectorized kernel call per companion over all draws and times);
the spread of the curves across draws is the uncertainty of the prediction. Three
kinds of curve are returned:

* ``<label>``: the star's reflex velocity due to one companion;
* ``total``: the sum over companions plus the fitted trend (the star's velocity
  relative to the system's mean, which no instrument measures directly);
* ``measured`` (when an instrument is named): ``total`` plus that instrument's
  offset, plus a Gaussian draw with variance jitter^2 + err^2 (the instrument's jitter
  of that posterior draw and its typical error, by default the median error of its
  points): the posterior predictive distribution of a new measurement. With a
  correlated-noise model (stellar activity, :mod:`rvkep.noise.gp`) its amplitude
  ``noise.amplitude`` is folded in too: the activity at a new time is not predicted
  from the data here, its whole variance is added (an interval on the safe side).

The trend is a polynomial in years from the data's reference epoch, as in the model.
Times are in the data's own time system.

For an N-body run (columns ``dynamics.cos_inc``, or one per companion) ``total``
integrates each draw with all the companions asked for (:func:`rvkep.nbody.star_velocity_rows`, the
draw's stellar mass and inclination), so the interactions carry into the future; the
``<label>`` curves stay the Keplerian curves of each companion's osculating elements
at the epoch (the interactions belong to the system, not to one companion).
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np

from rvkep.orbit import radial_velocity

__all__ = ["Prediction", "predict", "QUANTILES"]

#: The columns of a prediction summary and the percentiles behind them: the median,
#: and the central 68.27% and 95.45% intervals (1 and 2 sigma of a Gaussian).
QUANTILES = {
    "median": 50.0,
    "lo68": 15.865,
    "hi68": 84.135,
    "lo95": 2.275,
    "hi95": 97.725,
}


@dataclass(frozen=True)
class Prediction:
    """Predicted curves: ``curves[name]`` has shape (draws, times)."""

    time: np.ndarray
    curves: dict[str, np.ndarray]
    instrument: str | None = None

    @property
    def names(self) -> list[str]:
        """Curve names: the companions' labels, ``total``, and ``measured``."""
        return list(self.curves)

    def summary(self) -> dict[str, dict[str, np.ndarray]]:
        """Per curve, the median and the 68% and 95% interval bounds at each time
        (keys of :data:`QUANTILES`)."""
        out = {}
        for name, draws in self.curves.items():
            levels = np.percentile(draws, list(QUANTILES.values()), axis=0)
            out[name] = dict(zip(QUANTILES, levels, strict=True))
        return out

    def rows(self) -> list[dict[str, float]]:
        """One row per time: ``time``, then ``<name>_<quantile>`` for every curve
        (the columns of a prediction table, e.g. ``total_median``, ``b_lo68``)."""
        summary = self.summary()
        rows = []
        for i, t in enumerate(self.time):
            row = {"time": float(t)}
            for name in ["total", *[n for n in self.curves if n not in ("total", "measured")],
                         "measured"]:  # fmt: skip
                if name in summary:
                    for q, values in summary[name].items():
                        row[f"{name}_{q}"] = float(values[i])
            rows.append(row)
        return rows


def _companion_curves(columns, labels, idx, dt, epoch) -> dict[str, np.ndarray]:
    """Each companion's Keplerian velocity curve, one row per draw ``idx``."""
    curves: dict[str, np.ndarray] = {}
    for L in labels:
        col = {k: np.asarray(columns[f"{L}.{k}"], float)[idx, None]
               for k in ("period", "K", "ecc", "omega_deg", "tp")}  # fmt: skip
        curves[L] = radial_velocity(dt, col["period"], col["tp"] - epoch, col["ecc"],
                                    np.radians(col["omega_deg"]), col["K"])  # fmt: skip
    return curves


def _nbody_total(columns, labels, idx, dt, epoch) -> np.ndarray:
    """The star's velocity from the N-body integration of each draw (an N-body run's
    companions interact, so their sum is not the sum of Keplerian curves)."""
    from rvkep.nbody import orientation, star_velocity_rows

    def stack(key):
        return np.column_stack([np.asarray(columns[f"{L}.{key}"], float)[idx] for L in labels])

    arr = {"period": stack("period"), "tp_rel": stack("tp") - epoch, "ecc": stack("ecc"),
           "omega": np.radians(stack("omega_deg")), "K": stack("K")}  # fmt: skip
    inc, node = orientation(columns, labels, idx)
    return star_velocity_rows(dt, arr, np.asarray(columns["star.mass_msun"], float)[idx],
                              inc, node)  # fmt: skip


def _draw_indices(n_all: int, draws: int | None, rng: np.random.Generator) -> np.ndarray:
    """All draws, or ``draws`` of them chosen at random without replacement, in order."""
    if draws is None:
        return np.arange(n_all)
    if draws < 1:
        raise ValueError(f"draws must be at least 1, got {draws}")
    return np.sort(rng.choice(n_all, size=min(draws, n_all), replace=False))


def _measured_noise(columns, instrument, idx, typical_error, shape, rng):
    """The instrument's offset and a draw of its noise (jitter, the typical error and a
    correlated-noise model's amplitude, which is not predicted) for each draw."""
    if f"offset.{instrument}" not in columns:
        known = sorted(k.removeprefix("offset.") for k in columns if k.startswith("offset."))
        raise ValueError(f"unknown instrument {instrument!r}; known: {', '.join(known)}")
    offset = np.asarray(columns[f"offset.{instrument}"], float)[idx, None]
    var = np.full(offset.shape, float(typical_error) ** 2)
    if f"jitter.{instrument}" in columns:
        var = var + np.asarray(columns[f"jitter.{instrument}"], float)[idx, None] ** 2
    if "noise.amplitude" in columns:
        var = var + np.asarray(columns["noise.amplitude"], float)[idx, None] ** 2
    return offset, np.sqrt(var) * rng.standard_normal(shape)


def predict(columns: Mapping[str, np.ndarray], labels: list[str], t, *, epoch: float,
            instrument: str | None = None, typical_error: float = 0.0,
            draws: int | None = None, rng: np.random.Generator | int | None = 0,
            ) -> Prediction:  # fmt: skip
    """Posterior predictive curves at times ``t`` (see the module text).

    Parameters
    ----------
    columns : mapping of str to array
        Posterior samples by name, as :class:`rvkep.posterior.PosteriorSamples` holds
        them: ``<label>.period``, ``.K``, ``.ecc``, ``.omega_deg``, ``.tp`` (absolute),
        ``offset.<instrument>``, ``jitter.<instrument>``, optional ``trend.slope``
        (m/s per year) and ``trend.curvature`` (m/s per year^2).
    labels : list of str
        The companions to include.
    t : array_like
        Times, in the data's time system.
    epoch : float
        The data's reference epoch (the trend's zero point).
    instrument : str, optional
        Add this instrument's offset and noise (the ``measured`` curve).
    typical_error : float
        The measurement error folded into ``measured`` beside the jitter (m/s).
    draws : int, optional
        Use this many posterior draws, chosen at random without replacement (default:
        all).
    rng : Generator or int
        For the choice of draws and the measurement noise.

    Returns
    -------
    Prediction
    """
    rng = np.random.default_rng(rng)
    t = np.atleast_1d(np.asarray(t, dtype=float))
    if t.ndim != 1 or not np.all(np.isfinite(t)):
        raise ValueError("times must be a 1-d array of finite numbers")
    if not labels and instrument is None and "trend.slope" not in columns:
        raise ValueError("nothing to predict: no companion, trend or instrument")
    idx = _draw_indices(len(next(iter(columns.values()))), draws, rng)
    dt = t - epoch  # phases are computed relative to the epoch, as in the model
    curves = _companion_curves(columns, labels, idx, dt, epoch)
    total = sum(curves.values(), np.zeros((idx.size, t.size)))
    if labels and any(k.startswith("dynamics.cos_inc") for k in columns):  # N-body run
        total = _nbody_total(columns, labels, idx, dt, epoch)
    years = dt / 365.25
    for name, power in (("trend.slope", 1), ("trend.curvature", 2)):
        if name in columns:
            total = total + np.asarray(columns[name], float)[idx, None] * years**power
    curves["total"] = total
    if instrument is not None:
        offset, noise = _measured_noise(columns, instrument, idx, typical_error, total.shape,
                                        rng)  # fmt: skip
        curves["measured"] = total + offset + noise
    return Prediction(t, curves, instrument)
