"""Noise correlated within a night: white noise plus a shift shared by the points one
instrument takes in one night.

Stellar oscillations and granulation move the velocities of a solar-type star by
about 0.5-2 m/s over minutes to hours (Dumusque et al. 2011, A&A 525, A140), so the
exposures of one night are not independent: treated as white noise, a night of 13
exposures weighs like 13 epochs and the fit rewards following its wiggles. This model
adds, per instrument with dense nights, one amplitude ``night_<instrument>`` (m/s): the
covariance of two points of that instrument in the same night is sigma_n^2, so

    C = diag(err^2 + jitter^2) + sum over nights of sigma_n^2 1 1^T.

Why a block-constant term rather than a kernel with a timescale of minutes: the
likelihood is exact and O(N) per night by the Sherman-Morrison (rank-one Woodbury)
identity, with no timescale to fit from a few hours of data, and the offsets stay
marginalized analytically through the same C. With w = 1/(err^2 + jitter^2),
S = sum of w over a night and g = sigma_n^2 / (1 + sigma_n^2 S):

    C^-1 = W - sum g (W 1)(W 1)^T,   ln|C| = -sum ln w + sum ln(1 + sigma_n^2 S).

A *night* is a run of one instrument's points with gaps below :data:`NIGHT_GAP` days
(6 hours); an instrument has a night term when at least two of its nights hold
:data:`DENSE_NIGHT` or more points (:func:`dense_instruments`). ``--noise night`` asks
for this model; it is also the default when an instrument qualifies (and a model file
names no noise model). Periodograms of the search measure power through the same C
(:meth:`periodogram_power`), and the BIC uses its likelihood, so a dense night counts
as one epoch plus what its points add beyond the shared shift.

Prior of each amplitude: uniform on [0, max(10, 3 x the instrument's RMS)] m/s, the
jitter's default (:func:`rvkep.defaults.jitter_prior`).
"""

from __future__ import annotations

import numpy as np

from rvkep import defaults
from rvkep.noise.base import NoiseModel, NoiseParameter, covariance_power
from rvkep.noise.white import WhiteNoise

__all__ = ["NightNoise", "nights", "dense_instruments", "NIGHT_GAP", "DENSE_NIGHT"]

#: points of one instrument closer than this (days) belong to one night
NIGHT_GAP = 0.25
#: an instrument has a night term when two or more of its nights hold this many points
DENSE_NIGHT = 4

_LOG_2PI = float(np.log(2.0 * np.pi))


def nights(time: np.ndarray, inst_index: np.ndarray) -> np.ndarray:
    """The night of every point: an integer label, the same for one instrument's points
    whose gaps stay below NIGHT_GAP.

    Parameters
    ----------
    time : ndarray
        Times (days).
    inst_index : ndarray of int
        Each point's instrument.

    Returns
    -------
    ndarray of int
        The night label of each point.
    """
    time = np.asarray(time, float)
    inst_index = np.asarray(inst_index)
    order = np.lexsort((time, inst_index))
    t, k = time[order], inst_index[order]
    new = np.ones(t.size, bool)
    new[1:] = (np.diff(t) >= NIGHT_GAP) | (k[1:] != k[:-1])
    labels = np.empty(t.size, int)
    labels[order] = np.cumsum(new) - 1
    return labels


def dense_instruments(data) -> list[str]:
    """The instruments with at least two nights of DENSE_NIGHT or more points.

    Parameters
    ----------
    data : RVData
        The velocities.

    Returns
    -------
    list of str
        The instruments' names.
    """
    label = nights(data.time, data.instrument_index)
    out = []
    for k, name in enumerate(data.instruments):
        counts = np.bincount(label[data.instrument_index == k])
        if np.sum(counts >= DENSE_NIGHT) >= 2:
            out.append(name)
    return out


class _Blocks:
    """The nights of a model's points, sorted so each is contiguous: ``order``,
    ``starts`` (for ``np.add.reduceat``), and per night its instrument's parameter
    column (-1: no night term)."""

    def __init__(self, model):
        label = nights(model.t, model.inst_index)
        self.order = np.argsort(label, kind="stable")
        sorted_label = label[self.order]
        self.starts = np.flatnonzero(np.r_[True, sorted_label[1:] != sorted_label[:-1]])
        inst = model.inst_index[self.order][self.starts]
        # each night's instrument as a one-hot row: per-night sums -> per-instrument sums
        self.to_instrument = (inst[:, None] == np.arange(len(model.instruments))).astype(float)
        column = {name: j for j, name in enumerate(p.name for p in model.noise_parameters)}
        self.column = np.array([column.get(f"night_{model.instruments[k].name}", -1)
                                for k in inst])  # fmt: skip
        self.size = np.diff(np.r_[self.starts, label.size])
        self.night_of = label  # each point's night, in the model's order

    def sums(self, values: np.ndarray) -> np.ndarray:
        """Per-night sums over the last point axis of ``values`` (..., n_points)."""
        return np.add.reduceat(values[..., self.order], self.starts, axis=-1)


