"""Observing plans (rvkep/sky.py, rvkep/plan.py, ``rvkep plan``): the Sun's altitude
against a worked example, night and airmass limits against a separate astropy
computation, the greedy design against the conjugate-Gaussian posterior, and the
epochs a practitioner would pick."""

import math
import warnings

import numpy as np
import pytest
from helpers import finished_run

from rvkep.orbit import radial_velocity
from rvkep.plan import choose_epochs, plan_epochs
from rvkep.results import Results
from rvkep.sky import SkyGrid, altitudes, observing_grid

SITE = (-29.26, -70.73, 2400.0)  # a southern mountain site (invented use of a real place)
STAR = (75.0, -30.0)  # RA, Dec (degrees): well placed in December from there


def _gmst_deg(jd_ut):
    # mean sidereal time at Greenwich: Meeus, Astronomical Algorithms (2nd ed.), eq. 12.4
    T = (jd_ut - 2451545.0) / 36525.0
    return (280.46061837 + 360.98564736629 * (jd_ut - 2451545.0) + 0.000387933 * T * T
            - T**3 / 38710000.0) % 360.0  # fmt: skip


def test_sun_altitude_matches_a_worked_example():
    # Meeus, Astronomical Algorithms (2nd ed.), Example 25.a (from memory): the Sun's
    # apparent place on 1992 October 13.0 TD is RA 13h13m31.4s, Dec -7d47'06". TD - UTC
    # was 59.184 s then (27 leap seconds + 32.184 s), so the instant is 1992-10-12
    # 23:59:00.816 UTC. The altitude follows from sin h = sin(phi) sin(dec) +
    # cos(phi) cos(dec) cos(H), H = GMST + longitude - RA (Meeus eq. 13.6). A clock
    # handled as TT instead of UTC (59 s) moves the altitude by 0.2 deg here.
    # first, the test's own sidereal-time formula on Meeus's Example 12.a:
    # 1987 April 10, 0h UT -> 13h10m46.3668s
    assert _gmst_deg(2446895.5) == pytest.approx((13 + 10 / 60 + 46.3668 / 3600) * 15, abs=1e-6)
    ra = (13 + 13 / 60 + 31.4 / 3600) * 15
    dec = -(7 + 47 / 60 + 6 / 3600)
    jd_utc = 2448908.5 - 59.184 / 86400
    for lat, lon in ((20.0, -30.0), (-35.0, 150.0), (52.0, 5.0)):
        H = math.radians(_gmst_deg(jd_utc + 0.0) + lon - ra)  # UT1 = UTC to 1 s in 1992
        phi, d = math.radians(lat), math.radians(dec)
        h = math.degrees(math.asin(math.sin(phi) * math.sin(d)
                                   + math.cos(phi) * math.cos(d) * math.cos(H)))  # fmt: skip
        sun, _ = altitudes(np.array([jd_utc]), (lat, lon, 0.0), 0.0, 0.0)
        # 0.01 deg: nutation in RA (mean vs apparent sidereal time, <= 17"), the Sun's
        # parallax (9") and the example's rounding
        assert sun[0] == pytest.approx(h, abs=0.01), (lat, lon)


def test_night_and_airmass_agree_with_a_separate_astropy_computation():
    from astropy import units as u
    from astropy.coordinates import AltAz, EarthLocation, SkyCoord, get_sun
    from astropy.time import Time
    from scipy.optimize import brentq

    grid = observing_grid(SITE, *STAR, "2026-12-10", 3, step_minutes=5, max_airmass=1.8)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        where = EarthLocation(lat=SITE[0] * u.deg, lon=SITE[1] * u.deg, height=SITE[2] * u.m)
        t = Time(grid.utc_jd, format="jd", scale="utc")
        frame = AltAz(obstime=t, location=where)
        sun = get_sun(t).transform_to(frame).alt.deg
        star = SkyCoord(STAR[0] * u.deg, STAR[1] * u.deg).transform_to(frame)
        secz = np.where(star.alt.deg > 0, star.secz.value, np.inf)
    mine = grid.observable
    theirs = (sun < -12) & (secz <= 1.8)
    # equal except within a hair of a limit (the geocentric get_sun vs topocentric Sun)
    near = (np.abs(sun + 12) < 0.01) | (np.abs(secz - 1.8) < 1e-3)
    assert np.array_equal(mine[~near], theirs[~near])
    assert mine.sum() > 100
    # each night's observable stretch starts at the end of nautical twilight (or when
    # the star climbs below the limit), found here by root-finding on astropy's Sun
    for k in range(3):
        on = np.flatnonzero(mine & (grid.night == k))
        j = on[0]
        if grid.airmass[j - 1] > 1.8:
            continue  # the star, not the Sun, opened the night
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")

            def alt(jd):
                tt = Time(jd, format="jd", scale="utc")
                return get_sun(tt).transform_to(AltAz(obstime=tt, location=where)).alt.deg + 12

            dusk = brentq(alt, grid.utc_jd[j] - 1 / 24, grid.utc_jd[j])
        assert 0 <= grid.utc_jd[j] - dusk <= 5 / 1440 + 1e-6
    # the nights keep their evening's date; BJD_TDB only where observable
    assert grid.night_dates == ["2026-12-10", "2026-12-11", "2026-12-12"]
    assert np.all(np.isfinite(grid.bjd_tdb[mine])) and np.all(np.isnan(grid.bjd_tdb[~mine]))
    assert np.all(np.diff(grid.utc_jd) > 0)


