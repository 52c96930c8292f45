"""Kepler's equation: mean anomaly -> eccentric anomaly -> true anomaly.

This is the hot kernel of rvkep. It takes and returns plain float arrays (no units),
broadcasts like any numpy ufunc, and has two implementations of one algorithm:

* a compiled one (numba, cached on disk in a user folder) used when numba loads, and
* a pure-numpy one, used when numba is missing or cannot load (set the environment
  variable ``RVKEP_PURE_NUMPY=1`` to force it); the tests check the two against each other.

Method
------
Markley (1995): a starter from a Pade approximation of sin E, solved as a cubic in
closed form, followed by one fifth-order (Householder-type) correction. The result is
accurate to a few units of double-precision rounding for all 0 <= e < 1 and all M, with
no iteration and no branch on the data, which is what makes it fast and vectorizable.
The mean anomaly is first reduced to [-pi, pi]; the odd symmetry E(-M) = -E(M) is used
so the starter only sees 0 <= M <= pi.

Near M = 0 with e close to 1 the residual E - e sin E - M suffers cancellation; it is
evaluated as (1 - e) E + e (E - sin E), with E - sin E from its series for small E
(Markley 1995, sect. 4).

For the radial velocity only sin E and cos E are needed. They are computed once, at the
starter, and carried through the small correction dE with the addition formulas, so one
evaluation costs one sine-cosine pair, one cube root and one square root per point.

References
----------
.. [1] Markley, F. L. (1995), "Kepler Equation Solver", Celestial Mechanics and
   Dynamical Astronomy 63, 101-111.
"""

from __future__ import annotations

import os
import warnings

import numpy as np
from numpy.typing import ArrayLike

__all__ = [
    "eccentric_anomaly",
    "true_anomaly",
    "true_anomaly_from_eccentric",
    "check_eccentricity",
    "BACKEND",
    "available_backends",
    "backend_kernels",
    "rv_rows",
    "rv_kernel",
]

from rvkep._constants import ALPHA_A as _ALPHA_A
from rvkep._constants import ALPHA_B as _ALPHA_B
from rvkep._constants import PI as _PI
from rvkep._constants import SMALL_E as _SMALL_E
from rvkep._constants import TWO_PI as _TWO_PI


def check_eccentricity(e: ArrayLike) -> np.ndarray:
    """Return ``e`` as a float array, or raise ValueError naming a bad value.

    Parameters
    ----------
    e : array_like
        Eccentricities; each must satisfy 0 <= e < 1 (NaN is refused).

    Returns
    -------
    ndarray
        ``e`` as floats.
    """
    e = np.asarray(e, dtype=float)
    bad = ~((e >= 0.0) & (e < 1.0))
    if np.any(bad):
        value = e[bad].flat[0] if e.ndim else float(e)
        raise ValueError(f"eccentricity must satisfy 0 <= e < 1, got {value!r}")
    return e


# ---------------------------------------------------------------------------
# pure-numpy implementation (the reference path; also the fallback)
# ---------------------------------------------------------------------------


def _e_minus_sin_np(E, e):
    """E - e sin E, evaluated without cancellation for small |E| (series)."""
    x2 = E * E
    # E - sin E = E^3/6 - E^5/120 + ... (Horner, enough terms for |E| < 0.25)
    series = (
        E
        * x2
        * (
            1.0 / 6.0
            - x2 * (1.0 / 120.0 - x2 * (1.0 / 5040.0 - x2 * (1.0 / 362880.0 - x2 / 39916800.0)))
        )
    )
    safe = (1.0 - e) * E + e * series
    return np.where(np.abs(E) < _SMALL_E, safe, E - e * np.sin(E))


def _markley_np(M, e):
    """Markley's solve for M reduced to [-pi, pi]; returns (E, sin E, cos E)."""
    sign = np.where(M < 0.0, -1.0, 1.0)
    m = np.abs(M)
    alpha = _ALPHA_A + _ALPHA_B * (_PI - m) / (1.0 + e)
    d = 3.0 * (1.0 - e) + alpha * e
    q = 2.0 * alpha * d * (1.0 - e) - m * m
    r = 3.0 * alpha * d * (d - 1.0 + e) * m + m * m * m
    w = np.cbrt(np.abs(r) + np.sqrt(q * q * q + r * r)) ** 2
    E1 = (2.0 * r * w / (w * w + w * q + q * q) + m) / d
    s1 = np.sin(E1)
    c1 = np.cos(E1)
    f0 = _e_minus_sin_np(E1, e) - m
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


def _reduce_np(M):
    k = np.floor((M + _PI) / _TWO_PI)
    return M - k * _TWO_PI, k


def _ecc_anom_np(M, e):
    Mr, k = _reduce_np(M)
    E = _markley_np(Mr, e)[0]
    return E + k * _TWO_PI


