"""Posterior samples in physical parameters.

From the sampler's coordinates each sample gets P, K, e, omega (degrees), tp and tc (in
the data's time system) per companion, the jitters, and the offsets and trend terms
drawn from their conditional Gaussian given the sample (they were marginalized in the
sampling, so this restores their full posterior). Derived physical quantities (minimum
mass, orbit size) are added by :mod:`rvkep.results`.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np

from rvkep.likelihood import LogPosterior
from rvkep.model import SystemModel
from rvkep.outputs import atomic_write

__all__ = ["PosteriorSamples", "percentiles"]


def percentiles(x: np.ndarray) -> dict[str, float]:
    """{"median", "minus", "plus"} from the 16th, 50th and 84th percentiles.

    Parameters
    ----------
    x : ndarray
        Samples.

    Returns
    -------
    dict
        The median and the distances to the 16th and 84th percentiles.
    """
    lo, med, hi = np.percentile(np.asarray(x, float), [15.865525393145708, 50.0, 84.13447460685429])
    return {"median": float(med), "minus": float(med - lo), "plus": float(hi - med)}


class PosteriorSamples:
    """Named columns of posterior samples (one row per sample).

    Columns: ``<label>.period`` [d], ``.K`` [m/s], ``.ecc``, ``.omega_deg``, ``.tp``,
    ``.tc`` [data time], ``jitter.<inst>``, ``noise.<name>`` (the noise model's own
    parameters), ``offset.<inst>`` [m/s], ``trend.slope``
    [m/s/yr], ``trend.curvature`` [m/s/yr^2], ``log_posterior``; plus any derived
    columns added later.
    """

    def __init__(self, columns: dict[str, np.ndarray], model: SystemModel | None = None):
        n = {len(v) for v in columns.values()}
        if len(n) > 1:
            raise ValueError("all columns need the same number of samples")
        self.columns = {k: np.asarray(v, float) for k, v in columns.items()}
        self.model = model

    @classmethod
    def from_chain(
        cls,
        model: SystemModel,
        flat: np.ndarray,
        log_prob: np.ndarray | None = None,
        rng: np.random.Generator | int | None = 0,
    ) -> PosteriorSamples:
        """Physical columns from flat sampler coordinates (n_samples, ndim)."""
        rng = np.random.default_rng(rng)
        flat = np.atleast_2d(flat)
        arr = model.orbit_arrays(flat)
        phys = model.as_dict(arr)
        cols: dict[str, np.ndarray] = {}
        order = ("period", "K", "ecc", "omega_deg", "tp", "tc")
        for el in model.elements(arr).values():
            named = el.columns(omega_unit="deg")
            cols.update({f"{el.label}.{k}": named[f"{el.label}.{k}"] for k in order})
        for inst in model.instruments:
            cols[f"jitter.{inst.name}"] = phys[f"jitter.{inst.name}"]
        for group, owned in (("noise", model.noise_parameters),
                             ("dynamics", model.dynamics_parameters)):  # fmt: skip
            for par in owned:
                cols[f"{group}.{par.name}"] = phys[f"{group}.{par.name}"]
        lin = LogPosterior(model).linear_parameters(flat, rng=rng)
        for j, name in enumerate(model.linear_names):
            cols[name] = lin[:, j]
        if log_prob is not None:
            cols["log_posterior"] = np.asarray(log_prob, float)
        out = cls(cols, model)
        out.theta = flat
        return out

    def __len__(self) -> int:
        return len(next(iter(self.columns.values()))) if self.columns else 0

    def __getitem__(self, name: str) -> np.ndarray:
        return self.columns[name]

    def __contains__(self, name: str) -> bool:
        return name in self.columns

    @property
    def names(self) -> list[str]:
        return list(self.columns)

    def add(self, name: str, values: np.ndarray) -> None:
        values = np.asarray(values, float)
        if values.shape != (len(self),):
            raise ValueError(f"column {name} has shape {values.shape}, need ({len(self)},)")
        self.columns[name] = values

    def thin(self, every: int) -> PosteriorSamples:
        """Every ``every``-th sample."""
        out = PosteriorSamples({k: v[::every] for k, v in self.columns.items()}, self.model)
        if hasattr(self, "theta"):
            out.theta = self.theta[::every]
        return out

    def summary(self) -> dict[str, dict[str, float]]:
        """Median and 16th/84th-percentile distances for every column."""
        return {k: percentiles(v) for k, v in self.columns.items()}

    def table(self) -> str:
        """A readable text summary."""
        rows = [f"{'parameter':<24} {'median':>14} {'-':>10} {'+':>10}"]
        for k, s in self.summary().items():
            rows.append(f"{k:<24} {s['median']:>14.6g} {s['minus']:>10.3g} {s['plus']:>10.3g}")
        return "\n".join(rows)

    def __repr__(self) -> str:
        return f"PosteriorSamples({len(self)} samples)\n{self.table()}"

    def to_csv(self, path: str | Path) -> Path:
        """All columns as CSV (one header row), written atomically."""
        names = self.names
        data = np.column_stack([self.columns[n] for n in names]) if names else np.empty((0, 0))
        with atomic_write(path) as fh:
            fh.write(",".join(names) + "\n")
            np.savetxt(fh, data, delimiter=",", fmt="%.10g")
        return Path(path)

    def to_npz(self, path: str | Path) -> Path:
        """All columns in a compressed numpy file (``numpy.load`` gives a dict-like)."""
        with atomic_write(path, "wb") as fh:
            np.savez_compressed(fh, **self.columns)
        return Path(path)

    @classmethod
    def read_npz(cls, path: str | Path) -> PosteriorSamples:
        with np.load(path) as f:
            return cls({k: f[k] for k in f.files})


def circular_percentiles(deg: np.ndarray) -> dict[str, float]:
    """Percentiles of an angle (degrees) about its circular mean, so a posterior that
    straddles 0/360 is summarized correctly."""
    rad = np.radians(np.asarray(deg, float))
    centre = math.atan2(np.mean(np.sin(rad)), np.mean(np.cos(rad)))
    unwrapped = np.degrees(centre + np.angle(np.exp(1j * (rad - centre))))
    out = percentiles(unwrapped)
    out["median"] = out["median"] % 360.0
    return out
