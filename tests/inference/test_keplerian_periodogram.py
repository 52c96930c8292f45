"""The Keplerian periodogram (rvkep/keplerian_periodogram.py) and the searches built on
it: against astropy's Lomb-Scargle, against explicit least squares, calibrated false
alarms on Gaussian noise, and a steep orbit the sine periodogram misses."""

import numpy as np
import pytest

from rvkep.data import RVData
from rvkep.kepler import eccentric_anomaly
from rvkep.keplerian_periodogram import keplerian_periodogram, phase_counts
from rvkep.orbit import radial_velocity
from rvkep.period_search import search
from rvkep.periodogram import periodogram


def test_circular_row_is_astropy_lomb_scargle():
    # one instrument, e = 0 only: the generalized Lomb-Scargle periodogram with a
    # floating mean, "standard" normalization (Zechmeister & Kuerster 2009), as astropy
    # computes it
    from astropy.timeseries import LombScargle

    rng = np.random.default_rng(2)
    t = np.sort(rng.uniform(0, 300, 45)) + 2459000
    dy = rng.uniform(1, 3, t.size)
    y = 4 * np.sin(2 * np.pi * t / 17.3) + rng.normal(0, dy)
    f = np.linspace(0.004, 0.7, 1500)
    pk = keplerian_periodogram(t, y, dy, None, f, ecc=(0.0,), n_bootstrap=0)
    ls = LombScargle(t - np.round(t.mean()), y, dy, fit_mean=True, center_data=True)
    assert np.max(np.abs(pk.power - ls.power(f, method="cython"))) < 1e-10


def test_power_is_the_chi_square_drop_of_explicit_least_squares():
    # two instruments and a linear trend: at one frequency and e = 0.6, the kernel's
    # power is the largest chi-square drop over its phase grid of the weighted least
    # squares fit [cos nu + e, -sin nu, offsets, trend] against [offsets, trend]
    # (numpy.linalg.lstsq); the kernel reads a table with linear interpolation, so
    # agreement to 1e-6
    rng = np.random.default_rng(5)
    n = 50
    t = np.sort(rng.uniform(0, 400, n)) + 2459000
    inst = np.where(rng.uniform(size=n) < 0.4, "b", "a")
    dy = rng.uniform(1, 2, n)
    y = radial_velocity(t, 33.0, 2459010.0, 0.6, 2.0, 9.0) + np.where(inst == "a", 3.0, -7.0)
    y = y + 0.02 * (t - 2459200) + rng.normal(0, dy)
    f = np.array([1 / 33.0, 1 / 47.0])
    e = 0.6
    pk = keplerian_periodogram(t, y, dy, inst, f, ecc=(e,), trend=1, n_bootstrap=0)
    w = 1 / dy
    t0 = t - np.round(t.mean())
    base = np.column_stack([(inst == "a") * 1.0, (inst == "b") * 1.0, t0 / 365.25])

    def chi2(X):
        coef = np.linalg.lstsq(X * w[:, None], y * w, rcond=None)[0]
        return np.sum(((y - X @ coef) * w) ** 2)

    c0 = chi2(base)
    for k, freq in enumerate(f):
        best = 0.0
        nph = int(phase_counts([e])[0])
        for j in range(nph):
            M = 2 * np.pi * ((freq * t0) % 1.0 - j / nph)
            E = eccentric_anomaly(M, np.full(n, e))
            nu_c = (np.cos(E) - e) / (1 - e * np.cos(E))
            nu_s = np.sqrt(1 - e * e) * np.sin(E) / (1 - e * np.cos(E))
            best = max(best, c0 - chi2(np.column_stack([nu_c + e, -nu_s, base])))
        assert pk.power[k] == pytest.approx(best / c0, rel=1e-6)


def test_false_alarms_are_calibrated_on_gaussian_noise():
    # the extent A from 200 redraws of one noise series, applied to 300 fresh Gaussian
    # series: the share whose highest peak has FAP < 0.1 should be 0.10 (binomial sigma
    # 0.017; tolerance 0.05-0.15), < 0.02 a fiftieth (0-0.045), < 0.5 half (0.4-0.6).
    # One effective number of trials (Cumming 2004) gives 0.175 below 0.1 here
    rng = np.random.default_rng(7)
    n = 40
    t = np.sort(rng.uniform(0, 200, n))
    dy = np.full(n, 1.0)
    f = np.linspace(0.01, 0.4, 300)
    cal = keplerian_periodogram(t, rng.normal(0, 1, n), dy, None, f, n_bootstrap=200, rng=1)
    faps = []
    for _ in range(300):
        pg = keplerian_periodogram(t, rng.normal(0, 1, n), dy, None, f, n_bootstrap=0)
        faps.append(float(cal.fap(pg.power.max())))
    faps = np.array(faps)
    assert 0.05 <= np.mean(faps < 0.1) <= 0.15, np.mean(faps < 0.1)
    assert np.mean(faps < 0.02) <= 0.045, np.mean(faps < 0.02)
    assert 0.40 <= np.mean(faps < 0.5) <= 0.60, np.mean(faps < 0.5)
    assert cal.level(1e-3) > cal.level(1e-2) > cal.level(0.1)


def steep_star(seed=1, n=50):
    """Invented star, seed given: one companion P = 61.3 d, e = 0.9, K = 20 m/s,
    omega = 300 deg, 50 velocities over 900 d with 2 m/s errors."""
    rng = np.random.default_rng(seed)
    t = np.sort(rng.uniform(2459000, 2459900, n))
    v = radial_velocity(t, 61.3, 2459013.0, 0.9, np.radians(300.0), 20.0)
    return RVData(t, v + rng.normal(0, 2.0, n), np.full(n, 2.0), np.full(n, "a"))


@pytest.mark.integration
def test_a_steep_orbit_the_sine_periodogram_misses_is_found():
    data = steep_star()
    sine = periodogram(data.time, data.rv, data.err)
    period, _, fap = sine.best()
    assert fap > 1e-3  # the sine peak is not significant (FAP 0.30 here)
    kep = keplerian_periodogram(data.time, data.rv, data.err, None, sine.frequency,
                                n_bootstrap=40, rng=3)  # fmt: skip
    k_period, _, k_fap = kep.best()
    assert k_period == pytest.approx(61.3, rel=0.01) and k_fap < 1e-3
    assert kep.ecc[np.argmax(kep.power)] >= 0.8
    # the searches: sine finds nothing; auto (its Keplerian check when the sine search
    # stops) and keplerian find the companion at the right period
    assert search(data, kind="sine", max_signals=2).significant == []
    for kind in ("auto", "keplerian"):
        res = search(data, kind=kind, max_signals=2, n_bootstrap=30)
        assert len(res.significant) == 1, kind
        c = res.significant[0]
        assert c.period == pytest.approx(61.3, rel=0.01) and c.periodogram == "keplerian"
        assert res.best_fit.params["b.ecc"] > 0.8  # few points on the swing: e loose
    with pytest.raises(ValueError, match="unknown search"):
        search(data, kind="wavelet")