def _rv_np(t, tp, n, e, cosw, sinw, K):
    Mr = _reduce_np(n * (t - tp))[0]
    _, sE, cE = _markley_np(Mr, e)
    den = 1.0 - e * cE
    cos_nu = (cE - e) / den
    sin_nu = np.sqrt(1.0 - e * e) * sE / den
    return K * (cos_nu * cosw - sin_nu * sinw + e * cosw)


# ---------------------------------------------------------------------------
# compiled implementation (numba), same algorithm line by line
# ---------------------------------------------------------------------------


def _ecc_anom_flat_np(M, e, out):
    out[:] = _ecc_anom_np(M, e)


def _rv_flat_np(t, tp, n, e, cosw, sinw, K, out):
    out[:] = _rv_np(t, tp, n, e, cosw, sinw, K)


def _rv_rows_np(t, tp, n, e, cosw, sinw, K, out):
    col = (slice(None), None)
    out[:] = _rv_np(t, tp[col], n[col], e[col], cosw[col], sinw[col], K[col])


def _load_compiled():
    """The numba kernels, or None (with one warning) when numba cannot load them."""
    try:
        from rvkep import _kepler_numba as nb
    except ImportError:
        warnings.warn(
            "numba is not installed: rvkep uses its pure-numpy Kepler kernels "
            "(same results, about 10x slower)",
            RuntimeWarning,
            stacklevel=3,
        )
        return None
    except Exception as exc:  # numba present but unusable
        warnings.warn(
            f"the compiled Kepler kernels failed to load ({type(exc).__name__}: {exc}); "
            "using the pure-numpy path (same results, about 10x slower)",
            RuntimeWarning,
            stacklevel=3,
        )
        return None
    return nb.ecc_anom_flat, nb.rv_flat, nb.rv_rows


def _backend_table() -> dict[str, tuple]:
    table = {"numpy": (_ecc_anom_flat_np, _rv_flat_np, _rv_rows_np)}
    if os.environ.get("RVKEP_PURE_NUMPY", "") in ("", "0"):
        compiled = _load_compiled()
        if compiled is not None:
            table = {"numba": compiled, **table}
    return table


#: Kernel implementations that loaded, fastest first: name -> (eccentric anomaly,
#: RV with broadcasting, RV rows), each writing into its last argument.
_BACKENDS = _backend_table()

#: Which implementation is in use: ``"numba"`` or ``"numpy"``.
BACKEND = next(iter(_BACKENDS))
_ecc_anom_flat, _rv_flat, _rv_rows = _BACKENDS[BACKEND]


def available_backends() -> list[str]:
    """Names of the kernel implementations that loaded here, the one in use first.

    Returns
    -------
    list of str
        ``"numba"`` (when it loaded) and ``"numpy"``.
    """
    return list(_BACKENDS)


def backend_kernels(name: str) -> tuple:
    """The kernels of one backend (for tests and benchmarks that compare them).

    Parameters
    ----------
    name : str
        One of :func:`available_backends`.

    Returns
    -------
    tuple
        The eccentric-anomaly, flat RV and row RV kernels.
    """
    try:
        return _BACKENDS[name]
    except KeyError:
        raise ValueError(
            f"unknown or unavailable backend {name!r}; available: {', '.join(_BACKENDS)}"
        ) from None


def _flat(a):
    return np.ascontiguousarray(a, dtype=float).ravel()


def rv_rows(t, tp, n, e, cosw, sinw, K) -> np.ndarray:
    """Keplerian RV for many parameter sets at once, unchecked (the hot path).

    ``t`` has shape (n_times,), every parameter shape (n_sets,); the result is
    (n_sets, n_times): ``K [cos(nu + omega) + e cos omega]`` with ``n = 2 pi / P`` the
    mean motion and ``cosw, sinw`` the cosine and sine of omega. No validation.

    Parameters
    ----------
    t : array_like
        Times (n_times,), days.
    tp, n, e, cosw, sinw, K : array_like
        Per parameter set (n_sets,): time of periastron, mean motion (rad/day),
        eccentricity, cos omega, sin omega, semi-amplitude.

    Returns
    -------
    ndarray
        (n_sets, n_times) velocities, in the unit of ``K``.
    """
    t = _flat(t)
    params = [_flat(p) for p in (tp, n, e, cosw, sinw, K)]
    out = np.empty((params[0].size, t.size))
    _rv_rows(t, *params, out)
    return out


