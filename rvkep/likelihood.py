"""Log-likelihood and log-posterior, vectorized over many parameter sets.

The likelihood keeps two things apart:

* the *residuals* r = y - sum of Keplerians (what the orbits do not explain), from
  :func:`keplerian_velocity`; and
* the *noise model* (:mod:`rvkep.noise`), which scores residuals with the linear
  parameters (offsets, trend) marginalized or solved through its covariance; the
  model names it (``SystemModel.noise``, default :class:`WhiteNoise`: independent
  Gaussian errors, variance err^2 + jitter^2 of the point's instrument).

The sampler uses the marginalized form (the flat prior on the linear parameters makes
it a density up to a constant; fine for sampling, not for evidences), best fits the
profiled one. The posterior of the linear parameters given a sample is N(A^-1 b, A^-1)
(see :mod:`rvkep.noise.base` for A and b).

Invalid parameter sets (e >= 1, negative K or jitter, outside a prior) get -inf without
any warning; the orbits are only evaluated for valid rows.
"""

from __future__ import annotations

import math

import numpy as np

from rvkep.model import SystemModel, keplerian_velocity, orbit_velocity
from rvkep.noise.base import NoiseModel
from rvkep.noise.white import (
    WhiteNoise,
    _constant,
    _fused_logpost,
    _fused_profile_grad,
    linear_solve,
)

__all__ = [
    "WhiteNoise",
    "keplerian_velocity",
    "LogPosterior",
    "linear_solve",
    "curvature_scales",
]


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
        noise: NoiseModel | None = None,
        include_prior: bool = True,
    ) -> None:
        if linear not in ("marginalize", "profile"):
            raise ValueError(f"linear must be 'marginalize' or 'profile', got {linear!r}")
        self.model = model
        self.linear = linear
        self.noise = noise or model.noise_model
        self.include_prior = include_prior
        self._compiled = False  # not looked for yet (see _compiled_parts)

    def _prepare(self, theta: np.ndarray):
        """(theta as rows, orbit arrays, log prior) of a call."""
        theta = np.atleast_2d(np.asarray(theta, dtype=float))
        with np.errstate(all="ignore"):
            arr = self.model.orbit_arrays(theta)
            lp = self.model.log_prior(theta, arr)
        return theta, arr, lp

    def __call__(self, theta: np.ndarray) -> np.ndarray:
        parts = self._compiled_parts()
        if parts is not None:
            theta = np.ascontiguousarray(np.atleast_2d(np.asarray(theta, dtype=float)))
            if theta.ndim != 2 or theta.shape[1] != self.model.ndim:  # compiled: no checks
                raise ValueError(f"need rows of {self.model.ndim} coordinates, got shape "
                                 f"{theta.shape}")  # fmt: skip
            tables, data, flags = parts
            return _fused_logpost(theta, *tables, *data, *flags)
        theta, arr, lp = self._prepare(theta)
        model = self.model
        ok = lp > -np.inf
        if ok.all():
            rows = slice(None)
        else:
            rows = np.flatnonzero(ok)
            if rows.size == 0:
                return lp
        logL = None
        if model.dynamics == "keplerian":  # the compiled shortcuts sum Keplerians
            logL = self.noise.fast_loglike(model, arr, rows, self.linear)
        if logL is None:  # no compiled shortcut: the noise model's general path
            return self._general(theta, arr, lp)[0]
        value = logL + (lp[rows] if self.include_prior else 0.0)
        value[~np.isfinite(value)] = -np.inf
        out = np.full(theta.shape[0], -np.inf)
        out[rows] = value
        return out

    def _compiled_parts(self):
        """(tables, data, flags) for the compiled passes (the log posterior
        :func:`rvkep._posterior_numba.white_noise_logpost` and the best fit's
        :func:`~rvkep._posterior_numba.white_noise_profile_grad`): the model's coordinate
        and prior tables (:meth:`SystemModel.compiled_plan`), its data arrays and this
        posterior's (marginalized?, with prior?, normalizing constant); None
        when they do not apply (another noise model or prior kind, or no numba).
        Gathered once; plain arrays, so the posterior still pickles."""
        if self._compiled is False:
            self._compiled = None
            model = self.model
            plan = model.compiled_plan() if type(self.noise) is WhiteNoise else None
            if plan is not None and _fused_logpost is not None:
                data = (model.t, model.y, model.err2, model.inst_index, len(model.instruments),
                        model.design)  # fmt: skip
                flags = (self.linear == "marginalize", self.include_prior,
                         _constant(model, self.linear))  # fmt: skip
                self._compiled = (plan, data, flags)
        return self._compiled

    def gradient_function(self):
        """A function theta (ndim,) -> (log posterior, its gradient) for best fits: the
        profiled log posterior with the prior, in one compiled pass
        (:func:`rvkep._posterior_numba.white_noise_profile_grad`); None where that pass
        does not apply (another noise model or prior, a marginalized linear part, or
        the likelihood alone)."""
        parts = self._compiled_parts()
        if self.linear != "profile" or not self.include_prior or parts is None:
            return None
        tables, data, (_, _, const) = parts  # the profiled constant (linear is profile)
        ndim = self.model.ndim

        def value_and_gradient(theta):
            theta = np.ascontiguousarray(theta, dtype=float)
            if theta.shape != (ndim,):
                raise ValueError(f"need {ndim} coordinates, got shape {theta.shape}")
            return _fused_profile_grad(theta, *tables, *data, const)

        return value_and_gradient

    def evaluate(self, theta: np.ndarray):
        """(values, details) where details holds residuals, weights and the linear fit
        for the valid rows (used by the best fit and the posterior of the offsets)."""
        return self._general(*self._prepare(theta))

    def _general(self, theta: np.ndarray, arr: dict, lp: np.ndarray):
        """:meth:`evaluate` from the prepared orbit arrays and log prior."""
        model = self.model
        phys = model.as_dict(arr)
        out = np.full(theta.shape[0], -np.inf)
        rows = np.flatnonzero(np.isfinite(lp))
        details = {"rows": rows, "phys": phys}
        if rows.size == 0:
            return out, details
        resid = model.y[None, :] - orbit_velocity(model, {k: v[rows] for k, v in arr.items()})
        with np.errstate(all="ignore"):
            logL, det = self.noise.loglike(model, phys, rows, resid, self.linear)
        value = logL + (lp[rows] if self.include_prior else 0.0)
        out[rows] = np.where(np.isfinite(value), value, -np.inf)
        details.update(resid=resid, log_prior=lp[rows], **det)
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


