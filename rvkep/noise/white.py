"""White noise: independent Gaussian errors with variance err^2 + jitter^2, the jitter
being one free parameter per instrument (``jitter.<instrument>``).

C is diagonal, so the linear solve uses weights w = 1 / (err^2 + jitter^2); with
offsets only, A is diagonal too. The sampler's hot path runs the whole likelihood in
one compiled loop (:func:`rvkep._kepler_numba.white_noise_loglike`) where numba loaded.
"""

from __future__ import annotations

import numpy as np

from rvkep.kepler import BACKEND
from rvkep.noise.base import NoiseModel

if BACKEND == "numba":
    from rvkep._kepler_numba import white_noise_loglike as _fused_loglike
    from rvkep._posterior_numba import white_noise_logpost as _fused_logpost
    from rvkep._posterior_numba import white_noise_profile_grad as _fused_profile_grad
else:  # pragma: no cover - exercised with RVKEP_PURE_NUMPY=1
    _fused_loglike = _fused_logpost = _fused_profile_grad = None

__all__ = ["WhiteNoise", "linear_solve"]

_LOG_2PI = float(np.log(2.0 * np.pi))


def linear_solve(model, resid: np.ndarray, w: np.ndarray):
    """Solve the linear part for each row with diagonal weights ``w``.

    Parameters
    ----------
    model : SystemModel
        The model (its linear columns).
    resid : ndarray, shape (n_rows, n)
        Residuals after the companions.
    w : ndarray, shape (n_rows, n)
        Weights 1 / (err^2 + jitter^2).

    Returns
    -------
    beta : ndarray, shape (n_rows, m)
        Best linear parameters A^-1 b (offsets on the centred scale).
    chi2_reduction : ndarray, shape (n_rows,)
        b^T A^-1 b.
    logdet_A : ndarray, shape (n_rows,)
        ln |A|.
    chol : ndarray, shape (n_rows, m, m)
        Lower Cholesky factor of A.
    """
    X = model.design
    if X.shape[1] == len(model.instruments):
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


def _constant(model, linear: str) -> float:
    n, m = model.t.size, model.n_linear
    return -0.5 * (n - m if linear == "marginalize" else n) * _LOG_2PI


class WhiteNoise(NoiseModel):
    """Independent Gaussian noise: variance err^2 + jitter^2 of each point's instrument."""

    name = "white"

    def effective_variance(self, model, phys: dict, rows: np.ndarray) -> np.ndarray:
        jit = np.stack([np.asarray(phys[f"jitter.{i.name}"])[rows] for i in model.instruments],
                       axis=1)  # fmt: skip
        return model.err2[None, :] + (jit * jit)[:, model.inst_index]

    def inverse_variance(self, model, phys: dict, rows: np.ndarray) -> np.ndarray:
        """Weights 1 / (err^2 + jitter^2), shape (n_rows, n_points)."""
        return 1.0 / self.effective_variance(model, phys, rows)

    def loglike(self, model, phys: dict, rows: np.ndarray, resid: np.ndarray, linear: str):
        w = self.inverse_variance(model, phys, rows)
        beta, red, logdet_A, chol = linear_solve(model, resid, w)
        quad = np.sum(w * resid * resid, axis=1) - red
        logL = -0.5 * quad + 0.5 * np.sum(np.log(w), axis=1) + _constant(model, linear)
        if linear == "marginalize":
            logL = logL - 0.5 * logdet_A
        return logL, {"w": w, "beta": beta, "chol": chol, "chi2": quad}

    def fast_loglike(self, model, arrays: dict, rows, linear: str) -> np.ndarray | None:
        if _fused_loglike is None:
            return None
        w = arrays["omega"][rows]
        parts = _fused_loglike(
            model.t, model.y, model.err2, model.inst_index, len(model.instruments),
            model.design, arrays["tp_rel"][rows], 2.0 * np.pi / arrays["period"][rows],
            arrays["ecc"][rows], np.cos(w), np.sin(w), arrays["K"][rows], arrays["jitter"][rows],
        )  # fmt: skip
        logL = parts[:, 0] + _constant(model, linear)
        if linear == "marginalize":
            logL = logL + parts[:, 1]
        return logL
