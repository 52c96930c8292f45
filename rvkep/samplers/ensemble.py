"""emcee's affine-invariant ensemble sampler as an rvkep sampler.

The driver itself (moves, the autocorrelation stopping rule, buffered HDF5 checkpoints
keyed on the model and settings, exact resume, Ctrl-C handling) lives in
:mod:`rvkep.sampling`; this class hands it the posterior and returns its kept samples
(after burn-in and thinning, equal weights) as a :class:`SampleSet`.
"""

from __future__ import annotations

import numpy as np

from rvkep.samplers.base import Sampler, SampleSet

__all__ = ["EnsembleSampler"]


class EnsembleSampler(Sampler):
    """emcee (Foreman-Mackey et al. 2013) with rvkep's convergence rule."""

    name = "emcee"

    def run(self, posterior, start: np.ndarray, options=None) -> SampleSet:
        """``options`` is a :class:`rvkep.sampling.SamplerOptions`; the full chain is
        in ``extra["chain"]`` (a :class:`rvkep.sampling.SamplingResult`)."""
        from rvkep.sampling import run_sampler

        result = run_sampler(posterior.model, start, options, posterior=posterior)
        flat = result.flat
        weights = np.full(flat.shape[0], 1.0 / flat.shape[0])
        info = result.diagnostics()
        return SampleSet(posterior.model, flat, result.flat_log_prob, weights,
                         bool(result.converged), info, {"chain": result})  # fmt: skip
