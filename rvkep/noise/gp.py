"""Stellar activity as a Gaussian process: a quasi-periodic signal shared by every
instrument, beside each instrument's own white jitter.

The covariance of two velocities a time tau apart is

    C(tau) = A^2 exp(-|tau| / L) { (1 - f) [cos(2 pi tau / P) + P / (2 pi L) sin(2 pi |tau| / P)]
                                  +      f [cos(4 pi tau / P) + P / (4 pi L) sin(4 pi |tau| / P)] }
             + delta(tau) (err^2 + jitter^2 of the point's instrument)

with four parameters of its own (``noise.<name>``):

=====================  ====  =========================================================
``amplitude``          m/s   A, the activity signal's standard deviation
``rotation_period``    d     P, the star's rotation period
``evolution_time``     d     L, how long spots live: the signal stays coherent over L
``harmonic_fraction``        f, the share of the variance at the first harmonic P/2
=====================  ====  =========================================================

Each bracket is one stochastically driven damped harmonic oscillator (Foreman-Mackey
et al. 2017, eq. 23) oscillating at P and at P/2, both decaying over L; their sum is
the celerite form of the quasi-periodic kernel of Haywood et al. (2014) and Rajpaul et
al. (2015) (the exponential-sine-squared times a decay), with the harmonic fraction in
the role of that kernel's harmonic-complexity parameter: f near 0 is a near-sinusoidal
rotation signal, larger f a spottier, more structured one. In the oscillator's own
parameters: Q = 1/2 sqrt(1 + (2 pi n L / P)^2) and w0 = 2 pi n / (P sqrt(1 - 1/(4 Q^2)))
for the n-th harmonic, sigma^2 = A^2 (1 - f) and A^2 f. celerite2 factorizes C in O(N)
(Foreman-Mackey et al. 2017), so the likelihood costs O(N), not O(N^3).

Offsets and the trend are marginalized (or solved) through C exactly as for white noise
(:mod:`rvkep.noise.base`): C^-1 is applied to the residuals and the design matrix's
columns together.

Default priors (:meth:`QuasiPeriodicGP.parameters`): A uniform on [0, max(10, 3 x RMS)]
m/s, like the jitters; P log-uniform from 1.1 d (``ROTATION_MIN``, above the daily
alias) to half the baseline (at most 100 d); L log-uniform from 1 d to twice the
baseline (at least 100 d); f uniform on [0, 1]. A model file's ``[noise]`` table
replaces any of them.

References
----------
.. [1] Foreman-Mackey, D., Agol, E., Ambikasaran, S. & Angus, R. (2017), AJ 154, 220
   (celerite; the oscillator term, eq. 23).
.. [2] Haywood, R. D. et al. (2014), MNRAS 443, 2517 (quasi-periodic activity kernel).
.. [3] Rajpaul, V. et al. (2015), MNRAS 452, 2269.
"""

from __future__ import annotations

import numpy as np

from rvkep import defaults
from rvkep.noise.base import NoiseModel, NoiseParameter, covariance_power
from rvkep.noise.white import WhiteNoise
from rvkep.priors import LogUniform, Uniform

__all__ = ["QuasiPeriodicGP", "covariance"]

_LOG_2PI = float(np.log(2.0 * np.pi))
#: the shortest rotation period the default prior allows: 10% above the sidereal day,
#: the spectral window's strongest peak for data taken from the ground at night, so
#: the GP cannot settle on the sampling's daily alias (an invented active star's GP
#: rotation went to 1.04 d from a prior starting at 1 d); its fractions (1/2, 1/3 d)
#: lie below it. A star rotating faster needs a model file's [noise] rotation_period
ROTATION_MIN = 1.1
#: rotation periods tried for the start value, per decade
_GRID_PER_DECADE = 12
#: frequencies whose design columns are solved through C at once in the periodogram
_FREQ_BLOCK = 2048
#: the white part of C (err^2 + jitter^2) is the white-noise model's variance
_WHITE = WhiteNoise()


def _driver():
    try:
        from celerite2 import driver
    except ImportError:  # pragma: no cover - celerite2 is a dependency
        from rvkep.errors import OptionError

        raise OptionError(
            "the Gaussian-process noise model needs celerite2: pip install celerite2"
        ) from None
    return driver