def curvature_scales(post: LogPosterior, x: np.ndarray, lo, hi) -> np.ndarray:
    """Per-coordinate scales 1 / sqrt(d2f/dx2) from one vectorized call (the diagonal
    of the Hessian by central differences), so the optimizer sees a well-conditioned
    problem: a period known to 1e-5 and an offset known to 1 m/s become steps of one.

    Parameters
    ----------
    post : LogPosterior
        The posterior.
    x : ndarray, shape (ndim,)
        The point (a best fit).
    lo, hi : ndarray
        The coordinates' bounds (the difference steps stay inside them).

    Returns
    -------
    ndarray, shape (ndim,)
        The scales, clipped to [1e-9, 1e3].
    """
    ndim = x.size
    h = 1e-5 * np.maximum(np.abs(x), 1.0)
    pts = np.repeat(x[None, :], 2 * ndim + 1, axis=0)
    for j in range(ndim):
        pts[1 + 2 * j, j] = min(x[j] + h[j], hi[j])
        pts[2 + 2 * j, j] = max(x[j] - h[j], lo[j])
    f = -post(pts)
    scales = np.ones(ndim)
    for j in range(ndim):
        hu, hd = pts[1 + 2 * j, j] - x[j], x[j] - pts[2 + 2 * j, j]
        fu, fd = f[1 + 2 * j], f[2 + 2 * j]
        if hu > 0 and hd > 0 and np.all(np.isfinite([fu, fd, f[0]])):
            curv = 2.0 * (hd * fu + hu * fd - (hu + hd) * f[0]) / (hu * hd * (hu + hd))
            if curv > 0:
                scales[j] = 1.0 / math.sqrt(curv)
    return np.clip(scales, 1e-9, 1e3)
