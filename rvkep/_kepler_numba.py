"""Compiled (numba) kernels of :mod:`rvkep.kepler`: plain loops, no library calls.

Same algorithm as the numpy path (Markley 1995), but three library calls are replaced
by arithmetic that the compiler can pipeline and vectorize: sin/cos of the starter (E1
lies in [0, pi], so a fixed polynomial about pi/2 needs no range reduction) and the
cube root (a bit-level first guess in single precision, refined by two Halley steps to
1e-13, far below what the starter needs; the argument is never below 1e-21 for any
double e < 1, well inside single precision). Branches are written as selects and
numba's division checks are off (``error_model="numpy"``), so the loops vectorize.

The functions are defined at module level so that numba's on-disk cache finds them.
The cache lives in a user folder (:mod:`rvkep._kernel_cache`), never in the package;
when no folder is writable, the kernels compile in each process instead of failing.
"""

import math

import numpy as np
from llvmlite import ir
from numba import types
from numba.extending import intrinsic

from rvkep._constants import ALPHA_A as _ALPHA_A
from rvkep._constants import ALPHA_B as _ALPHA_B
from rvkep._constants import PI as _PI
from rvkep._constants import SMALL_E as _SMALL_E
from rvkep._constants import TWO_PI as _TWO_PI
from rvkep._kernel_cache import cache_folder, jit

__all__ = [
    "ecc_anom_flat",
    "rv_flat",
    "rv_rows",
    "white_noise_loglike",
]

# Taylor coefficients of sin and cos; on |x| <= pi/2 the first omitted terms are below
# 2e-18, so these reproduce libm to rounding (tested against numpy).
_SIN_C = tuple((-1) ** k / math.factorial(2 * k + 1) for k in range(11))
_COS_C = tuple((-1) ** k / math.factorial(2 * k) for k in range(12))
_HALF_PI = 0.5 * math.pi
# first guess of a single-precision cube root from its bits: exponent divided by three
_CBRT_BIAS32 = 709921077


#: The kernels are compiled once and cached in a user folder (see rvkep._kernel_cache),
#: never in the package's own folder.
KERNELS_FOLDER = cache_folder()


@intrinsic
def _as_int(typingctx, x):
    def codegen(context, builder, signature, args):
        return builder.bitcast(args[0], ir.IntType(32))

    return types.int32(types.float32), codegen


@intrinsic
def _as_float(typingctx, x):
    def codegen(context, builder, signature, args):
        return builder.bitcast(args[0], ir.FloatType())

    return types.float32(types.int32), codegen


s0, s1, s2, s3, s4, s5, s6, s7, s8, s9, s10 = _SIN_C
c0, c1, c2, c3, c4, c5, c6, c7, c8, c9, c10, c11 = _COS_C


# fmt: off
@jit(inline="always", error_model="numpy")
def sincos_0_pi(E):
    """(sin E, cos E) for 0 <= E <= pi, from Taylor series about pi/2 (Horner form)."""
    x = E - _HALF_PI
    z = x * x
    sx = x * (s0 + z * (s1 + z * (s2 + z * (s3 + z * (s4 + z * (s5 + z * (s6 + z * (
        s7 + z * (s8 + z * (s9 + z * s10))))))))))
    cx = c0 + z * (c1 + z * (c2 + z * (c3 + z * (c4 + z * (c5 + z * (c6 + z * (
        c7 + z * (c8 + z * (c9 + z * (c10 + z * c11))))))))))
    return cx, -sx
# fmt: on