class _Factor:
    """The celerite factorization of C = activity + diag(white) at times ``t`` (sorted),
    through celerite2's compiled driver (Foreman-Mackey et al. 2017, sec. 5): the two
    oscillators of the module text as celerite coefficients
    k(tau) = sum_n exp(-c_n tau) [a_n cos(d_n tau) + b_n sin(d_n tau)] with
    a_n = A^2 share_n, c_n = 1 / L, d_n = 2 pi n / P, b_n = a_n / (d_n L)."""

    def __init__(self, t, amplitude, rotation_period, evolution_time, harmonic_fraction, white):
        drv = _driver()
        f = min(max(harmonic_fraction, 0.0), 1.0)
        a = amplitude * amplitude * np.array([1.0 - f, f])
        d = 2.0 * np.pi * np.array([1.0, 2.0]) / rotation_period
        b = a / (d * evolution_time)
        c = np.full(2, 1.0 / evolution_time)
        n = t.size
        diag, U, V = drv.get_celerite_matrices(np.empty(0), a, b, d, t, white, np.empty(n),
                                               np.empty((n, 4)), np.empty((n, 4)))  # fmt: skip
        self.t, self.c, self.U = t, np.repeat(c, 2), U
        self.d, self.W = drv.factor(t, self.c, diag, U, V, diag, V.copy())
        self.log_det = float(np.sum(np.log(self.d)))
        self._drv = drv

    def solve(self, Y: np.ndarray) -> np.ndarray:
        """C^-1 Y for Y of shape (n, k)."""
        z = np.array(Y, dtype=np.float64, order="C", copy=True)
        z = self._drv.solve_lower(self.t, self.c, self.U, self.W, z, z)
        z /= self.d[:, None]
        return self._drv.solve_upper(self.t, self.c, self.U, self.W, z, z)


def covariance(tau: np.ndarray, amplitude: float, rotation_period: float,
               evolution_time: float, harmonic_fraction: float) -> np.ndarray:  # fmt: skip
    """The activity covariance C(tau) of the module text, directly (no celerite2): the
    dense reference the O(N) path is checked against.

    Parameters
    ----------
    tau : ndarray
        Time lags (days).
    amplitude : float
        Amplitude (m/s).
    rotation_period, evolution_time : float
        The star's rotation and the spots' lifetime (days).
    harmonic_fraction : float
        Share of the first harmonic.

    Returns
    -------
    ndarray
        C(tau) (m^2/s^2), shaped like ``tau``.
    """
    tau = np.abs(np.asarray(tau, float))
    P, L, f = rotation_period, evolution_time, harmonic_fraction
    out = np.zeros_like(tau)
    for n, share in ((1, 1.0 - f), (2, f)):
        phase = 2.0 * np.pi * n * tau / P
        out += share * (np.cos(phase) + P / (2.0 * np.pi * n * L) * np.sin(phase))
    return amplitude**2 * np.exp(-tau / L) * out


