"""Derived physics against published and textbook values."""

import numpy as np
import pytest
from astropy import constants as const
from astropy import units as u

from rvkep import physics

YEAR_D = 365.25


def test_semi_amplitude_constant():
    # K = 28.4329 m/s for 1 M_Jup, P = 1 yr, M_star = 1 M_sun, e = 0, sin i = 1
    # (Lovis & Fischer 2010, Radial Velocity Techniques for Exoplanets, in Exoplanets,
    # ed. Seager; from memory). The published constant neglects m in M + m, so compare
    # with the light-companion limit and the exact value separately.
    K_light = physics.semi_amplitude(YEAR_D, 1.0, 1.0) * (
        1 + (const.M_jup / const.M_sun).value
    ) ** (2 / 3)
    assert K_light == pytest.approx(28.4329, abs=2e-3)
    assert physics.semi_amplitude(YEAR_D, 1.0, 1.0) == pytest.approx(28.4329 / 1.000636, rel=1e-4)


def test_sun_reflex_from_jupiter_and_earth():
    # reflex of the Sun: about 12.5 m/s from Jupiter (P = 11.86 yr) and about 0.09 m/s
    # from the Earth (common practice, no source)
    assert physics.semi_amplitude(11.86 * YEAR_D, 1.0, 1.0, 0.048) == pytest.approx(12.5, abs=0.3)
    m_earth = (const.M_earth / const.M_jup).value
    assert physics.semi_amplitude(YEAR_D, m_earth, 1.0, 0.0167) == pytest.approx(0.09, abs=0.005)


def test_first_hot_jupiter():
    # P = 4.2293 d, K = 59 m/s, e = 0 around 1 M_sun gives M sin i about 0.47 M_Jup
    # (Mayor & Queloz 1995, Nature 378, 355; from memory)
    assert physics.minimum_mass(4.2293, 59.0, 0.0, 1.0) == pytest.approx(0.47, abs=0.01)


def test_kepler_third_law_one_au():
    # 1 M_sun, P = 1 yr gives a = 1 au to about 3e-6 (astropy.constants: IAU 2012 au,
    # IAU 2015 nominal GM_sun; the sidereal year, 365.256363 d, is the one that fits)
    assert physics.semi_major_axis(365.256363, 1.0) == pytest.approx(1.0, abs=3e-5)
    a = physics.semi_major_axis(365.256363 * u.day, 1.0 * u.M_sun)
    assert a.unit == u.au


def test_mass_function_round_trip_and_exact_solution():
    # f = (m sin i)^3 / (M + m)^2 (common practice, no source; any binary-star textbook)
    rng = np.random.default_rng(5)
    P = 10 ** rng.uniform(0, 4, 200)
    m = 10 ** rng.uniform(-3, 2.5, 200)  # Jupiter masses, up to stellar companions
    M = rng.uniform(0.1, 2.0, 200)
    e = rng.uniform(0, 0.9, 200)
    K = physics.semi_amplitude(P, m, M, e)
    assert np.allclose(physics.minimum_mass(P, K, e, M), m, rtol=1e-10)
    f = physics.mass_function(P, K, e)
    m_sun = m * (const.M_jup / const.M_sun).value
    assert np.allclose(f, m_sun**3 / (M + m_sun) ** 2, rtol=1e-10)


def test_brown_dwarf_exact_versus_light_approximation():
    # For m = 60 M_Jup around 0.8 M_sun, m/M = 0.0716: the light-companion formula
    # underestimates m by about (2/3) m/M to first order, here about 4.6% (common
    # practice, no source: expand m^3/(M + m)^2 = f to first order in m/M).
    P, M, m = 50.0, 0.8, 60.0
    K = physics.semi_amplitude(P, m, M, 0.2)
    exact = physics.minimum_mass(P, K, 0.2, M)
    light = physics.minimum_mass_light(P, K, 0.2, M)
    assert exact == pytest.approx(m, rel=1e-10)
    q = m * (const.M_jup / const.M_sun).value / M
    assert 1 - light / exact == pytest.approx(2 / 3 * q, rel=0.12)
    assert 0.04 < 1 - light / exact < 0.05


def test_equal_mass_binary():
    # equal masses: f = m^3 / (2m)^2 = m / 4 (algebra of the mass function)
    f = 0.25
    P = 10.0
    K = np.cbrt(f * const.M_sun.value * 2 * np.pi * const.G.value / (P * 86400))
    assert physics.minimum_mass(P, K, 0.0, 1.0, unit="sun") == pytest.approx(1.0, rel=1e-10)


def test_quantity_api():
    m = physics.minimum_mass(4.2293 * u.day, 59 * u.m / u.s, 0.0, 1 * u.M_sun)
    assert m.unit == u.M_jup
    assert (
        physics.minimum_mass(4.2293, 0.059 * u.km / u.s, 0.0, 1.0, unit="earth").unit == u.M_earth
    )


def test_transit_probability_and_temperature():
    # hot Jupiter around the Sun at 0.05 au: p = R_sun / a = 0.093 (Winn 2010, eq. 9);
    # the Earth's equilibrium temperature with zero albedo is about 278 K and its
    # insolation 1 (common practice, no source)
    assert physics.transit_probability(0.05, 1.0) == pytest.approx(0.0930, abs=5e-4)
    assert physics.transit_probability(0.05, 1.0, 0.5, np.pi / 2) == pytest.approx(
        0.0930 / 0.5, abs=1e-3
    )
    assert physics.equilibrium_temperature(1.0, 1.0, 5772.0) == pytest.approx(278.6, abs=0.5)
    assert physics.insolation(1.0, 1.0, 5772.0) == pytest.approx(1.0, rel=1e-12)


def test_derive_carries_star_mass_uncertainty():
    # the relative spread of M sin i from the star alone is (2/3) sigma_M / M for a
    # light companion (common practice, no source)
    n = 20000
    out = physics.derive_companion(
        np.full(n, 30.0), np.full(n, 20.0), np.full(n, 0.1), np.zeros(n),
        physics.StarProperties(1.0, 0.06, radius=1.0, teff=5772.0), rng=1,
    )  # fmt: skip
    rel = np.std(out["msini_mjup"]) / np.mean(out["msini_mjup"])
    assert rel == pytest.approx(2 / 3 * 0.06, rel=0.05)
    assert np.all(out["star_mass_msun"] > 0)
    assert np.allclose(out["periastron_au"], out["a_au"] * 0.9)
    assert {"transit_probability", "teq_k", "insolation_earth"} <= set(out)


def test_truncated_star_mass():
    draws = physics.draw_positive(0.1, 0.2, 5000, rng=3)
    assert draws.min() > 0
    with pytest.raises(ValueError, match="star mass"):
        physics.draw_positive(-1.0, 0.1, 3)
