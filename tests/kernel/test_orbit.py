"""The radial-velocity curve, tp <-> tc, sqrt(e) coordinates and the conic relations."""

import math

import numpy as np
import pytest
from helpers import slow_rv
from hypothesis import given, settings
from hypothesis import strategies as st

from rvkep import orbit


@pytest.mark.parametrize("e", [0.0, 0.2, 0.6, 0.9, 0.97])
def test_rv_against_slow_reference(e):
    t = np.linspace(2_459_000.0, 2_459_100.0, 400)
    period, tp, omega, K = 13.7, 2_459_003.3, 2.1, 35.0
    v = orbit.radial_velocity(t, period, tp, e, omega, K)
    assert np.max(np.abs(v - slow_rv(t, period, tp, e, omega, K))) < 1e-9 * K


def test_many_parameter_sets_layout():
    t = np.linspace(0, 50, 77)
    rng = np.random.default_rng(0)
    P = rng.uniform(2, 20, (64, 1))
    tp = rng.uniform(0, 10, (64, 1))
    e = rng.uniform(0, 0.9, (64, 1))
    w = rng.uniform(0, 2 * np.pi, (64, 1))
    K = rng.uniform(1, 50, (64, 1))
    v = orbit.radial_velocity(t, P, tp, e, w, K)
    assert v.shape == (64, 77)
    for j in (0, 17, 63):
        assert np.allclose(
            v[j], orbit.radial_velocity(t, P[j, 0], tp[j, 0], e[j, 0], w[j, 0], K[j, 0])
        )
    # general broadcasting (not the row layout) gives the same numbers
    v2 = orbit.radial_velocity(t[None, :], P * np.ones((1, 77)), tp, e, w, K)
    assert np.allclose(v, v2, atol=1e-12, rtol=0)


def test_bjd_epoch_precision():
    # shifting times and tp together by 2.46e6 days changes nothing beyond the
    # representation of the times themselves (common practice, no source)
    t = np.linspace(0.0, 30.0, 200)
    v0 = orbit.radial_velocity(t, 3.5, 0.7, 0.3, 1.0, 50.0)
    v1 = orbit.radial_velocity(t + 2_460_000.0, 3.5, 0.7 + 2_460_000.0, 0.3, 1.0, 50.0)
    assert np.max(np.abs(v1 - v0)) < 1e-6  # 50 m/s * 2 pi / 3.5 d * 5e-10 d


def test_rv_extrema_circular():
    # circular orbit: v = K cos(2 pi (t - tp)/P + omega)
    t = np.linspace(0, 10, 1001)
    v = orbit.radial_velocity(t, 10.0, 0.0, 0.0, 0.4, 3.0)
    assert np.allclose(v, 3.0 * np.cos(2 * np.pi * t / 10.0 + 0.4), atol=1e-13)


@settings(max_examples=200, deadline=None)
@given(
    tp=st.floats(-1e4, 1e4),
    P=st.floats(0.1, 1e4),
    e=st.floats(0.0, 0.98),
    w=st.floats(0.0, 2 * math.pi),
)
def test_tp_tc_round_trip(tp, P, e, w):
    tc = orbit.tp_to_tc(tp, P, e, w)
    assert abs(tc - tp) <= 0.5 * P * (1 + 1e-12)
    assert float(orbit.tc_to_tp(tc, P, e, w)) == pytest.approx(tp, abs=1e-9 * max(1.0, abs(tp), P))


@pytest.mark.parametrize("e,w", [(0.0, 0.3), (0.4, 1.0), (0.8, 4.0), (0.95, 2.5)])
def test_conjunction_is_where_nu_equals_half_pi_minus_omega(e, w):
    # At conjunction the companion is in front of the star: nu + omega = pi/2, where the
    # star's velocity e-term aside passes K e cos w going down (common practice, no source)
    P, tp = 7.0, 1.0
    tc = float(orbit.tp_to_tc(tp, P, e, w))
    v = orbit.radial_velocity([tc], P, tp, e, w, 1.0)[0]
    assert v == pytest.approx(e * math.cos(w), abs=1e-10)
    v_after = orbit.radial_velocity([tc + 1e-4 * P], P, tp, e, w, 1.0)[0]
    assert v_after < v


