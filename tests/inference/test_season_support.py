"""A companion's semi-amplitude per observing season and per instrument
(rvkep.choice.season_support, instrument_support): the weighted least-squares solve
against numpy's lstsq, and recovery on invented stars (tests/stars.py)."""

import numpy as np
from stars import signal_in_one_season

from rvkep import choice
from rvkep.optimize import fit_companions
from rvkep.orbit import radial_velocity


def test_seasons_split_at_long_pauses_in_any_order():
    # common practice, no source: a season ends where the star stops being observed
    t = np.array([300.0, 10.0, 12.0, 200.0, 11.0, 230.0 + 80.0])
    assert choice.seasons(t).tolist() == [2, 0, 0, 1, 0, 2]


def _fit(fading):
    data = signal_in_one_season(fading=fading)
    return data, fit_companions(data, [[17.3]])


def test_season_K_is_the_weighted_least_squares_solution():
    # reference: numpy.linalg.lstsq on the whitened design (K, one offset per instrument
    # observed in the season), the other elements fixed at the fit
    data, fit = _fit(False)
    p = fit.params
    shape = radial_velocity(data.time, p["b.period"], p["b.tp"], p["b.ecc"], p["b.omega"], 1.0)
    r = fit.residuals + p["b.K"] * shape
    jit = np.array([p[f"jitter.{i.name}"] for i in fit.model.instruments])
    sw = 1.0 / np.sqrt(data.err**2 + jit[fit.model.inst_index] ** 2)
    got = choice.season_support(fit, "b")
    groups = choice.seasons(data.time)
    assert len(got["seasons"]) == 3
    for g, row in enumerate(got["seasons"]):
        m = groups == g
        cols = [shape[m]] + [(fit.model.inst_index[m] == k).astype(float)
                             for k in np.unique(fit.model.inst_index[m])]  # fmt: skip
        X = np.column_stack(cols) * sw[m, None]
        beta, *_ = np.linalg.lstsq(X, r[m] * sw[m], rcond=None)
        cov = np.linalg.inv(X.T @ X)
        assert np.isclose(row["K"], beta[0], rtol=1e-10)
        assert np.isclose(row["sd"], np.sqrt(cov[0, 0]), rtol=1e-10)
        assert row["n"] == m.sum()


def test_an_orbit_agrees_across_seasons_and_instruments():
    _, fit = _fit(False)
    s = choice.season_support(fit, "b")
    assert s["p"] > 0.01
    assert all(abs(v["K"] - 9.0) < 4 * v["sd"] for v in s["seasons"])
    assert choice.instrument_support(fit, "b")["p"] > 0.01
    assert choice.season_notes(fit) == []


def test_a_signal_of_one_season_is_named():
    _, fit = _fit(True)
    s = choice.season_support(fit, "b")
    first, *later = s["seasons"]
    assert first["K"] > 5.0 and all(abs(v["K"]) < 3 * v["sd"] for v in later)
    notes = choice.season_notes(fit)
    assert len(notes) == 1 and "differs between observing seasons" in notes[0]


def test_a_fading_signal_split_into_two_beating_companions_is_named():
    # the model choice fits this star's fading signal as two companions of constant K
    # (17.35 and 17.48 d, closer in frequency than 1 / span): the pair is named
    data = signal_in_one_season(fading=True)
    fit = fit_companions(data, [[17.35], [17.48]])
    periods = sorted(fit.params[f"{c.label}.period"] for c in fit.model.companions)
    span = np.ptp(data.time)
    assert abs(1 / periods[0] - 1 / periods[1]) < 1 / span
    notes = choice.season_notes(fit)
    assert any("closer in frequency than the data resolve" in n for n in notes)


def test_the_summary_gives_K_per_instrument_and_season():
    from rvkep.report.rows import support_lines

    planet = {"label": "b", "support": {
        "instruments": [{"name": "alder", "K": 8.04, "sd": 0.51, "n": 60},
                        {"name": "birch", "K": 9.3, "sd": 1.2, "n": 50}],
        "chi2_instruments": 0.9, "p_instruments": 0.34,
        "seasons": [{"start": 1.0, "end": 2.0, "K": 8.0, "sd": 0.5, "n": 40},
                    {"start": 400.0, "end": 600.0, "K": 8.8, "sd": 0.5, "n": 40}],
        "chi2_seasons": 1.3, "p_seasons": 0.25}}  # fmt: skip
    (line, blank) = support_lines([planet])
    assert line == ("K of b at the best fit, per instrument alder 8.04 +- 0.51, birch 9.3 +- 1.2 "
                    "m/s (p = 0.34); per observing season 8 +- 0.5, 8.8 +- 0.5 m/s (p = 0.25).")
    assert blank == ""


def test_the_stacked_periodogram_falls_for_a_fading_signal_and_holds_for_an_orbit():
    # Mortier & Collier Cameron 2017, A&A 601, A110: a coherent signal's power grows (or
    # holds) with the number of observations; one that fades loses it
    for fading in (True, False):
        _, fit = _fit(fading)
        rows = choice.stacked_power(fit, "b")
        n = [r["n"] for r in rows]
        power = np.array([r["power"] for r in rows])
        assert n == sorted(set(n)) and n[0] == 8 and n[-1] == 110
        if fading:
            assert power[-1] < 0.5 * power.max()
        else:
            assert power[-1] > 0.9 * power.max()
