"""The start grid of the best fit: at fixed period P, eccentricity e and time of
periastron tp the Keplerian curve is linear in (K cos omega, K sin omega),

    v = K cos omega (cos nu + e) - K sin omega sin nu,

so a grid over (e, tp) at a candidate period is solved by weighted least squares
together with the offsets and trend, exactly and cheaply (:func:`grid_starts`); its best
points start :func:`rvkep.optimize.fit`.
"""

from __future__ import annotations

import math

import numpy as np

from rvkep.data import RVData
from rvkep.orbit import tp_to_tc

__all__ = ["grid_starts", "GRID_ECC", "GRID_PHASES"]

#: eccentricities and periastron phases of the start grid
GRID_ECC = (
    0.02,
    0.2,
    0.4,
    0.6,
    0.8,
)  # not 0: the origin of the sqrt(e) plane is a stationary point
GRID_PHASES = 24


def _linear_fits(cos_nu, sin_nu, e, design, weights, residual):
    """At each grid point (rows of ``cos_nu``, ``sin_nu``), the weighted least-squares
    fit of K cos(omega), K sin(omega) and the offset/trend columns to ``residual``, and
    its chi-square."""
    G = e.size
    cols = np.concatenate(
        [
            np.stack([cos_nu + e[:, None], -sin_nu], axis=2),
            np.broadcast_to(design[None], (G, *design.shape)),
        ],
        axis=2,
    )  # (G, n, 2 + m)
    Wc = cols * weights[None, :, None]
    A = np.einsum("gni,gnj->gij", Wc, cols)
    b = np.einsum("gni,n->gi", Wc, residual)
    A += 1e-12 * np.eye(A.shape[1]) * np.trace(A, axis1=1, axis2=2)[:, None, None]
    coef = np.linalg.solve(A, b[:, :, None])[:, :, 0]
    model_v = np.einsum("gni,gi->gn", cols, coef)
    chi2 = np.sum(weights[None, :] * (residual[None, :] - model_v) ** 2, axis=1)
    return coef, chi2


def grid_starts(data: RVData, residual: np.ndarray, weights: np.ndarray, design: np.ndarray,
                period: float, n_best: int = 3, ecc_grid=GRID_ECC,
                n_phase: int = GRID_PHASES) -> list[dict]:  # fmt: skip
    """Best (e, tp) grid points at one period, solved linearly for K and omega.

    ``residual`` is what the other companions leave (centred velocities), ``weights``
    1 / (err^2 + jitter^2), ``design`` the offset/trend columns. Returns up to
    ``n_best`` dicts with ``period, tp, tc`` (minus the epoch), ``ecc``, ``omega``,
    ``K`` and ``chi2``, best first.

    Parameters
    ----------
    data : RVData
        The velocities.
    residual, weights : ndarray
        As above.
    design : ndarray
        The linear columns.
    period : float
        The trial period (days).
    n_best : int, optional
        How many grid points to return.
    ecc_grid : sequence of float, optional
        The eccentricities tried.
    n_phase : int, optional
        Periastron phases tried per eccentricity.

    Returns
    -------
    list of dict
        The best starts.
    """
    from rvkep.kepler import eccentric_anomaly

    t = data.t_rel
    phases = np.arange(n_phase) / n_phase
    e = np.repeat(np.asarray(ecc_grid, float), n_phase)
    tp = np.tile(phases * period, len(ecc_grid))
    M = 2 * np.pi * (t[None, :] - tp[:, None]) / period
    E = eccentric_anomaly(M, e[:, None])
    cosE, sinE = np.cos(E), np.sin(E)
    den = 1 - e[:, None] * cosE
    cos_nu = (cosE - e[:, None]) / den
    sin_nu = np.sqrt(1 - e[:, None] ** 2) * sinE / den
    coef, chi2 = _linear_fits(cos_nu, sin_nu, e, design, weights, residual)
    order = np.argsort(chi2)
    out = []
    for g in order:
        a_, b_ = coef[g, 0], coef[g, 1]  # K cos(omega), K sin(omega)
        K = float(math.hypot(a_, b_))
        omega = float(math.atan2(b_, a_) % (2 * math.pi))
        cand = {"period": period, "tp": float(tp[g]), "ecc": float(e[g]), "omega": omega, "K": K}
        cand["tc"] = float(tp_to_tc(cand["tp"], period, cand["ecc"], omega))
        cand["chi2"] = float(chi2[g])
        # skip near-duplicates (same e, neighbouring phase)
        if any(
            abs(c["ecc"] - cand["ecc"]) < 1e-9
            and abs(c["tp"] - cand["tp"]) <= period / n_phase * 1.01
            for c in out
        ):
            continue
        out.append(cand)
        if len(out) >= n_best:
            break
    return out