@settings(max_examples=200, deadline=None)
@given(e=st.floats(0.0, 0.999), w=st.floats(0.0, 2 * math.pi * (1 - 1e-12)))
def test_sqrt_e_round_trip(e, w):
    h, k = orbit.to_sqrt_e(e, w)
    e2, w2 = orbit.from_sqrt_e(h, k)
    assert float(e2) == pytest.approx(e, abs=1e-14)
    if e > 1e-10:
        d = abs((float(w2) - w + math.pi) % (2 * math.pi) - math.pi)
        assert d < 1e-6


def test_conic_geometry():
    # r = a(1 - e^2)/(1 + e cos nu); r_peri = a(1 - e); r_apo = a(1 + e);
    # b = a sqrt(1 - e^2)   (common practice, no source; any mechanics textbook)
    a, e = 2.5, 0.37
    assert orbit.orbital_radius(0.0, a, e) == pytest.approx(orbit.periastron_distance(a, e))
    assert orbit.orbital_radius(np.pi, a, e) == pytest.approx(orbit.apastron_distance(a, e))
    assert orbit.periastron_distance(a, e) == pytest.approx(a * (1 - e))
    assert orbit.apastron_distance(a, e) == pytest.approx(a * (1 + e))
    assert orbit.semi_minor_axis(a, e) == pytest.approx(a * math.sqrt(1 - e * e))
    # the semi-latus rectum is at nu = 90 deg and equals b^2 / a
    assert orbit.orbital_radius(np.pi / 2, a, e) == pytest.approx(
        orbit.semi_minor_axis(a, e) ** 2 / a
    )
    # the focus-to-point distance matches the ellipse parametrized by E: r = a(1 - e cos E)
    from rvkep.kepler import eccentric_anomaly, true_anomaly_from_eccentric

    E = eccentric_anomaly(np.linspace(-3, 3, 50), e)
    nu = true_anomaly_from_eccentric(E, e)
    assert np.allclose(orbit.orbital_radius(nu, a, e), a * (1 - e * np.cos(E)))


def test_bad_inputs():
    with pytest.raises(ValueError, match="eccentricity"):
        orbit.radial_velocity([0.0], 1.0, 0.0, 1.2, 0.0, 1.0)
    with pytest.raises(ValueError, match="period"):
        orbit.radial_velocity([0.0], -1.0, 0.0, 0.2, 0.0, 1.0)


@pytest.mark.parametrize("backend", ["numba", "numpy"])
@pytest.mark.parametrize("e", [0.0, 0.3, 0.9, 0.99])
def test_every_backend_rv_kernel_against_slow_reference(backend, e):
    # each kernel implementation (flat and row layouts) against the point-by-point
    # bisection reference above; the compiled one must have loaded (numba is a
    # dependency), so a failed load cannot turn this into numpy-vs-numpy
    from rvkep import kepler

    assert "numba" in kepler.available_backends() and kepler.BACKEND == "numba"
    ecc_flat, rv_flat, rv_rows = kepler.backend_kernels(backend)
    P, tp, w, K = 13.7, 2.1, 2.2, 31.0
    t = np.linspace(-40.0, 40.0, 301)
    ref = slow_rv(t, P, tp, e, w, K)
    n = 2 * math.pi / P
    out = np.empty(t.size)
    full = [np.full(t.size, v) for v in (tp, n, e, math.cos(w), math.sin(w), K)]
    rv_flat(t, *full, out)
    assert np.max(np.abs(out - ref)) < 1e-9 * K
    rows = np.empty((2, t.size))
    pars = [np.array([v, v]) for v in (tp, n, e, math.cos(w), math.sin(w), K)]
    pars[-1] = np.array([K, 2 * K])
    rv_rows(t, *pars, rows)
    assert np.max(np.abs(rows[0] - ref)) < 1e-9 * K
    assert np.max(np.abs(rows[1] - 2 * ref)) < 2e-9 * K
    M = np.linspace(-7, 7, 101)
    E = np.empty(M.size)
    ecc_flat(M, np.full(M.size, e), E)
    assert np.max(np.abs(E - e * np.sin(E) - M)) < 1e-12
