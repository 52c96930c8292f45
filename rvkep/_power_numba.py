"""The compiled Keplerian periodogram (numba): at each trial frequency, the best
chi-square drop of one Keplerian over a grid of eccentricities and periastron phases
(:func:`rvkep.keplerian_periodogram.keplerian_periodogram` prepares its arguments).

Cached like the other kernels (:mod:`rvkep._kernel_cache`); it calls no other kernel.
"""

import math

import numba
import numpy as np

from rvkep._constants import TWO_PI as _TWO_PI
from rvkep._kepler_numba import _C, _IV, _M, _V, _sig
from rvkep._kernel_cache import jit

__all__ = ["keplerian_power", "SIGNATURES"]


@jit(error_model="numpy", parallel=True)
def keplerian_power(t, y, w, starts, X, n_inst, G, freq, ecc, n_phase, table):
    """Keplerian periodogram: at each frequency, the largest weighted chi-square drop
    of one Keplerian over a grid of eccentricities and periastron phases, its two
    linear coefficients (K cos omega, K sin omega) solved exactly beside the offsets
    and trend columns.

    The points are grouped by instrument: instrument k holds points
    ``starts[k]:starts[k+1]``. ``y`` must be free of the linear part already
    (``D^T W y = 0`` for the offsets and trend columns ``D``), ``G`` = (D^T W D)^-1
    (m x m), ``X`` (n, m) holds D's trend columns after the ``n_inst`` instrument
    columns. ``ecc`` (E,) and ``n_phase`` (E,): the eccentricities and how many
    periastron phases each is tried at. ``table`` (E, L + 1, 2): cos(nu) + e and
    -sin(nu) at mean anomalies 2 pi k / L (L a power of two), read with linear
    interpolation; e = 0 uses cos and sin directly. Returns (drop, best eccentricity
    index, best phase) per frequency.

    Parameters
    ----------
    t, y, w : ndarray, shape (n,)
        Times (days), velocities with the linear part removed (m/s), weights 1/sigma^2.
    starts : ndarray of int, shape (n_inst + 1,)
        First point of each instrument's group, and n.
    X : ndarray, shape (n, m)
        The linear part's columns (instrument indicators first, then the trend).
    n_inst : int
        Number of instruments.
    G : ndarray, shape (m, m)
        (D^T W D)^-1 of the linear part.
    freq : ndarray, shape (F,)
        Trial frequencies (1/day).
    ecc : ndarray, shape (E,)
        Trial eccentricities.
    n_phase : ndarray of int, shape (E,)
        Periastron phases tried at each eccentricity.
    table : ndarray, shape (E, L + 1, 2)
        Tabulated cos(nu) + e and -sin(nu) over mean anomaly.

    Returns
    -------
    drop : ndarray, shape (F,)
        Largest chi-square drop at each frequency.
    best_e, best_phase : ndarray of int, shape (F,)
        Index of the eccentricity and the phase that gave it.
    """
    F = freq.size
    npts = t.size
    m = X.shape[1]
    L = table.shape[1] - 1
    mask = L - 1
    XT = np.ascontiguousarray(X.T)  # trend columns as rows: contiguous inner loops
    wy = w * y
    drop = np.zeros(F)
    best_e = np.zeros(F, dtype=np.int64)
    best_phase = np.zeros(F)
    for fi in numba.prange(F):
        f = freq[fi]
        p = np.empty(npts)
        for i in range(npts):
            x = f * t[i]
            p[i] = (x - math.floor(x)) * L
        c = np.empty(npts)
        s = np.empty(npts)
        wc = np.empty(npts)
        ws = np.empty(npts)
        pc = np.zeros(m)
        ps = np.zeros(m)
        for ei in range(ecc.size):
            e = ecc[ei]
            nph = n_phase[ei]
            for j in range(nph):
                # the two curves at every point: first the anomalies, then the sums
                if e == 0.0:
                    for i in range(npts):
                        ang = _TWO_PI * p[i] / L
                        c[i] = math.cos(ang)
                        s[i] = -math.sin(ang)
                else:
                    shift = L * j / nph
                    for i in range(npts):
                        u = p[i] - shift + L
                        fl = math.floor(u)
                        fr = u - fl
                        q = np.int64(fl) & mask
                        c[i] = table[ei, q, 0] + fr * (table[ei, q + 1, 0] - table[ei, q, 0])
                        s[i] = table[ei, q, 1] + fr * (table[ei, q + 1, 1] - table[ei, q, 1])
                scc = 0.0
                sss = 0.0
                scs = 0.0
                scy = 0.0
                ssy = 0.0
                for i in range(npts):
                    ci = c[i]
                    si = s[i]
                    wci = w[i] * ci
                    wsi = w[i] * si
                    wc[i] = wci
                    ws[i] = wsi
                    scc += wci * ci
                    sss += wsi * si
                    scs += wci * si
                    scy += wy[i] * ci
                    ssy += wy[i] * si
                for k in range(n_inst):
                    ck = 0.0
                    sk = 0.0
                    for i in range(starts[k], starts[k + 1]):
                        ck += wc[i]
                        sk += ws[i]
                    pc[k] = ck
                    ps[k] = sk
                for a in range(n_inst, m):
                    ca = 0.0
                    sa = 0.0
                    for i in range(npts):
                        ca += wc[i] * XT[a, i]
                        sa += ws[i] * XT[a, i]
                    pc[a] = ca
                    ps[a] = sa
                a11 = scc
                a12 = scs
                a22 = sss
                for a in range(m):
                    gc = 0.0
                    gs = 0.0
                    for b in range(m):
                        gc += G[a, b] * pc[b]
                        gs += G[a, b] * ps[b]
                    a11 -= pc[a] * gc
                    a12 -= pc[a] * gs
                    a22 -= ps[a] * gs
                det = a11 * a22 - a12 * a12
                if det > 1e-12 * (a11 * a22 + 1e-300):
                    d = (a22 * scy * scy - 2.0 * a12 * scy * ssy + a11 * ssy * ssy) / det
                    if d > drop[fi]:
                        drop[fi] = d
                        best_e[fi] = ei
                        best_phase[fi] = j / nph
    return drop, best_e, best_phase


#: kernel name -> the signatures rvkep calls it with
SIGNATURES = {
    "keplerian_power": [_sig(_V, _V, _V, _IV, _M, "int64", _M, _V, _V, _IV, _C)],
}