def _linear_model(n=60, seed=3):
    # v(t) = a sin(wt) + b cos(wt) + c with a Gaussian prior on (a, b, c): the
    # Bayes-linear update is then exact (Bishop 2006, PRML, eq. 3.50-3.51)
    rng = np.random.default_rng(seed)
    t = np.sort(rng.uniform(0, 10, n))
    phi = np.column_stack([np.sin(2 * np.pi * t / 3.7), np.cos(2 * np.pi * t / 3.7), np.ones(n)])
    a = rng.normal(size=(3, 3))
    s0 = a @ a.T + 0.5 * np.eye(3)
    return t, phi, s0


def test_greedy_update_equals_the_conjugate_gaussian_posterior():
    t, phi, s0 = _linear_model()
    noise = 0.7**2
    night = np.floor(t).astype(int)
    c = choose_epochs(phi @ s0 @ phi.T, noise, night, cov_tv=phi @ s0[:, 0],
                      var_theta=s0[0, 0], per_night=2, count=5)  # fmt: skip
    assert c.order.size == 5 and len(set(c.order)) == 5
    # at most two per night
    assert np.bincount(night[c.order]).max() <= 2
    for k in range(1, 6):
        chosen = phi[c.order[:k]]
        post = np.linalg.inv(np.linalg.inv(s0) + chosen.T @ chosen / noise)  # Bishop eq. 3.51
        assert c.variance_after[k - 1] == pytest.approx(post[0, 0], rel=1e-10)
    # the first scores: one measurement's share of Var(a), from the same formula
    for j in (0, 17, 42):
        post = np.linalg.inv(np.linalg.inv(s0) + np.outer(phi[j], phi[j]) / noise)
        assert c.first_scores[j] == pytest.approx(1 - post[0, 0] / s0[0, 0], rel=1e-10)
    # each pick was the best left: its score is the largest of the first scores only
    # for the first pick
    assert c.scores[0] == pytest.approx(np.nanmax(c.first_scores))
    # no aim: the gains add up to the mutual information of the chosen velocities,
    # 0.5 ln det(I + Phi S0 Phi^T / s^2) (Gaussian channel; Cover & Thomas 2006, ch. 9)
    call = choose_epochs(phi @ s0 @ phi.T, noise, night, per_night=1, count=4)
    chosen = phi[call.order]
    mi = 0.5 * np.linalg.slogdet(np.eye(4) + chosen @ s0 @ chosen.T / noise)[1]
    assert call.scores.sum() == pytest.approx(mi, rel=1e-10)
    assert np.all(np.diff(call.scores) <= 1e-12)  # gains only fall as the orbit is learnt
    # the arguments are left alone
    cov = phi @ s0 @ phi.T
    before = cov.copy()
    choose_epochs(cov, noise, night, count=3)
    assert np.array_equal(cov, before)


def _circular_posterior(n=3000, seed=8):
    # a circular orbit P = 10 d, K = 20 +- 1 m/s, conjunction 2459000.0 +- 0.02 d: with
    # omega = 90 deg, v = K cos(nu + omega) = -K sin(nu) crosses its mean going down at
    # nu = 0, so the conjunction is the periastron time of the circular orbit
    rng = np.random.default_rng(seed)
    tc = 2459000.0 + rng.normal(0, 0.02, n)
    period = 10.0 + rng.normal(0, 1e-3, n)
    cols = {
        "b.period": period, "b.K": 20.0 + rng.normal(0, 1.0, n), "b.ecc": np.zeros(n),
        "b.omega_deg": np.full(n, 90.0), "b.tc": tc, "b.tp": tc,
        "offset.a": rng.normal(0, 0.3, n),
    }  # fmt: skip
    return cols