class NightNoise(NoiseModel):
    """White noise plus a shift shared within each night, per instrument with dense
    nights (see the module text)."""

    name = "night"
    parameter_keys: tuple[str, ...] = ()  # one per dense instrument: data-dependent

    def __init__(self):
        self._white = WhiteNoise()
        self._cache: dict = {}

    def parameters(self, data) -> list[NoiseParameter]:
        out = []
        for name in dense_instruments(data):
            prior = defaults.jitter_prior(data, name)
            out.append(NoiseParameter(f"night_{name}", prior, 0.5, "m/s",
                                      f"shift shared by {name}'s points of one night",
                                      (0.0, np.inf)))  # fmt: skip
        return out

    def _blocks(self, model) -> _Blocks:
        key = id(model)
        got = self._cache.get(key)
        if got is None or got[0] is not model:
            if len(self._cache) > 8:
                self._cache.clear()
            got = (model, _Blocks(model))
            self._cache[key] = got
        return got[1]

    def _amplitudes(self, model, phys: dict, rows, blocks: _Blocks) -> np.ndarray:
        """sigma_n^2 per row and night (n_rows, n_nights); 0 without a night term."""
        n_rows = np.size(rows) if not isinstance(rows, slice) else None
        cols = []
        for p in model.noise_parameters:
            cols.append(np.asarray(phys[f"noise.{p.name}"], float)[rows])
        if not cols:
            return np.zeros((n_rows or 1, blocks.starts.size))
        s2 = np.stack(cols, axis=1) ** 2  # (n_rows, n_parameters)
        s2 = np.concatenate([s2, np.zeros((s2.shape[0], 1))], axis=1)  # column -1: zero
        return s2[:, blocks.column]

    def effective_variance(self, model, phys: dict, rows: np.ndarray) -> np.ndarray:
        var = self._white.effective_variance(model, phys, rows)
        blocks = self._blocks(model)
        s2 = self._amplitudes(model, phys, rows, blocks)
        return var + s2[:, blocks.night_of]

    def loglike(self, model, phys: dict, rows: np.ndarray, resid: np.ndarray, linear: str):
        blocks = self._blocks(model)
        w = self._white.inverse_variance(model, phys, rows)  # (s, n)
        s2 = self._amplitudes(model, phys, rows, blocks)  # (s, b)
        X = model.design  # (n, m)
        S = blocks.sums(w)  # (s, b)
        g = s2 / (1.0 + s2 * S)
        wr = w * resid
        u = blocks.sums(wr)  # 1_b^T W r, (s, b)
        quad0 = np.sum(wr * resid, axis=1) - np.sum(g * u * u, axis=1)  # r^T C^-1 r
        if X.shape[1] == len(model.instruments):
            # offsets only: a night lies in one instrument's column, so A stays diagonal
            # (the common case, without the general solve)
            A_diag = w @ X - (g * S * S) @ blocks.to_instrument
            b = wr @ X - (g * S * u) @ blocks.to_instrument
            beta = b / A_diag
            quad = quad0 - np.sum(b * beta, axis=1)
            chol = np.sqrt(A_diag)[:, :, None] * np.eye(X.shape[1])[None]
        else:
            V = blocks.sums(np.swapaxes(w[:, :, None] * X[None], 1, 2))  # X^T W 1_b (s, m, b)
            b = wr @ X - np.einsum("sb,smb->sm", g * u, V)
            A = np.einsum("sn,nk,nl->skl", w, X, X) - np.einsum("sb,skb,slb->skl", g, V, V)
            chol = np.linalg.cholesky(A)
            y = np.linalg.solve(chol, b[:, :, None])[:, :, 0]
            beta = np.linalg.solve(np.swapaxes(chol, 1, 2), y[:, :, None])[:, :, 0]
            quad = quad0 - np.sum(y * y, axis=1)
        logdet_c = -np.sum(np.log(w), axis=1) + np.sum(np.log1p(s2 * S), axis=1)
        n, m = model.t.size, model.n_linear
        const = -0.5 * (n - m if linear == "marginalize" else n) * _LOG_2PI
        logL = -0.5 * quad - 0.5 * logdet_c + const
        if linear == "marginalize":
            logL = logL - np.sum(np.log(np.diagonal(chol, axis1=1, axis2=2)), axis=1)
        return logL, {"w": w, "beta": beta, "chol": chol, "chi2": quad}

    def solve(self, model, phys: dict, V: np.ndarray) -> np.ndarray:
        """C^-1 V for the first parameter set (V: (n,) or (n, k))."""
        blocks = self._blocks(model)
        w = self._white.inverse_variance(model, phys, np.array([0]))[0]
        s2 = self._amplitudes(model, phys, np.array([0]), blocks)[0]
        g = s2 / (1.0 + s2 * blocks.sums(w))
        V = np.asarray(V, float)
        WV = (w * V.T).T
        per_night = blocks.sums(WV.T).T if V.ndim > 1 else blocks.sums(WV)
        shared = (g * per_night.T).T if V.ndim > 1 else g * per_night
        return WV - (w * shared[blocks.night_of].T).T

    def periodogram_power(self, model, phys: dict, resid: np.ndarray, frequency: np.ndarray):
        """The search's power through C (see :func:`rvkep.noise.base.covariance_power`):
        a night's exposures count as one epoch plus what they add beyond the shift."""
        if not model.noise_parameters:
            return None
        return covariance_power(lambda V: self.solve(model, phys, V), model.design, model.t,
                                np.asarray(resid, float), frequency)  # fmt: skip
