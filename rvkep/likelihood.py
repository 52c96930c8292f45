"""Log-likelihood and log-posterior, vectorized over many parameter sets.

The likelihood keeps two things apart so that other noise models can be added later:

* the *residuals* r = y - sum of Keplerians (what the orbits do not explain), from
  :func:`keplerian_velocity`; and
* the *noise model*, which scores residuals; :class:`WhiteNoise` (independent Gaussian
  errors, variance err^2 + jitter^2 of the point's instrument) is the first one.

Linear parameters
-----------------
Per-instrument offsets and the trend enter as r - X beta, with X the design matrix
(an indicator column per instrument, then (t / yr)^p for the trend). With C the
diagonal covariance, A = X^T C^-1 X and b = X^T C^-1 r, the Gaussian integral over beta
with a flat prior is exact:

    ln L_marg = -1/2 [r^T C^-1 r - b^T A^-1 b] - 1/2 ln|C| - 1/2 ln|A| - (n - m)/2 ln(2 pi)

(common practice, no source; any text on Bayesian linear regression). Maximizing over
beta instead (``linear="profile"``) gives beta = A^-1 b and

    ln L_prof = -1/2 [r^T C^-1 r - b^T A^-1 b] - 1/2 ln|C| - n/2 ln(2 pi),

the maximum likelihood used for chi-square, BIC and AIC. The sampler uses the
marginalized form (the flat prior on beta makes it a density up to a constant; fine for
sampling, not for evidences). The posterior of beta given a sample is N(A^-1 b, A^-1).

Invalid parameter sets (e >= 1, negative K or jitter, outside a prior) get -inf without
any warning; the orbits are only evaluated for valid rows.
"""

from __future__ import annotations

import numpy as np

from rvkep.kepler import BACKEND, rv_rows
from rvkep.model import SystemModel

if BACKEND == "numba":
    from rvkep._kepler_numba import white_noise_loglike as _fused_loglike
else:  # pragma: no cover - exercised with RVKEP_PURE_NUMPY=1
    _fused_loglike = None

__all__ = [
    "WhiteNoise",
    "keplerian_velocity",
    "LogPosterior",
    "linear_solve",
]

_LOG_2PI = float(np.log(2.0 * np.pi))


class WhiteNoise:
    """Independent Gaussian noise: variance err^2 + jitter^2 of each point's instrument."""

    name = "white"

    def inverse_variance(self, model: SystemModel, phys: dict, rows: np.ndarray) -> np.ndarray:
        """Weights 1 / (err^2 + jitter^2), shape (n_rows, n_points)."""
        jit = np.stack([phys[f"jitter.{i.name}"][rows] for i in model.instruments], axis=1)
        return 1.0 / (model.err2[None, :] + (jit * jit)[:, model.inst_index])


def keplerian_velocity(
    model: SystemModel, phys: dict, rows: np.ndarray | None = None, t: np.ndarray | None = None
) -> np.ndarray:
    """Sum of the companions' Keplerian curves, (n_rows, n_times).

    At the data times by default, or at ``t`` (minus the reference epoch, like
    ``model.t``).
    """
    if rows is None:
        rows = np.arange(next(iter(phys.values())).shape[0]) if phys else np.arange(1)
    t = model.t if t is None else np.asarray(t, float)
    out = np.zeros((rows.size, t.size))
    for c in model.companions:
        L = c.label
        P = phys[f"{L}.period"][rows]
        w = phys[f"{L}.omega"][rows]
        out += rv_rows(
            t,
            phys[f"{L}.tp"][rows],
            2.0 * np.pi / P,
            phys[f"{L}.ecc"][rows],
            np.cos(w),
            np.sin(w),
            phys[f"{L}.K"][rows],
        )
    return out


def linear_solve(model: SystemModel, resid: np.ndarray, w: np.ndarray):
    """Solve the linear part for each row.

    Returns
    -------
    beta : (n_rows, m) best linear parameters A^-1 b (offsets on the centred scale)
    chi2_reduction : (n_rows,) b^T A^-1 b
    logdet_A : (n_rows,)
    chol : (n_rows, m, m) lower Cholesky factor of A
    """
    X = model.design
    if model.trend == 0:
        # offsets only: A is diagonal (one indicator column per instrument)
        A_diag = w @ X
        b = (w * resid) @ X
        beta = b / A_diag
        red = np.sum(b * beta, axis=1)
        logdet = np.sum(np.log(A_diag), axis=1)
        chol = np.sqrt(A_diag)[:, :, None] * np.eye(X.shape[1])[None]
        return beta, red, logdet, chol
    A = np.einsum("sn,nk,nl->skl", w, X, X, optimize=True)
    b = (w * resid) @ X
    chol = np.linalg.cholesky(A)
    y = np.linalg.solve(chol, b[:, :, None])[:, :, 0]
    beta = np.linalg.solve(np.swapaxes(chol, 1, 2), y[:, :, None])[:, :, 0]
    red = np.sum(y * y, axis=1)
    logdet = 2.0 * np.sum(np.log(np.diagonal(chol, axis1=1, axis2=2)), axis=1)
    return beta, red, logdet, chol


