"""Physical quantities from orbital elements: masses, orbit sizes, transit odds, heating.

All functions take plain floats or arrays in the units named in their parameters
(days, m/s, solar masses, solar radii, kelvin) or astropy Quantities of any compatible
unit. They return plain floats/arrays in the documented unit, or Quantities when any
input was a Quantity (or ``quantity=True``), so a notebook can stay in units while the
posterior code runs on plain arrays. Constants come from :mod:`astropy.constants`
(CODATA 2018/2022 G, IAU 2015 nominal masses and radii, IAU 2012 au).

Every function broadcasts, so each posterior sample gets its own derived value: see
:func:`derive_companion`, which also draws the stellar mass per sample.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from astropy import constants as const
from astropy import units as u
from numpy.typing import ArrayLike

__all__ = [
    "mass_function",
    "minimum_mass",
    "minimum_mass_light",
    "semi_amplitude",
    "semi_major_axis",
    "transit_probability",
    "equilibrium_temperature",
    "insolation",
    "draw_positive",
    "derive_companion",
    "StarProperties",
]

G = const.G.si.value
M_SUN = const.M_sun.si.value
M_JUP = const.M_jup.si.value
M_EARTH = const.M_earth.si.value
R_SUN = const.R_sun.si.value
AU = const.au.si.value
DAY = 86400.0
T_SUN = 5772.0  # K, IAU 2015 nominal solar effective temperature


def _value(x, unit):
    if isinstance(x, u.Quantity):
        return np.asarray(x.to_value(unit), dtype=float), True
    return np.asarray(x, dtype=float), False


def _out(value, unit, quantity: bool):
    value = value if np.ndim(value) else float(value)
    return value * unit if quantity else value


def mass_function(period: ArrayLike, K: ArrayLike, ecc: ArrayLike = 0.0, *, quantity: bool = False):
    """The mass function f = P K^3 (1 - e^2)^(3/2) / (2 pi G), in solar masses.

    It equals (m sin i)^3 / (M + m)^2 for a companion of mass m around a star of mass M
    (common practice, no source; any binary-star textbook).

    Parameters
    ----------
    period : array_like or Quantity
        Orbital period (days).
    K : array_like or Quantity
        Semi-amplitude (m/s).
    ecc : array_like
        Eccentricity.
    quantity : bool
        Return an astropy Quantity (also when any input is one).

    Returns
    -------
    ndarray or Quantity
        The mass function, solar masses.
    """
    P, q1 = _value(period, u.day)
    K_, q2 = _value(K, u.m / u.s)
    e = np.asarray(ecc, float)
    f = P * DAY * K_**3 * (1.0 - e * e) ** 1.5 / (2.0 * np.pi * G) / M_SUN
    return _out(f, u.M_sun, quantity or q1 or q2)


def _solve_mass_function(f, M):
    """Positive root m of m^3 = f (M + m)^2 (both in the same mass unit), vectorized.

    The fixed-point map m -> f^(1/3) (M + m)^(2/3) increases from m = 0 to the root
    with slope (2/3) m / (M + m) < 2/3 there, so it converges for any f, M > 0; three
    Newton steps then polish to rounding.
    """
    f, M = np.broadcast_arrays(np.asarray(f, float), np.asarray(M, float))
    cf = np.cbrt(f)
    m = cf * np.cbrt(M * M)  # the light-companion value: a good start
    for _ in range(200):
        new = cf * np.cbrt((M + m) ** 2)
        done = np.all(np.abs(new - m) <= 1e-15 * new)
        m = new
        if done:
            break
    for _ in range(3):
        g = m**3 - f * (M + m) ** 2
        dg = 3.0 * m * m - 2.0 * f * (M + m)
        m = m - np.where(dg > 0, g / np.where(dg > 0, dg, 1.0), 0.0)
    return m


def minimum_mass(
    period: ArrayLike,
    K: ArrayLike,
    ecc: ArrayLike,
    star_mass: ArrayLike,
    *,
    unit: str = "jupiter",
    quantity: bool = False,
):
    """Minimum mass m sin i from the exact mass function (no light-companion shortcut).

    Solves (m sin i)^3 / (M + m sin i)^2 = f for m sin i, i.e. the mass for sin i = 1.

    Parameters
    ----------
    period : array_like or Quantity
        Orbital period (days).
    K : array_like or Quantity
        Semi-amplitude (m/s).
    ecc : array_like
        Eccentricity.
    star_mass : array_like or Quantity
        The star's mass (solar masses).
    unit : {"jupiter", "earth", "sun"}
        Unit of the plain-float result.
    quantity : bool
        Return an astropy Quantity (also when any input is one).

    Returns
    -------
    ndarray or Quantity
        m sin i in ``unit`` masses.

    References
    ----------
    .. [1] Mayor, M. & Queloz, D. (1995), Nature 378, 355 (51 Peg b).

    Examples
    --------
    The first hot Jupiter, 51 Peg b: P = 4.2293 d, K = 59 m/s, a circular orbit, and a
    one-solar-mass star give m sin i = 0.47 Jupiter masses, as published [1]_ (values
    from memory):

    >>> from rvkep.physics import minimum_mass
    >>> print(f"{minimum_mass(4.2293, 59.0, 0.0, 1.0):.2f}")
    0.47
    >>> print(f"{minimum_mass(4.2293, 59.0, 0.0, 1.0, unit='earth'):.0f}")
    149
    """
    f = mass_function(period, K, ecc)
    M, q = _value(star_mass, u.M_sun)
    m = _solve_mass_function(f, M) * M_SUN
    return _mass_out(m, unit, quantity or q or any(isinstance(x, u.Quantity) for x in (period, K)))


def minimum_mass_light(period, K, ecc, star_mass, *, unit: str = "jupiter"):
    """The light-companion approximation m sin i = f^(1/3) M^(2/3) (for comparison).

    Parameters
    ----------
    period, K, ecc, star_mass : array_like
        As for :func:`minimum_mass`.
    unit : {"jupiter", "earth", "sun"}
        Unit of the result.

    Returns
    -------
    ndarray
        m sin i in ``unit`` masses, with the companion's own mass neglected.
    """
    f = mass_function(period, K, ecc)
    M, _ = _value(star_mass, u.M_sun)
    return _mass_out(np.cbrt(f * M * M) * M_SUN, unit, False)


_MASS_UNITS = {"jupiter": (M_JUP, u.M_jup), "earth": (M_EARTH, u.M_earth), "sun": (M_SUN, u.M_sun)}


def _mass_out(m_kg, unit, quantity):
    try:
        scale, qunit = _MASS_UNITS[unit]
    except KeyError:
        raise ValueError(f"unit must be one of {sorted(_MASS_UNITS)}, got {unit!r}") from None
    return _out(m_kg / scale, qunit, quantity)


def semi_amplitude(
    period: ArrayLike,
    companion_mass: ArrayLike,
    star_mass: ArrayLike,
    ecc: ArrayLike = 0.0,
    sin_i: ArrayLike = 1.0,
    *,
    quantity: bool = False,
):
    """RV semi-amplitude K (m/s) of a star of mass M from a companion of mass m.

    K = (2 pi G / P)^(1/3) m sin i / (M + m)^(2/3) / sqrt(1 - e^2)
    (common practice, no source).

    Parameters
    ----------
    period : array_like or Quantity
        Orbital period (days).
    companion_mass : array_like or Quantity
        The companion's true mass m (Jupiter masses).
    star_mass : array_like or Quantity
        The star's mass M (solar masses).
    ecc, sin_i : array_like
        Eccentricity and the sine of the inclination.
    quantity : bool
        Return an astropy Quantity (also when any input is one).

    Returns
    -------
    ndarray or Quantity
        K in m/s.
    """
    P, q1 = _value(period, u.day)
    m, q2 = _value(companion_mass, u.M_jup)
    M, q3 = _value(star_mass, u.M_sun)
    e = np.asarray(ecc, float)
    m_kg, M_kg = m * M_JUP, M * M_SUN
    K = (
        np.cbrt(2.0 * np.pi * G / (P * DAY))
        * m_kg
        * np.asarray(sin_i, float)
        / np.cbrt((M_kg + m_kg) ** 2)
        / np.sqrt(1.0 - e * e)
    )
    return _out(K, u.m / u.s, quantity or q1 or q2 or q3)


def semi_major_axis(
    period: ArrayLike,
    star_mass: ArrayLike,
    companion_mass: ArrayLike = 0.0,
    *,
    quantity: bool = False,
):
    """Semi-major axis of the relative orbit (au), Kepler's third law with M + m.

    a^3 = G (M + m) P^2 / (4 pi^2)  (common practice, no source).

    Parameters
    ----------
    period : array_like or Quantity
        Orbital period (days).
    star_mass : array_like or Quantity
        The star's mass (solar masses).
    companion_mass : array_like or Quantity
        The companion's mass (Jupiter masses; 0 neglects it).
    quantity : bool
        Return an astropy Quantity (also when any input is one).

    Returns
    -------
    ndarray or Quantity
        a in au.
    """
    P, q1 = _value(period, u.day)
    M, q2 = _value(star_mass, u.M_sun)
    m, q3 = _value(companion_mass, u.M_jup)
    a = np.cbrt(G * (M * M_SUN + m * M_JUP) * (P * DAY) ** 2 / (4.0 * np.pi**2)) / AU
    return _out(a, u.au, quantity or q1 or q2 or q3)


def transit_probability(a_au: ArrayLike, star_radius: ArrayLike, ecc=0.0, omega=0.0):
    """A priori probability that the companion transits (companion radius neglected).

    p = (R_star / a) (1 + e sin omega) / (1 - e^2), omega the star's argument of
    periastron in radians with conjunction at nu = pi/2 - omega (Winn 2010,
    "Transits and Occultations", in Exoplanets, ed. Seager, eq. 9).

    Parameters
    ----------
    a_au : array_like or Quantity
        Semi-major axis (au).
    star_radius : array_like or Quantity
        The star's radius (solar radii).
    ecc, omega : array_like
        Eccentricity and the star's argument of periastron (radians).

    Returns
    -------
    ndarray
        The probability, at most 1.
    """
    a, _ = _value(a_au, u.au)
    R, _ = _value(star_radius, u.R_sun)
    e = np.asarray(ecc, float)
    p = R * R_SUN / (a * AU) * (1.0 + e * np.sin(np.asarray(omega, float))) / (1.0 - e * e)
    return _out(np.minimum(p, 1.0), u.dimensionless_unscaled, False)


def equilibrium_temperature(
    a_au: ArrayLike, star_radius: ArrayLike, star_teff: ArrayLike, ecc=0.0, albedo=0.0
):
    """Equilibrium temperature (K), full heat redistribution, time-averaged flux.

    T_eq = T_eff (1 - A)^(1/4) sqrt(R_star / (2 a)) (1 - e^2)^(-1/8): the orbit-averaged
    flux scales as 1 / (a^2 sqrt(1 - e^2)) (Mendez & Rivera-Valentin 2017, ApJL 837,
    L1, for the eccentric average; the circular formula is common practice, no source).

    Parameters
    ----------
    a_au : array_like or Quantity
        Semi-major axis (au).
    star_radius, star_teff : array_like or Quantity
        The star's radius (solar radii) and effective temperature (K).
    ecc, albedo : array_like
        Eccentricity and Bond albedo.

    Returns
    -------
    ndarray
        T_eq in K.
    """
    a, _ = _value(a_au, u.au)
    R, _ = _value(star_radius, u.R_sun)
    T, _ = _value(star_teff, u.K)
    e = np.asarray(ecc, float)
    Teq = T * (1.0 - np.asarray(albedo, float)) ** 0.25 * np.sqrt(R * R_SUN / (2.0 * a * AU))
    return _out(Teq * (1.0 - e * e) ** (-0.125), u.K, False)


def insolation(a_au: ArrayLike, star_radius: ArrayLike, star_teff: ArrayLike, ecc=0.0):
    """Orbit-averaged insolation relative to the Earth's, S / S_earth.

    L / L_sun = (R / R_sun)^2 (T_eff / 5772 K)^4 (Stefan-Boltzmann law; IAU 2015
    nominal solar values) and S = L / (a^2 sqrt(1 - e^2)) in solar units per au^2.

    Parameters
    ----------
    a_au : array_like or Quantity
        Semi-major axis (au).
    star_radius, star_teff : array_like or Quantity
        The star's radius (solar radii) and effective temperature (K).
    ecc : array_like
        Eccentricity.

    Returns
    -------
    ndarray
        S / S_earth.
    """
    a, _ = _value(a_au, u.au)
    R, _ = _value(star_radius, u.R_sun)
    T, _ = _value(star_teff, u.K)
    e = np.asarray(ecc, float)
    L = R * R * (T / T_SUN) ** 4
    return _out(L / (a * a * np.sqrt(1.0 - e * e)), u.dimensionless_unscaled, False)


def draw_positive(
    value: float,
    err: float,
    n: int,
    rng: np.random.Generator | int | None = None,
    what: str = "star mass",
) -> np.ndarray:
    """n draws from a normal of the given mean and error, truncated to > 0.

    With ``err <= 0`` every draw is ``value``.

    Parameters
    ----------
    value, err : float
        Mean (must be positive) and standard deviation.
    n : int
        Number of draws.
    rng : Generator or int, optional
        The random generator or its seed.
    what : str
        What is drawn, for the error message.

    Returns
    -------
    ndarray
        ``n`` positive draws.
    """
    rng = np.random.default_rng(rng)
    if not value > 0:
        raise ValueError(f"{what} must be positive, got {value!r}")
    if not err > 0:
        return np.full(n, float(value))
    from scipy.stats import truncnorm

    return truncnorm.rvs(-value / err, np.inf, loc=value, scale=err, size=n, random_state=rng)


@dataclass(frozen=True)
class StarProperties:
    """What is known of the star: mass (required) and optionally radius and T_eff."""

    mass: float
    mass_err: float = 0.0
    radius: float | None = None
    radius_err: float = 0.0
    teff: float | None = None
    teff_err: float = 0.0


def derive_companion(
    period: ArrayLike,
    K: ArrayLike,
    ecc: ArrayLike,
    omega: ArrayLike,
    star: StarProperties,
    rng: np.random.Generator | int | None = None,
    star_mass: np.ndarray | None = None,
) -> dict[str, np.ndarray]:
    """Derived quantities for each posterior sample of one companion.

    The stellar mass is drawn per sample (truncated normal) unless ``star_mass`` gives
    the draws, so the result carries its uncertainty. Radius and temperature, when
    known, are drawn the same way for the transit probability, the equilibrium
    temperature and the insolation.

    Parameters
    ----------
    period, K, ecc, omega : array_like
        Posterior samples: period (days), semi-amplitude (m/s), eccentricity and the star's
        argument of periastron (radians).
    star : StarProperties
        The star (mass with its error; radius and temperature when known).
    rng : numpy.random.Generator or int, optional
        Seed of the stellar draws.
    star_mass : ndarray, optional
        Stellar-mass draws (solar masses), shared between companions.

    Returns
    -------
    dict
        ``msini_mjup``, ``msini_mearth``, ``a_au``, ``periastron_au``, ``apastron_au``,
        ``mass_function_msun``, ``star_mass_msun`` and, with a radius,
        ``transit_probability``; with radius and temperature, ``teq_k`` and
        ``insolation_earth``.
    """
    rng = np.random.default_rng(rng)
    P = np.asarray(period, float)
    n = P.size
    if star_mass is None:
        star_mass = draw_positive(star.mass, star.mass_err, n, rng)
    msini = minimum_mass(P, K, ecc, star_mass, unit="jupiter")
    a = semi_major_axis(P, star_mass, msini)
    e = np.asarray(ecc, float)
    out = {
        "msini_mjup": msini,
        "msini_mearth": msini * (M_JUP / M_EARTH),
        "a_au": a,
        "periastron_au": a * (1.0 - e),
        "apastron_au": a * (1.0 + e),
        "mass_function_msun": mass_function(P, K, e),
        "star_mass_msun": star_mass,
    }
    if star.radius is not None:
        R = draw_positive(star.radius, star.radius_err, n, rng, "star radius")
        out["transit_probability"] = transit_probability(a, R, e, omega)
        if star.teff is not None:
            T = draw_positive(star.teff, star.teff_err, n, rng, "effective temperature")
            out["teq_k"] = equilibrium_temperature(a, R, T, e)
            out["insolation_earth"] = insolation(a, R, T, e)
    return out
