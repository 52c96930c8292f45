"""What every noise model provides: a small base class.

A noise model scores the residuals r = y - (sum of Keplerians) of many parameter sets
at once. The linear parameters (per-instrument offsets, trend coefficients, later
decorrelation coefficients) enter as r - X beta with the model's design matrix X and
a flat prior; the noise model integrates them out (``linear="marginalize"``, for
sampling) or solves for them (``linear="profile"``, for best fits and the BIC)
through its own covariance C:

    A = X^T C^-1 X,  b = X^T C^-1 r,  beta = A^-1 b,
    ln L_prof = -1/2 [r^T C^-1 r - b^T A^-1 b] - 1/2 ln|C| - n/2 ln(2 pi),
    ln L_marg = ln L_prof - 1/2 ln|A| + m/2 ln(2 pi)

(common practice, no source; Bayesian linear regression). Its parameters (today the
per-instrument jitters, which the instruments' priors describe) are read from the
physical parameter columns by name.
"""

from __future__ import annotations

import numpy as np

__all__ = ["NoiseModel"]


class NoiseModel:
    """Base class of the noise models (see the module text)."""

    #: The name a model file, the registry and checkpoint keys use.
    name = "base"

    def parameter_names(self, model) -> list[str]:
        """Names of the physical parameters this noise model reads."""
        raise NotImplementedError

    def effective_variance(self, model, phys: dict, rows: np.ndarray) -> np.ndarray:
        """Each point's variance, (n_rows, n_points): the diagonal of the covariance
        (what periodograms and start grids weight by)."""
        raise NotImplementedError

    def loglike(self, model, phys: dict, rows: np.ndarray, resid: np.ndarray, linear: str):
        """(ln L, details) of the residuals ``resid`` (n_rows, n_points), linear
        parameters marginalized or profiled; details hold ``beta`` (n_rows, m), the
        lower Cholesky factor ``chol`` of A, ``chi2`` (the quadratic form after the
        linear solve) and any per-point weights ``w``."""
        raise NotImplementedError

    def fast_loglike(self, model, arrays: dict, rows, linear: str) -> np.ndarray | None:
        """ln L of the given rows in one compiled pass, or None where there is none
        (the caller then uses :meth:`loglike`)."""
        return None
