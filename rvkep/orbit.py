"""Orbital elements, the Keplerian radial-velocity curve and the conic geometry.

Conventions (common practice, no source; any textbook of binary-star orbits):

* ``omega`` is the argument of periastron of the STAR's orbit about the barycentre, in
  radians; the companion's is ``omega + pi``.
* The star's line-of-sight velocity (positive = receding) is
  ``v = K [cos(nu + omega) + e cos omega]`` with ``nu`` the true anomaly.
* Conjunction (the transit time for an edge-on orbit, companion in front of the star) is
  the moment when ``nu = pi / 2 - omega``.

Every function broadcasts: parameters of shape ``(n_sets, 1)`` against times of shape
``(n_times,)`` give ``(n_sets, n_times)``, the layout the sampler uses for many walkers.

Times: the curve depends on ``t - tp`` only, and that difference is formed first
(exact for two nearby double-precision numbers), never ``n t - n tp``. BJD values near
2.46e6 therefore lose no phase precision; callers may still subtract a reference epoch
from both to keep all other arithmetic well scaled.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike

from rvkep.kepler import check_eccentricity, rv_kernel

__all__ = [
    "radial_velocity",
    "mean_anomaly",
    "tp_to_tc",
    "tc_to_tp",
    "conjunction_mean_anomaly",
    "to_sqrt_e",
    "from_sqrt_e",
    "orbital_radius",
    "periastron_distance",
    "apastron_distance",
    "semi_minor_axis",
]

TWO_PI = 2.0 * np.pi


def radial_velocity(
    t: ArrayLike,
    period: ArrayLike,
    tp: ArrayLike,
    ecc: ArrayLike,
    omega: ArrayLike,
    K: ArrayLike,
) -> np.ndarray:
    """Radial velocity of a star on a Keplerian orbit.

    Parameters
    ----------
    t : array_like
        Times (days, same system as ``tp``).
    period : array_like
        Orbital period (days), > 0.
    tp : array_like
        Time of periastron (days).
    ecc : array_like
        Eccentricity, 0 <= e < 1.
    omega : array_like
        Argument of periastron of the star (radians).
    K : array_like
        Semi-amplitude; the result has its unit.

    Returns
    -------
    ndarray
        ``K [cos(nu + omega) + e cos omega]``, broadcast over all inputs.
    """
    ecc = check_eccentricity(ecc)
    period = np.asarray(period, dtype=float)
    if np.any(~(period > 0)):
        raise ValueError(f"period must be positive, got {period[~(period > 0)].flat[0]!r}")
    omega = np.asarray(omega, dtype=float)
    return np.asarray(
        rv_kernel(
            np.asarray(t, dtype=float),
            np.asarray(tp, dtype=float),
            TWO_PI / period,
            ecc,
            np.cos(omega),
            np.sin(omega),
            np.asarray(K, dtype=float),
        )
    )


def mean_anomaly(t: ArrayLike, period: ArrayLike, tp: ArrayLike) -> np.ndarray:
    """Mean anomaly 2 pi (t - tp) / P (radians, not reduced).

    Parameters
    ----------
    t, period, tp : array_like
        Times, periods and times of periastron (days), broadcast together.

    Returns
    -------
    ndarray
        The mean anomaly in radians.
    """
    return TWO_PI * (np.asarray(t, float) - np.asarray(tp, float)) / np.asarray(period, float)


def conjunction_mean_anomaly(ecc: np.ndarray, omega: np.ndarray) -> np.ndarray:
    """Mean anomaly at conjunction (nu = pi/2 - omega), in (-pi, pi].

    No validation: the hot path (the model's coordinate transform) calls it directly;
    :func:`tp_to_tc` and :func:`tc_to_tp` check the eccentricity first.

    Parameters
    ----------
    ecc, omega : ndarray
        Eccentricities in [0, 1) and the star's arguments of periastron (radians).

    Returns
    -------
    ndarray
        The mean anomaly at conjunction, radians.
    """
    half_nu = 0.5 * (np.mod(1.5 * np.pi - omega, TWO_PI) - np.pi)
    E = 2.0 * np.arctan2(np.sqrt(1.0 - ecc) * np.sin(half_nu), np.sqrt(1.0 + ecc) * np.cos(half_nu))
    return E - ecc * np.sin(E)


def _conjunction_mean_anomaly(ecc, omega):
    return conjunction_mean_anomaly(check_eccentricity(ecc), np.asarray(omega, dtype=float))


def tp_to_tc(tp: ArrayLike, period: ArrayLike, ecc: ArrayLike, omega: ArrayLike) -> np.ndarray:
    """Time of conjunction from the time of periastron.

    The conjunction is the one that follows ``tp`` within the half-period either side
    of it: ``tc = tp + P M_c / (2 pi)`` with ``M_c`` in (-pi, pi] the mean anomaly at
    ``nu = pi / 2 - omega``.

    Parameters
    ----------
    tp, period : array_like
        Time of periastron and period (days).
    ecc, omega : array_like
        Eccentricity in [0, 1) and the star's argument of periastron (radians).

    Returns
    -------
    ndarray
        The time of conjunction (days, the time system of ``tp``).
    """
    return (
        np.asarray(tp, float)
        + np.asarray(period, float) * _conjunction_mean_anomaly(ecc, omega) / TWO_PI
    )


def tc_to_tp(tc: ArrayLike, period: ArrayLike, ecc: ArrayLike, omega: ArrayLike) -> np.ndarray:
    """Time of periastron from the time of conjunction (inverse of :func:`tp_to_tc`).

    Parameters
    ----------
    tc, period : array_like
        Time of conjunction and period (days).
    ecc, omega : array_like
        Eccentricity in [0, 1) and the star's argument of periastron (radians).

    Returns
    -------
    ndarray
        The time of periastron (days, the time system of ``tc``).
    """
    return (
        np.asarray(tc, float)
        - np.asarray(period, float) * _conjunction_mean_anomaly(ecc, omega) / TWO_PI
    )


def to_sqrt_e(ecc: ArrayLike, omega: ArrayLike) -> tuple[np.ndarray, np.ndarray]:
    """(sqrt(e) cos omega, sqrt(e) sin omega).

    Uniform sampling in these two coordinates inside the unit disc is uniform in
    e on [0, 1) and in omega on [0, 2 pi) (Eastman, Gaudi & Agol 2013, PASP 125, 83).

    Parameters
    ----------
    ecc, omega : array_like
        Eccentricity and argument of periastron (radians).

    Returns
    -------
    tuple of ndarray
        sqrt(e) cos omega and sqrt(e) sin omega.
    """
    s = np.sqrt(np.asarray(ecc, float))
    omega = np.asarray(omega, float)
    return s * np.cos(omega), s * np.sin(omega)


def from_sqrt_e(h: ArrayLike, k: ArrayLike) -> tuple[np.ndarray, np.ndarray]:
    """(e, omega) from (sqrt(e) cos omega, sqrt(e) sin omega); omega in [0, 2 pi).

    Parameters
    ----------
    h, k : array_like
        sqrt(e) cos omega and sqrt(e) sin omega.

    Returns
    -------
    tuple of ndarray
        The eccentricity and the argument of periastron (radians).
    """
    h = np.asarray(h, float)
    k = np.asarray(k, float)
    return h * h + k * k, np.mod(np.arctan2(k, h), TWO_PI)


def orbital_radius(nu: ArrayLike, a: ArrayLike, ecc: ArrayLike) -> np.ndarray:
    """Distance on the conic, r = a (1 - e^2) / (1 + e cos nu).

    Parameters
    ----------
    nu, a, ecc : array_like
        True anomaly (radians), semi-major axis and eccentricity.

    Returns
    -------
    ndarray
        The separation, in the unit of ``a``.
    """
    ecc = np.asarray(ecc, float)
    return np.asarray(a, float) * (1.0 - ecc**2) / (1.0 + ecc * np.cos(np.asarray(nu, float)))


def periastron_distance(a: ArrayLike, ecc: ArrayLike) -> np.ndarray:
    """The periastron distance a (1 - e).

    Parameters
    ----------
    a, ecc : array_like
        Semi-major axis and eccentricity.

    Returns
    -------
    ndarray
        In the unit of ``a``.
    """
    return np.asarray(a, float) * (1.0 - np.asarray(ecc, float))


def apastron_distance(a: ArrayLike, ecc: ArrayLike) -> np.ndarray:
    """The apastron distance a (1 + e).

    Parameters
    ----------
    a, ecc : array_like
        Semi-major axis and eccentricity.

    Returns
    -------
    ndarray
        In the unit of ``a``.
    """
    return np.asarray(a, float) * (1.0 + np.asarray(ecc, float))


def semi_minor_axis(a: ArrayLike, ecc: ArrayLike) -> np.ndarray:
    """The semi-minor axis b = a sqrt(1 - e^2).

    Parameters
    ----------
    a, ecc : array_like
        Semi-major axis and eccentricity.

    Returns
    -------
    ndarray
        In the unit of ``a``.
    """
    return np.asarray(a, float) * np.sqrt(1.0 - np.asarray(ecc, float) ** 2)
