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

(common practice, no source; Bayesian linear regression).

Parameters: every noise model reads the per-instrument jitters (``jitter.<instrument>``,
which the instruments' priors describe) and may own parameters of its own
(:meth:`NoiseModel.parameters`: names, default priors and start values, e.g. a
Gaussian process's amplitude and timescales). The system model puts those in the
sampled vector as ``noise.<name>``, applies their priors, bounds and start values like
any other parameter, and hands them back in the physical columns and, as a matrix
(n_sets, n_parameters) in the order of :meth:`parameters`, in ``arrays["noise"]``.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from rvkep.priors import Prior

__all__ = ["NoiseModel", "NoiseParameter", "covariance_power"]


@dataclass(frozen=True)
class NoiseParameter:
    """One parameter a noise model owns: its short ``name`` (the column is
    ``noise.<name>``), prior, start value, unit and a few words of meaning."""

    name: str
    prior: Prior
    start: float
    unit: str = ""
    meaning: str = ""
    #: the values that make sense at all (a prior reaching outside is refused, and a
    #: value outside is invalid whatever the prior says)
    domain: tuple[float, float] = (-np.inf, np.inf)

    def canonical(self) -> dict:
        return {"name": self.name, "prior": self.prior.to_dict()}


class NoiseModel:
    """Base class of the noise models (see the module text)."""

    #: The name a model file, the registry and checkpoint keys use.
    name = "base"
    #: The names of the parameters it owns, in the order of :meth:`parameters` (a
    #: model file's ``[noise]`` table is checked against them before any data is read).
    parameter_keys: tuple[str, ...] = ()

    def parameters(self, data) -> list[NoiseParameter]:
        """The parameters this noise model owns, with default priors and start values
        for ``data`` (an :class:`~rvkep.data.RVData`); none by default."""
        return []

    def parameter_names(self, model) -> list[str]:
        """Names of the physical parameters this noise model reads: the jitters and
        its own ``noise.<name>`` parameters."""
        own = [f"noise.{p.name}" for p in model.noise_parameters]
        return [f"jitter.{i.name}" for i in model.instruments] + own

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

    def initial(self, model):
        """The model with start values of this noise model's parameters chosen from the
        data (called once before the first fit); unchanged by default."""
        return model

    def periodogram_power(self, model, phys: dict, resid: np.ndarray, frequency: np.ndarray):
        """Power of a sinusoid added to the residuals ``resid`` (n,) of one parameter
        set, measured through this model's covariance, on ``frequency``; None where
        the generalized Lomb-Scargle periodogram of the residuals with the effective
        errors is the right measure (diagonal covariance)."""
        return None

    def conditional_mean(self, model, phys: dict, resid: np.ndarray, t=None):
        """(mean, standard deviation) of a correlated signal given the residuals of one
        parameter set, at ``t`` (in the data's time system; default the data times); None when
        the model has no correlated part."""
        return None


#: frequencies per block of :func:`covariance_power` (bounds its memory)
_FREQ_BLOCK = 2048


def covariance_power(solve, X: np.ndarray, t: np.ndarray, r: np.ndarray,
                     frequency: np.ndarray) -> np.ndarray:  # fmt: skip
    """Power of a sinusoid added to residuals ``r`` measured through a covariance C:
    the fraction of chi^2 = r^T C^-1 r (after the linear columns ``X``) it removes.
    ``solve(V)`` returns C^-1 V for a matrix V (n, k). The generalized Lomb-Scargle
    power (Zechmeister & Kuerster 2009, A&A 496, 577) is the special case of a
    diagonal C.

    Parameters
    ----------
    solve : callable
        ``solve(V) -> C^-1 V``.
    X : ndarray, shape (n, m)
        The linear columns (offsets, trend).
    t : ndarray, shape (n,)
        Times (days).
    r : ndarray, shape (n,)
        Residuals (m/s).
    frequency : ndarray
        Trial frequencies (1/day).

    Returns
    -------
    ndarray
        The power at each frequency, in [0, 1].
    """
    Z = solve(np.column_stack([r, X]))
    A = X.T @ Z[:, 1:]
    A_inv = np.linalg.inv(0.5 * (A + A.T))
    b = X.T @ Z[:, 0]
    chi2_0 = float(r @ Z[:, 0] - b @ A_inv @ b)
    out = np.empty(frequency.size)
    for s in range(0, frequency.size, _FREQ_BLOCK):
        f = frequency[s : s + _FREQ_BLOCK]
        arg = 2.0 * np.pi * np.outer(t, f)
        B = np.empty((t.size, 2 * f.size))
        B[:, 0::2], B[:, 1::2] = np.cos(arg), np.sin(arg)
        W = solve(B).reshape(t.size, f.size, 2)
        Bk = B.reshape(t.size, f.size, 2)
        G = np.einsum("nfi,nfj->fij", Bk, W)
        h = np.einsum("nfi,n->fi", W, r)
        H = np.einsum("nfi,nk->fik", W, X)
        HA = H @ A_inv
        S = G - HA @ np.swapaxes(H, 1, 2)
        u = h - HA @ b
        det = S[:, 0, 0] * S[:, 1, 1] - S[:, 0, 1] * S[:, 1, 0]
        with np.errstate(divide="ignore", invalid="ignore"):
            q = (S[:, 1, 1] * u[:, 0] ** 2 - 2 * S[:, 0, 1] * u[:, 0] * u[:, 1]
                 + S[:, 0, 0] * u[:, 1] ** 2) / det  # fmt: skip
        out[s : s + f.size] = np.where(np.isfinite(q) & (det > 0), q, 0.0)
    return np.clip(out / chi2_0, 0.0, 1.0)
