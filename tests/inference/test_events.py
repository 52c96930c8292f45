"""Orbital events from the posterior (rvkep/events.py): the true times of a seeded
synthetic star fall inside their windows, and the windows widen as the period's
uncertainty propagates."""

import math
import warnings

import numpy as np
import pytest
from helpers import one_planet, planet_model

from rvkep.events import EVENTS, event_times
from rvkep.orbit import radial_velocity, tp_to_tc
from rvkep.results import Results
from rvkep.sampling import UnconvergedWarning

# the truth of one_planet(): P = 9.4 d, tp = 2459001.0, e = 0.2, omega = 1.0 rad
P, TP, E, W = 9.4, 2459001.0, 0.2, 1.0


@pytest.fixture(scope="module")
def run():
    fit = planet_model(one_planet())
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UnconvergedWarning)
        sampled = fit.sample(seed=4, max_steps=3000, check_every=500, progress=False)
    return Results.from_sampling(sampled)


def test_events_are_the_orbit_function_s_extremes():
    # a draw-free check on one exact orbit: the star's velocity is largest at
    # quadrature_max, smallest at quadrature_min, crosses its mean going down at
    # conjunction, and the conjunction is the one rvkep.orbit.tp_to_tc gives
    cols = {"b.period": np.full(3, P), "b.tc": np.full(3, float(tp_to_tc(TP, P, E, W))),
            "b.ecc": np.full(3, E), "b.omega_deg": np.full(3, math.degrees(W))}  # fmt: skip
    rows = event_times(cols, ["b"], TP, TP + P)
    times = {r["event"]: r["time_median"] for r in rows}
    assert set(times) == set(EVENTS)
    grid = np.linspace(TP, TP + P, 200001)
    v = radial_velocity(grid, P, TP, E, W, 1.0)
    assert times["quadrature_max"] == pytest.approx(grid[np.argmax(v)], abs=1e-3)
    assert times["quadrature_min"] == pytest.approx(grid[np.argmin(v)], abs=1e-3)
    assert times["periastron"] == pytest.approx(TP + P, abs=1e-9) or times["periastron"] == TP
    tc = float(tp_to_tc(TP, P, E, W))
    assert min(abs(times["conjunction"] - tc - k * P) for k in (-1, 0, 1)) < 1e-9
    assert radial_velocity(times["conjunction"] + 1e-3, P, TP, E, W, 1.0) < radial_velocity(
        times["conjunction"] - 1e-3, P, TP, E, W, 1.0)  # fmt: skip


def test_true_times_lie_in_their_windows(run):
    start, end = 2459150.0, 2459400.0  # after the data (which end near 2459150)
    rows = run.events(start, end)
    truth_tc = float(tp_to_tc(TP, P, E, W))
    inside = {"conjunction": [], "periastron": []}
    for r in rows:
        if r["event"] in inside:
            t0 = truth_tc if r["event"] == "conjunction" else TP
            n = round((r["time_median"] - t0) / P)
            true = t0 + n * P
            inside[r["event"]].append(r["time_lo95"] <= true <= r["time_hi95"])
    for event, flags in inside.items():
        assert len(flags) >= 25 and np.mean(flags) >= 0.9, (event, np.mean(flags))


def test_windows_widen_as_the_period_uncertainty_predicts(run):
    # error propagation of t_n = tc + n P: var = var(tc) + n^2 var(P) + 2 n cov(tc, P)
    # (common practice, no source); far from the data the 68% half-width grows
    # linearly with n at the rate sigma_P
    post = run.posterior
    tc, per = post["b.tc"], post["b.period"]
    cov = np.cov(tc, per)
    rows = [r for r in run.events(2459200.0, 2462000.0) if r["event"] == "conjunction"]
    n = np.array([round((r["time_median"] - np.median(tc)) / np.median(per)) for r in rows])
    half = np.array([0.5 * (r["time_hi68"] - r["time_lo68"]) for r in rows])
    law = np.sqrt(cov[0, 0] + n**2 * cov[1, 1] + 2 * n * cov[0, 1])
    assert np.all(np.diff(half) > 0)  # wider with every orbit away from the data
    assert half == pytest.approx(law, rel=0.1)
    slope = np.polyfit(n[-50:], half[-50:], 1)[0]
    assert slope == pytest.approx(math.sqrt(cov[1, 1]), rel=0.1)