def _flat_grid(t):
    n = t.size
    night = np.floor(t - t[0]).astype(int)
    dates = [f"night {k}" for k in range(night.max() + 1)]
    return SkyGrid(t - 0.0, t, night, dates, np.full(n, -30.0), np.full(n, 60.0),
                   np.full(n, 1.15), np.ones(n, bool), -12.0, 2.0)  # fmt: skip


@pytest.mark.parametrize("aim, near", [("b.K", "quadrature"), ("b.tc", "conjunction")])
def test_the_plan_picks_the_phases_a_practitioner_would(aim, near):
    # common practice, no source: K is measured at quadratures, the conjunction time
    # where the velocity crosses its mean (conjunction and opposition)
    cols = _circular_posterior()
    t = 2459400.0 + np.arange(0, 30, 0.02)
    plan = plan_epochs(cols, ["b"], _flat_grid(t), epoch=2459000.0, time_offset=0.0,
                       instrument="a", noise_var=4.0, aim=aim, count=6)  # fmt: skip
    phase = 2 * np.pi * (t[plan.choice.order] - 2459000.0) / 10.0
    v = radial_velocity(t[plan.choice.order], 10.0, 2459000.0, 0.0, np.pi / 2, 1.0)
    assert np.allclose(v, -np.sin(phase), atol=1e-9)
    if near == "quadrature":
        assert np.all(np.abs(v) > 0.95), v
    else:
        assert np.all(np.abs(v) < 0.3), v
    assert plan.aim_sd[1] < plan.aim_sd[0]


@pytest.fixture(scope="module")
def run_dir(tmp_path_factory):
    return finished_run(tmp_path_factory.mktemp("plan") / "run")


def test_plan_command_writes_observable_epochs_and_a_figure(run_dir, tmp_path, capsys):
    from astropy import units as u
    from astropy.coordinates import AltAz, EarthLocation, SkyCoord, get_sun
    from astropy.time import Time

    from rvkep.cli import main

    out = tmp_path / "plan.csv"
    args = ["plan", str(run_dir), f"--site={SITE[0]},{SITE[1]},{SITE[2]:g}", "--ra",
            str(STAR[0]), "--dec", str(STAR[1]), "--start", "2026-12-10", "--nights", "8",
            "--epochs", "5", "--max-airmass", "1.5", "--out", str(out)]  # fmt: skip
    assert main(args) == 0
    lines = out.read_text().splitlines()
    assert lines[0].startswith("# rvkep plan:") and "Loredo 2004" in lines[0]
    assert lines[1].split(",") == ["night", "utc", "time", "sun_alt_deg", "target_alt_deg",
                                   "airmass", "velocity_sd_mps", "score", "rank",
                                   "aim_sd_after"]  # fmt: skip
    rows = [dict(zip(lines[1].split(","), line.split(","), strict=True)) for line in lines[2:]]
    assert len(rows) == 5 and sorted(int(r["rank"]) for r in rows) == [1, 2, 3, 4, 5]
    assert (tmp_path / "plan.png").stat().st_size > 10_000
    # never daytime, never past the airmass limit: checked with astropy directly
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        where = EarthLocation(lat=SITE[0] * u.deg, lon=SITE[1] * u.deg, height=SITE[2] * u.m)
        t = Time([r["utc"] for r in rows], format="isot", scale="utc")
        frame = AltAz(obstime=t, location=where)
        assert np.all(get_sun(t).transform_to(frame).alt.deg < -12 + 0.01)
        star = SkyCoord(STAR[0] * u.deg, STAR[1] * u.deg).transform_to(frame)
        assert np.all(star.secz.value <= 1.5 + 1e-3) and np.all(star.alt.deg > 0)
    # the same plan from Python; the default aim is the least-constrained of P and K
    res = Results.load(run_dir)
    plan = res.plan(site=SITE, ra=STAR[0], dec=STAR[1], start="2026-12-10", nights=8,
                    count=5, max_airmass=1.5)  # fmt: skip
    assert plan.aim == "b.K" and f"variance of {plan.aim}" in lines[0]
    assert [r["utc"] for r in plan.rows()] == [r["utc"] for r in rows]
    assert float(rows[0]["time"]) == pytest.approx(plan.rows()[0]["time"], abs=1e-5)
    # bad requests: one line each
    for extra, message in (
        (["--aim", "b.nonsense"], "is not a parameter of the run"),
        (["--instrument", "nowhere"], "unknown instrument"),
        (["--per-night", "0"], "--per-night must be from 1 to 100, got 0"),
    ):
        assert main([*args[:-2], *extra]) == 2
        err = capsys.readouterr().err.strip()
        assert len(err.splitlines()) == 1 and message in err, err
    north = [*args[:5], "--dec", "80", *args[7:-2]]  # never rises from the south
    assert main(north) == 2
    assert "never observable" in capsys.readouterr().err