class LogPosterior:
    """Callable log-posterior (or log-likelihood) of a model, vectorized for emcee.

    Parameters
    ----------
    model : SystemModel
    linear : {"marginalize", "profile"}
        Integrate the offsets and trend out (sampling) or maximize over them (best fit).
    noise : WhiteNoise, optional
    include_prior : bool
        False gives the log-likelihood alone.

    Call with an array (n_sets, ndim) (or (ndim,)) to get (n_sets,) values.
    """

    def __init__(
        self,
        model: SystemModel,
        linear: str = "marginalize",
        noise: WhiteNoise | None = None,
        include_prior: bool = True,
    ) -> None:
        if linear not in ("marginalize", "profile"):
            raise ValueError(f"linear must be 'marginalize' or 'profile', got {linear!r}")
        self.model = model
        self.linear = linear
        self.noise = noise or WhiteNoise()
        self.include_prior = include_prior
        n, m = model.t.size, model.n_linear
        self._const = -0.5 * (n - m if linear == "marginalize" else n) * _LOG_2PI

    def __call__(self, theta: np.ndarray) -> np.ndarray:
        if _fused_loglike is None or not isinstance(self.noise, WhiteNoise):
            return self.evaluate(theta)[0]
        theta = np.atleast_2d(np.asarray(theta, dtype=float))
        model = self.model
        with np.errstate(all="ignore"):
            arr = model.orbit_arrays(theta)
            lp = model.log_prior(theta, arr)
        ok = lp > -np.inf
        if ok.all():
            rows = slice(None)
        else:
            rows = np.flatnonzero(ok)
            if rows.size == 0:
                return lp
        w = arr["omega"][rows]
        parts = _fused_loglike(
            model.t, model.y, model.err2, model.inst_index, len(model.instruments),
            model.design, arr["tp"][rows], 2.0 * np.pi / arr["period"][rows],
            arr["ecc"][rows], np.cos(w), np.sin(w), arr["K"][rows], arr["jitter"][rows],
        )  # fmt: skip
        logL = parts[:, 0] + self._const
        if self.linear == "marginalize":
            logL = logL + parts[:, 1]
        value = logL + (lp[rows] if self.include_prior else 0.0)
        value[~np.isfinite(value)] = -np.inf
        out = np.full(theta.shape[0], -np.inf)
        out[rows] = value
        return out

    def evaluate(self, theta: np.ndarray):
        """(values, details) where details holds residuals, weights and the linear fit
        for the valid rows (used by the best fit and the posterior of the offsets)."""
        theta = np.atleast_2d(np.asarray(theta, dtype=float))
        model = self.model
        with np.errstate(all="ignore"):
            arr = model.orbit_arrays(theta)
            lp = model.log_prior(theta, arr)
            phys = model.as_dict(arr)
        out = np.full(theta.shape[0], -np.inf)
        rows = np.flatnonzero(np.isfinite(lp))
        details = {"rows": rows, "phys": phys}
        if rows.size == 0:
            return out, details
        resid = model.y[None, :] - keplerian_velocity(model, phys, rows)
        w = self.noise.inverse_variance(model, phys, rows)
        beta, red, logdet_A, chol = linear_solve(model, resid, w)
        chi2_raw = np.sum(w * resid * resid, axis=1)
        quad = chi2_raw - red
        logL = -0.5 * quad + 0.5 * np.sum(np.log(w), axis=1) + self._const
        if self.linear == "marginalize":
            logL = logL - 0.5 * logdet_A
        value = logL + (lp[rows] if self.include_prior else 0.0)
        out[rows] = np.where(np.isfinite(value), value, -np.inf)
        details.update(resid=resid, w=w, beta=beta, chol=chol, chi2=quad, log_prior=lp[rows])
        return out, details

    def linear_parameters(self, theta: np.ndarray, rng: np.random.Generator | None = None):
        """Offsets and trend terms for each row: the best values, or (with ``rng``) one
        draw from their conditional posterior N(A^-1 b, A^-1).

        Offsets are returned in the data's velocity scale (the per-instrument centring
        added back). Invalid rows give NaN.
        """
        theta = np.atleast_2d(np.asarray(theta, float))
        # in blocks of about two million residuals, so memory does not grow with
        # samples x points (the draws are the same as in one block: one stream)
        block = max(1, 2_000_000 // max(len(self.model.data), 1))
        if theta.shape[0] > block:
            return np.concatenate([
                self.linear_parameters(theta[i : i + block], rng)
                for i in range(0, theta.shape[0], block)
            ])  # fmt: skip
        _, det = self.evaluate(theta)
        m = self.model.n_linear
        out = np.full((theta.shape[0], m), np.nan)
        rows = det["rows"]
        if rows.size == 0:
            return out
        beta = det["beta"]
        if rng is not None:
            z = rng.standard_normal((rows.size, m, 1))
            # A = L L^T -> A^-1 = L^-T L^-1: x = L^-T z has covariance A^-1
            beta = beta + np.linalg.solve(np.swapaxes(det["chol"], 1, 2), z)[:, :, 0]
        n_inst = len(self.model.instruments)
        beta = beta.copy()
        beta[:, :n_inst] += self.model.rv_shift[None, :]
        out[rows] = beta
        return out