def test_command_line_writes_the_documented_columns(run, tmp_path, capsys):
    from rvkep.cli import main

    run.write(tmp_path / "run")
    assert main(["events", str(tmp_path / "run"), "--from", "2459200", "--to", "2459220"]) == 0
    lines = capsys.readouterr().out.splitlines()
    assert lines[0].startswith("# rvkep events:")
    assert lines[1] == ("companion,event,time_median,time_lo68,time_hi68,time_lo95,time_hi95,"
                        "transit_probability")  # fmt: skip
    assert len(lines) - 2 == len(run.events(2459200, 2459220)) >= 10
    assert main(["events", str(tmp_path / "run"), "--from", "5", "--to", "1"]) == 2


def test_an_event_near_a_phase_boundary_is_not_split_between_orbits():
    # periastron a hair before or after conjunction across the draws: one window a
    # fraction of a day wide, not two orbits' worth
    rng = np.random.default_rng(1)
    n = 4000
    cols = {"b.period": np.full(n, 10.0), "b.tc": 100.0 + rng.normal(0, 0.01, n),
            "b.ecc": np.full(n, 0.05), "b.omega_deg": 90.0 + rng.normal(0, 3.0, n)}  # fmt: skip
    rows = [r for r in event_times(cols, ["b"], 125.0, 155.0) if r["event"] == "periastron"]
    assert len(rows) == 3
    for r in rows:
        assert r["time_hi95"] - r["time_lo95"] < 0.5, r


def test_calendar_dates_with_coordinates_and_site(run, tmp_path, capsys):
    from rvkep.cli import main
    from rvkep.timeconv import dates_to_bjd_tdb

    run.write(tmp_path / "run")
    where = ["--ra", "150.5", "--dec=-20.25", "--site=-24.6,-70.4,2600"]  # "=": a leading minus
    assert main(["events", str(tmp_path / "run"), "--from", "2026-12-10", "--to",
                 "2026-12-20", *where]) == 0  # fmt: skip
    lines = capsys.readouterr().out.splitlines()
    assert "calendar dates (UTC) converted to BJD_TDB toward RA 150.5, Dec -20.25" in lines[0]
    start, end = dates_to_bjd_tdb(["2026-12-10", "2026-12-20"], 150.5, -20.25,
                                  (-24.6, -70.4, 2600.0))  # fmt: skip
    medians = [float(x.split(",")[2]) for x in lines[2:]]
    assert len(medians) == len(run.events(start, end)) > 0
    assert all(start <= m <= end for m in medians)
    # without the coordinates a date is refused in one line, exit 2
    assert main(["events", str(tmp_path / "run"), "--from", "2026-12-10", "--to",
                 "2026-12-20"]) == 2  # fmt: skip
    assert "never guessed" in capsys.readouterr().err
    # predictions between two dates step in UTC days: both ends included, each time
    # the BJD_TDB of its own UTC instant (the light time drifts by ~1e-4 d a day, so
    # a step of one BJD day would drop the last date)
    assert main(["predict", str(tmp_path / "run"), "--from", "2026-12-10", "--to",
                 "2026-12-12", "--step", "1", *where]) == 0  # fmt: skip
    times = [float(x.split(",")[0]) for x in capsys.readouterr().out.splitlines()[2:]]
    expect = dates_to_bjd_tdb(["2026-12-10", "2026-12-11", "2026-12-12"], 150.5, -20.25,
                              (-24.6, -70.4, 2600.0))  # fmt: skip
    assert times == pytest.approx(list(expect), abs=1e-5)  # 12 digits: 0.9 s