class QuasiPeriodicGP(NoiseModel):
    """Quasi-periodic stellar activity (Gaussian process) plus white jitter per
    instrument; see the module text."""

    name = "gp"
    parameter_keys = ("amplitude", "rotation_period", "evolution_time", "harmonic_fraction")

    # -- parameters -------------------------------------------------------------

    def parameters(self, data) -> list[NoiseParameter]:
        rms = float(np.std(defaults.centred_velocities(data))) if len(data) > 1 else 10.0
        span = float(np.ptp(data.time))
        p_hi = max(min(100.0, 0.5 * span), 2.0 * ROTATION_MIN)
        l_hi = max(100.0, 2.0 * span)
        return [
            NoiseParameter("amplitude", Uniform(0.0, max(10.0, 3.0 * rms)), max(0.5 * rms, 0.1),
                           "m/s", "activity signal's standard deviation", (0.0, np.inf)),
            NoiseParameter("rotation_period", LogUniform(ROTATION_MIN, p_hi),
                           float(np.sqrt(ROTATION_MIN * p_hi)),
                           "d", "stellar rotation period", (1e-3, np.inf)),
            NoiseParameter("evolution_time", LogUniform(1.0, l_hi), float(np.sqrt(l_hi)),
                           "d", "spot lifetime (coherence time of the signal)", (1e-3, np.inf)),
            NoiseParameter("harmonic_fraction", Uniform(0.0, 1.0), 0.3, "",
                           "share of the variance at half the rotation period", (0.0, 1.0)),
        ]  # fmt: skip

    def initial(self, model):
        """The model with start values chosen from the data: a grid over the rotation
        period (12 per decade inside its prior) and two evolution times (1 and 3
        rotations), scored by the profile likelihood of the velocities with the
        companions' start orbits removed. Starts only; the fits decide."""
        from dataclasses import replace

        from rvkep.model import keplerian_velocity

        pars = {p.name: p for p in model.noise_parameters}
        fixed = {k: p.prior.is_fixed for k, p in pars.items()}
        if fixed["rotation_period"]:
            return model
        lo, hi = pars["rotation_period"].prior.bounds
        lo, hi = max(lo, 0.5), min(hi, 1e4)
        n = max(2, int(np.ceil(_GRID_PER_DECADE * np.log10(hi / lo))) + 1)
        periods = np.geomspace(lo, hi, n)
        phys0 = model.to_physical(model.start_theta()[None, :])
        resid = model.y[None, :] - keplerian_velocity(model, phys0)
        l_lo, l_hi = pars["evolution_time"].prior.bounds
        best, best_at = -np.inf, None
        for P in periods:
            for mult in (1.0, 3.0):
                L = pars["evolution_time"].start if fixed["evolution_time"] else mult * P
                L = float(np.clip(L, l_lo, l_hi))
                phys = dict(phys0, **{"noise.rotation_period": np.array([P]),
                                      "noise.evolution_time": np.array([L])})  # fmt: skip
                logL, _ = self.loglike(model, phys, np.array([0]), resid, "profile")
                if np.isfinite(logL[0]) and logL[0] > best:
                    best, best_at = logL[0], (P, L)
        if best_at is None:
            return model
        starts = {"rotation_period": best_at[0], "evolution_time": best_at[1]}
        new = [replace(p, start=starts[p.name]) if p.name in starts and not fixed[p.name] else p
               for p in model.noise_parameters]  # fmt: skip
        return replace(model, noise_parameters=new)

    # -- covariance -----------------------------------------------------------

    def _factor(self, model, phys: dict, row: int) -> _Factor:
        """The factorized covariance of one parameter set."""
        g = {k: float(np.asarray(phys[f"noise.{k}"])[row]) for k in self.parameter_keys}
        white = _WHITE.effective_variance(model, phys, np.array([row]))[0]
        return _Factor(model.t, **g, white=white)

    def effective_variance(self, model, phys: dict, rows: np.ndarray) -> np.ndarray:
        """The diagonal of C: err^2 + jitter^2 (the white part) + amplitude^2."""
        amp = np.asarray(phys["noise.amplitude"])[rows]
        return _WHITE.effective_variance(model, phys, rows) + (amp * amp)[:, None]

    def loglike(self, model, phys: dict, rows: np.ndarray, resid: np.ndarray, linear: str):
        n, m = model.t.size, model.n_linear
        X = model.design
        logL = np.full(rows.size, -np.inf)
        beta = np.full((rows.size, m), np.nan)
        chol = np.tile(np.eye(m), (rows.size, 1, 1))
        chi2 = np.full(rows.size, np.inf)
        for i, row in enumerate(rows):
            try:
                C = self._factor(model, phys, int(row))
                Z = C.solve(np.column_stack([resid[i], X]))
            except (np.linalg.LinAlgError, ValueError, FloatingPointError):
                continue
            logdet_C = C.log_det
            b = X.T @ Z[:, 0]
            A = X.T @ Z[:, 1:]
            try:
                L = np.linalg.cholesky(0.5 * (A + A.T))
            except np.linalg.LinAlgError:
                continue
            y = np.linalg.solve(L, b)
            quad = float(resid[i] @ Z[:, 0] - y @ y)
            value = -0.5 * quad - 0.5 * logdet_C - 0.5 * n * _LOG_2PI
            if linear == "marginalize":
                value += -float(np.sum(np.log(np.diag(L)))) + 0.5 * m * _LOG_2PI
            logL[i], chi2[i], chol[i] = value, quad, L
            beta[i] = np.linalg.solve(L.T, y)
        return logL, {"beta": beta, "chol": chol, "chi2": chi2}

    # -- what the search and the figures ask -----------------------------------

    def periodogram_power(self, model, phys: dict, resid: np.ndarray,
                          frequency: np.ndarray) -> np.ndarray:  # fmt: skip
        """Power of a sinusoid added to the residuals of one parameter set, measured
        through C: the fraction of chi^2 = r^T C^-1 r (after the offsets and trend)
        it removes, so the activity the process explains is not proposed again as a
        companion. The generalized Lomb-Scargle power (Zechmeister & Kuerster 2009)
        is the special case of a diagonal C."""
        C = self._factor(model, phys, 0)
        return covariance_power(C.solve, model.design, model.t, np.asarray(resid, float),
                                frequency)  # fmt: skip

    def conditional_mean(self, model, phys: dict, resid: np.ndarray,
                         t: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray]:  # fmt: skip
        """(mean, standard deviation) of the activity signal given the residuals of
        one parameter set (offsets and trend already removed), at ``t`` (in the data's
        time system; default the data times): k*^T C^-1 r and k(0) - k*^T C^-1 k*."""
        C = self._factor(model, phys, 0)
        g = {k: float(np.asarray(phys[f"noise.{k}"])[0]) for k in self.parameter_keys}
        t_out = model.t if t is None else np.asarray(t, float) - model.data.epoch
        out = []
        for s in range(0, t_out.size, _FREQ_BLOCK):  # blocks bound the (n, block) arrays
            K = covariance(model.t[:, None] - t_out[None, s : s + _FREQ_BLOCK], **g)
            CK = C.solve(K)
            mean = CK.T @ np.asarray(resid, float)
            var = g["amplitude"] ** 2 - np.einsum("nk,nk->k", K, CK)
            out.append((mean, np.sqrt(np.maximum(var, 0.0))))
        return np.concatenate([m for m, _ in out]), np.concatenate([v for _, v in out])