@jit(inline="always", error_model="numpy")
def two_thirds_power(x):
    bits = _as_int(np.float32(x))
    y = np.float64(_as_float(np.int32(bits // np.int32(3) + np.int32(_CBRT_BIAS32))))
    y3 = y * y * y
    y = y * (y3 + 2.0 * x) / (2.0 * y3 + x)
    y3 = y * y * y
    y = y * (y3 + 2.0 * x) / (2.0 * y3 + x)
    return y * y


@jit(inline="always", error_model="numpy")
def markley(M, e):
    m = abs(M)
    sign = math.copysign(1.0, M)
    alpha = _ALPHA_A + _ALPHA_B * (_PI - m) / (1.0 + e)
    d = 3.0 * (1.0 - e) + alpha * e
    q = 2.0 * alpha * d * (1.0 - e) - m * m
    r = 3.0 * alpha * d * (d - 1.0 + e) * m + m * m * m
    w = two_thirds_power(abs(r) + math.sqrt(q * q * q + r * r))
    E1 = (2.0 * r * w / (w * w + w * q + q * q) + m) / d
    s1, c1 = sincos_0_pi(E1)
    x2 = E1 * E1
    series = (
        E1
        * x2
        * (
            1.0 / 6.0
            - x2 * (1.0 / 120.0 - x2 * (1.0 / 5040.0 - x2 * (1.0 / 362880.0 - x2 / 39916800.0)))
        )
    )
    f0_small = (1.0 - e) * E1 + e * series - m
    f0_large = E1 - e * s1 - m
    f0 = f0_small if E1 < _SMALL_E else f0_large
    f1 = 1.0 - e * c1
    f2 = e * s1
    f3 = 1.0 - f1
    d3 = -f0 / (f1 - 0.5 * f0 * f2 / f1)
    d4 = -f0 / (f1 + 0.5 * d3 * f2 + d3 * d3 * f3 / 6.0)
    dE = -f0 / (f1 + 0.5 * d4 * f2 + d4 * d4 * f3 / 6.0 - d4 * d4 * d4 * f2 / 24.0)
    d2 = dE * dE
    cd = 1.0 - d2 * (0.5 - d2 / 24.0)
    sd = dE * (1.0 - d2 * (1.0 / 6.0 - d2 / 120.0))
    return sign * (E1 + dE), sign * (s1 * cd + c1 * sd), c1 * cd - s1 * sd


@jit(inline="always", error_model="numpy")
def rv_point(t, tp, n, e, cosw, sinw, K, root):
    M = n * (t - tp)
    M = M - math.floor((M + _PI) / _TWO_PI) * _TWO_PI
    _, sE, cE = markley(M, e)
    den = 1.0 - e * cE
    return K * ((cE - e) * cosw - root * sE * sinw) / den + K * e * cosw


@jit(error_model="numpy")
def ecc_anom_flat(M, e, out):
    """Eccentric anomalies of many points, written into ``out`` (Kepler's equation by
    Markley's starter and one correction, :func:`markley`, after reducing M to [-pi, pi)).

    Parameters
    ----------
    M, e : ndarray, shape (n,)
        Mean anomalies (radians, any range) and eccentricities (0 <= e < 1), point by point.
    out : ndarray, shape (n,)
        Filled with E; the whole turns taken off M are added back.

    References
    ----------
    .. [1] Markley, F. L. (1995), Celestial Mechanics 63, 101.
    """
    for i in range(M.size):
        k = math.floor((M[i] + _PI) / _TWO_PI)
        out[i] = markley(M[i] - k * _TWO_PI, e[i])[0] + k * _TWO_PI


@jit(error_model="numpy")
def rv_flat(t, tp, n, e, cosw, sinw, K, out):
    """Keplerian velocity of one orbit per point, written into ``out``.

    Parameters
    ----------
    t : ndarray, shape (n,)
        Times (days).
    tp, n, e, cosw, sinw, K : ndarray, shape (n,)
        Time of periastron (days), mean motion (rad/day), eccentricity, cos and sin of the
        star's argument of periastron and semi-amplitude (m/s), each point its own.
    out : ndarray, shape (n,)
        Filled with the line-of-sight velocity (m/s).
    """
    for i in range(t.size):
        out[i] = rv_point(
            t[i], tp[i], n[i], e[i], cosw[i], sinw[i], K[i], math.sqrt(1.0 - e[i] * e[i])
        )


@jit(error_model="numpy")
def rv_rows(t, tp, n, e, cosw, sinw, K, out):
    """Keplerian velocities of S orbits at the same times, written into ``out``.

    Parameters
    ----------
    t : ndarray, shape (n,)
        Times (days).
    tp, n, e, cosw, sinw, K : ndarray, shape (S,)
        Time of periastron (days), mean motion (rad/day), eccentricity, cos and sin of the
        star's argument of periastron and semi-amplitude (m/s) of each orbit.
    out : ndarray, shape (S, n)
        Row j filled with orbit j's velocity at every time (m/s).
    """
    for j in range(tp.size):
        root = math.sqrt(1.0 - e[j] * e[j])
        tpj, nj, ej, cj, sj, Kj = tp[j], n[j], e[j], cosw[j], sinw[j], K[j]
        for i in range(t.size):
            out[j, i] = rv_point(t[i], tpj, nj, ej, cj, sj, Kj, root)


@jit(error_model="numpy")
def white_noise_loglike(t, y, err2, inst, n_inst, X, tp, n, e, cosw, sinw, K, jit):
    """Marginal and profile Gaussian log-likelihoods for many parameter sets at once.

    One pass per set: the Keplerian sum, residuals, weights 1 / (err^2 + jitter^2), the
    normal equations A = X^T W X, b = X^T W r of the linear part, then a Cholesky solve
    of the small m x m system. Shapes: companions' parameters (S, n_comp), ``jit``
    (S, n_inst), ``X`` (n, m) with the instrument indicator columns first (``inst``
    gives each point's column, so only the trend columns are read from ``X``).
    Returns (S, 2): columns are -1/2 (r^T W r - b^T A^-1 b) + 1/2 sum ln w, and
    -1/2 ln|A|.
    The sum of ln w is taken as the log of products of 16 weights, one log call per 16
    points.

    Parameters
    ----------
    t, y, err2 : ndarray, shape (n,)
        Times (days), velocities (m/s) and squared measurement errors.
    inst : ndarray of int, shape (n,)
        Each point's instrument (its column in ``X``); ``n_inst`` instruments in all.
    n_inst : int
        Number of instruments.
    X : ndarray, shape (n, m)
        Design matrix of the linear part (instrument indicators, then trend columns).
    tp, n, e, cosw, sinw, K : ndarray, shape (S, n_comp)
        The companions' elements, one row per parameter set (as :func:`rv_rows`).
    jit : ndarray, shape (S, n_inst)
        Jitters (m/s).

    Returns
    -------
    ndarray, shape (S, 2)
        Per set the profile part and -1/2 ln|A| (see above).
    """
    S, n_comp = tp.shape
    npts = t.size
    m = X.shape[1]
    out = np.empty((S, 2))
    resid = np.empty(npts)
    w = np.empty(npts)
    A = np.zeros((m, m))
    b = np.zeros(m)
    L = np.zeros((m, m))
    for s in range(S):
        out[s, 0], out[s, 1] = _white_row(
            t, y, err2, inst, n_inst, X, tp[s], n[s], e[s], cosw[s], sinw[s], K[s], jit[s],
            resid, w, A, b, L,
        )  # fmt: skip
    return out


@jit(error_model="numpy", inline="always")
def _white_row(t, y, err2, inst, n_inst, X, tp, n, e, cosw, sinw, K, jit, resid, w, A, b, L):
    """One parameter set of :func:`white_noise_loglike` (companions' parameters (n_comp,),
    ``jit`` (n_inst,)), in the scratch arrays given; returns its two columns."""
    npts = t.size
    m = X.shape[1]
    for i in range(npts):
        resid[i] = y[i]
    for c in range(tp.size):
        ec = e[c]
        root = math.sqrt(1.0 - ec * ec)
        tpc, nc, cc, sc, Kc = tp[c], n[c], cosw[c], sinw[c], K[c]
        for i in range(npts):
            resid[i] -= rv_point(t[i], tpc, nc, ec, cc, sc, Kc, root)
    for a in range(m):
        b[a] = 0.0
        for c2 in range(m):
            A[a, c2] = 0.0
    chi2 = 0.0
    for i in range(npts):
        k = inst[i]
        jj = jit[k]
        wi = 1.0 / (err2[i] + jj * jj)
        w[i] = wi
        wr = wi * resid[i]
        chi2 += wr * resid[i]
        b[k] += wr
        A[k, k] += wi
        for a in range(n_inst, m):  # trend columns
            xa = X[i, a]
            b[a] += wr * xa
            A[a, k] += wi * xa
            for c2 in range(n_inst, a + 1):
                A[a, c2] += wi * xa * X[i, c2]
    logw = 0.0
    i = 0
    while i < npts:
        prod = 1.0
        stop = min(i + 16, npts)
        for q in range(i, stop):
            prod *= w[q]
        logw += math.log(prod)
        i = stop
    # Cholesky A = L L^T (lower), then z = L^-1 b: b^T A^-1 b = z^T z
    logdet = 0.0
    red = 0.0
    for a in range(m):
        for c2 in range(a + 1):
            acc = A[a, c2]
            for q in range(c2):
                acc -= L[a, q] * L[c2, q]
            if a == c2:
                L[a, a] = math.sqrt(acc)
            else:
                L[a, c2] = acc / L[c2, c2]
        logdet += 2.0 * math.log(L[a, a])
    for a in range(m):
        acc = b[a]
        for q in range(a):
            acc -= L[a, q] * b[q]
        b[a] = acc / L[a, a]  # b now holds z
        red += b[a] * b[a]
    return -0.5 * (chi2 - red) + 0.5 * logw, -0.5 * logdet


# ---------------------------------------------------------------------------
# the argument types each kernel is called with, so that a first run can compile them
# all at once, in parallel and with progress (rvkep._kernel_cache.prepare); a test
# checks that a fit calls no other
# ---------------------------------------------------------------------------
_V, _M, _C = "float64[::1]", "float64[:, ::1]", "float64[:, :, ::1]"
_IV, _IM, _BV = "int64[::1]", "int64[:, ::1]", "boolean[::1]"


def _sig(*types: str) -> str:
    return "(" + ", ".join(types) + ")"


#: kernel name -> the signatures rvkep calls it with
SIGNATURES = {
    "ecc_anom_flat": [_sig(_V, _V, _V)],
    "rv_flat": [_sig(*[_V] * 8)],
    "rv_rows": [_sig(*[_V] * 7, _M)],
    "white_noise_loglike": [_sig(_V, _V, _V, _IV, "int64", _M, *[_M] * 7)],
}
