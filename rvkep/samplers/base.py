"""What every sampler gives and takes: a small base class and a weighted sample set.

A sampler receives a posterior that was built once (a callable returning the
log-posterior of many parameter sets at a time, with its ``model``) and a start vector,
and returns a :class:`SampleSet`: samples in the model's sampled coordinates, their
log-posterior, their weights (equal for MCMC, unequal for nested sampling) and a
diagnostics dict for results.json. Evidence-computing samplers add ``ln_z`` and
``ln_z_err`` to ``extra``. Resume and checkpoint keys stay inside each driver.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

__all__ = ["Sampler", "SampleSet"]


@dataclass
class SampleSet:
    """Weighted posterior samples and how they were obtained.

    ``theta`` (n, ndim) are sampled coordinates of ``model``; ``weights`` (n,) sum to
    one. ``converged`` says whether the driver's own criterion was met.
    """

    model: object
    theta: np.ndarray
    log_prob: np.ndarray
    weights: np.ndarray
    converged: bool
    info: dict = field(default_factory=dict)  # the diagnostics for results.json
    extra: dict = field(default_factory=dict)  # e.g. ln_z, or the driver's own result

    def __post_init__(self) -> None:
        self.weights = np.asarray(self.weights, float)
        if self.weights.shape != (self.theta.shape[0],) or not np.isclose(self.weights.sum(), 1):
            raise ValueError("weights must be one per sample and sum to 1")

    def diagnostics(self) -> dict:
        return dict(self.info)

    def equal_weight(self, rng: np.random.Generator | int | None = 0):
        """(theta, log_prob) with every sample of equal weight: as they are when the
        weights are equal, else resampled systematically in proportion to them."""
        if np.allclose(self.weights, self.weights[0]):
            return self.theta, self.log_prob
        rng = np.random.default_rng(rng)
        n = self.theta.shape[0]
        positions = (rng.uniform() + np.arange(n)) / n
        idx = np.minimum(np.searchsorted(np.cumsum(self.weights), positions), n - 1)
        return self.theta[idx], self.log_prob[idx]


class Sampler:
    """Base class of the samplers: a name, and :meth:`run`."""

    name = "base"

    def run(self, posterior, start: np.ndarray, options=None) -> SampleSet:
        """Sample ``posterior`` (built once by the caller) from ``start``."""
        raise NotImplementedError