def rv_kernel(t, tp, n, e, cosw, sinw, K) -> np.ndarray:
    """Keplerian RV with numpy broadcasting over all inputs, unchecked.

    Same quantity as :func:`rv_rows`; parameters of shape (n_sets, 1) against times of
    shape (n_times,) take the fast row path, any other layout is broadcast first.

    Parameters
    ----------
    t, tp, n, e, cosw, sinw, K : array_like
        As for :func:`rv_rows`, of any shapes that broadcast together.

    Returns
    -------
    ndarray
        The velocities, in the broadcast shape.
    """
    t = np.asarray(t, dtype=float)
    params = [np.asarray(p, dtype=float) for p in (tp, n, e, cosw, sinw, K)]
    pshape = np.broadcast_shapes(*(p.shape for p in params))
    if t.ndim <= 1 and (pshape == () or (len(pshape) == 2 and pshape[1] == 1)):
        # writeable copies: broadcast_to gives read-only views, which the compiled
        # kernel would take as another type and compile again at run time
        rows = [np.array(np.broadcast_to(p, pshape), dtype=float).reshape(-1) for p in params]
        out = rv_rows(t.reshape(-1), *rows)
        return out.reshape(np.broadcast_shapes(pshape, t.shape))
    arrays = np.broadcast_arrays(t, *params)
    out = np.empty(arrays[0].size)
    _rv_flat(*(_flat(a) for a in arrays), out)
    return out.reshape(arrays[0].shape)


def eccentric_anomaly(M: ArrayLike, e: ArrayLike) -> np.ndarray:
    """Solve Kepler's equation E - e sin E = M for the eccentric anomaly.

    Parameters
    ----------
    M : array_like
        Mean anomaly in radians, any real value.
    e : array_like
        Eccentricity, 0 <= e < 1; broadcast against ``M``.

    Returns
    -------
    E : ndarray
        Eccentric anomaly in radians, on the same branch as ``M``
        (E(M + 2 pi) = E(M) + 2 pi).

    Raises
    ------
    ValueError
        If any eccentricity is outside [0, 1) or NaN.

    References
    ----------
    .. [1] Markley, F. L. (1995), Celestial Mechanics and Dynamical Astronomy 63, 101.
    .. [2] Meeus, J. (1998), Astronomical Algorithms, 2nd ed., example 30.a.

    Examples
    --------
    Meeus' example 30.a [2]_: e = 0.1 and M = 5 degrees give E = 5.554589 degrees.

    >>> import numpy as np
    >>> from rvkep.kepler import eccentric_anomaly
    >>> E = eccentric_anomaly(np.radians(5.0), 0.1)
    >>> print(f"{np.degrees(E):.6f}")
    5.554589
    """
    e = check_eccentricity(e)
    M, e = np.broadcast_arrays(np.asarray(M, dtype=float), e)
    out = np.empty(M.size)
    _ecc_anom_flat(_flat(M), _flat(e), out)
    return out.reshape(M.shape)


def true_anomaly_from_eccentric(E: ArrayLike, e: ArrayLike) -> np.ndarray:
    """True anomaly nu from the eccentric anomaly E.

    Uses tan(nu / 2) = sqrt((1 + e) / (1 - e)) tan(E / 2) in its two-argument form,
    which keeps nu on the same turn as E.

    Parameters
    ----------
    E, e : array_like
        Eccentric anomaly (radians) and eccentricity in [0, 1).

    Returns
    -------
    ndarray
        The true anomaly, radians, on the turn of ``E``.
    """
    e = check_eccentricity(e)
    E = np.asarray(E, dtype=float)
    half = 0.5 * E
    nu = 2.0 * np.arctan2(np.sqrt(1.0 + e) * np.sin(half), np.sqrt(1.0 - e) * np.cos(half))
    # keep the branch of E: arctan2 returns (-pi, pi]; add back whole turns of E
    turns = np.round((E - nu) / _TWO_PI)
    return nu + turns * _TWO_PI


def true_anomaly(M: ArrayLike, e: ArrayLike) -> np.ndarray:
    """True anomaly nu (radians) from the mean anomaly M and eccentricity e.

    Parameters
    ----------
    M, e : array_like
        Mean anomaly (radians) and eccentricity in [0, 1).

    Returns
    -------
    ndarray
        The true anomaly, radians, on the turn of ``M``.
    """
    return true_anomaly_from_eccentric(eccentric_anomaly(M, e), e)


def prepare_kernels(quiet: bool = False, stream=None) -> int:
    """Compile the compiled kernels a run needs once, up front, when the on-disk cache
    lacks them (the first run after an install, or after an upgrade of rvkep or numba).

    Prints one line saying so, with progress, unless ``quiet``; the kernels compile side
    by side in two processes where there are two cores. Returns how many were compiled
    (0 when all were cached or numba is not in use). Later runs load them in about 1 s.
    """
    if BACKEND != "numba":
        return 0
    import sys
    import time

    from rvkep._kernel_cache import prepare

    stream = stream or sys.stdout
    tty = hasattr(stream, "isatty") and stream.isatty()
    t0 = time.perf_counter()

    def say(text, done, total):
        if quiet:
            return
        if tty:
            end = "\n" if done == total else ""
            stream.write(f"\r{text}: {done}/{total}{end}")
        elif done == 0:
            stream.write(f"{text} ...\n")
        elif done == total:
            stream.write(f"compiled {total} kernel(s) in {time.perf_counter() - t0:.1f} s\n")
        stream.flush()

    return prepare(say)
