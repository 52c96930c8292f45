"""Periodograms, false-alarm levels, aliases and the iterative search."""

import numpy as np
import pytest
from astropy.timeseries import LombScargle

from rvkep.cli import main
from rvkep.data import RVData
from rvkep.orbit import radial_velocity
from rvkep.period_search import search
from rvkep.periodogram import periodogram, spectral_window

SIDEREAL_DAY = 0.99726957  # days (common practice, no source)


def nightly(rng, n, span=600, scatter=0.04):
    """Invented sampling: one visit a night near the same hour angle (so one sidereal
    day apart), with seasonal gaps."""
    nights = np.arange(span)
    nights = nights[(nights % 365) < 240]  # seasonal gaps
    chosen = np.sort(rng.choice(nights, n, replace=False)) * SIDEREAL_DAY
    return 2459000.0 + chosen + rng.normal(0, scatter, n)


def test_single_instrument_matches_astropy():
    # astropy.timeseries.LombScargle (reference library), generalized and weighted
    rng = np.random.default_rng(0)
    t = nightly(rng, 50)
    dy = rng.uniform(1, 2, 50)
    y = 5 * np.sin(2 * np.pi * t / 7.3) + rng.normal(0, dy)
    pg = periodogram(t, y, dy, np.full(50, "a"))
    ref = LombScargle(t, y - np.sum(y / dy**2) / np.sum(1 / dy**2), dy).power(pg.frequency)
    assert np.allclose(pg.power, ref, atol=1e-8)
    ls = LombScargle(t, y, dy)
    fap_ref = ls.false_alarm_probability(
        pg.power.max(), method="baluev",
        minimum_frequency=pg.frequency[0], maximum_frequency=pg.frequency[-1],
    )  # fmt: skip
    assert pg.best()[2] == pytest.approx(fap_ref, rel=1e-6)
    assert pg.best()[0] == pytest.approx(7.3, rel=3e-3)


def test_instrument_offsets_do_not_leak():
    # a 40 m/s offset between two instruments observing in different seasons would
    # show as a long-period peak without centring
    rng = np.random.default_rng(1)
    t = nightly(rng, 80)
    inst = np.where(t < np.median(t), "a", "b")
    y = np.where(inst == "b", 40.0, 0.0) + rng.normal(0, 1, 80)
    pg = periodogram(t, y, np.ones(80), inst)
    assert pg.best()[2] > 0.01


def test_window_is_one_at_zero_and_has_the_daily_alias():
    # nightly sampling: the window has a strong peak at one cycle per sidereal day
    # (common practice, no source)
    rng = np.random.default_rng(2)
    t = nightly(rng, 100)
    w = spectral_window(t, np.array([0.0, 1.0027379, 0.5]))
    assert w[0] == pytest.approx(1.0)
    assert w[1] > 0.8 and w[2] < 0.2


@pytest.mark.slow
def test_false_alarm_rate_on_pure_noise():
    # Baluev's FAP is an upper bound: on pure noise the fraction of datasets with FAP
    # below 1% must not exceed about 1% (Baluev 2008, MNRAS 385, 1279). Invented noise,
    # seed 10; 400 datasets give a binomial sd of 0.5%.
    rng = np.random.default_rng(10)
    hits = 0
    n_sets = 400
    for _ in range(n_sets):
        t = nightly(rng, 60)
        dy = rng.uniform(1, 3, 60)
        pg = periodogram(t, rng.normal(0, dy), dy, np.full(60, "a"))
        hits += pg.best()[2] < 0.01
    print(f"pure noise: {hits} of {n_sets} datasets with FAP < 1%")
    assert hits / n_sets <= 0.02


def test_false_alarm_rate_quick():
    # the same check on 80 datasets (seed 12): at most 3 false alarms at 1%
    rng = np.random.default_rng(12)
    hits = 0
    for _ in range(80):
        t = nightly(rng, 50)
        pg = periodogram(t, rng.normal(0, 1, 50), np.ones(50), np.full(50, "a"))
        hits += pg.best()[2] < 0.01
    assert hits <= 3


def synthetic_two(seed=3):
    """Invented star, seed given: P = 5.8 d (K = 9) and 61 d (K = 14), two instruments."""
    rng = np.random.default_rng(seed)
    t = nightly(rng, 110, span=700)
    inst = np.where(rng.uniform(size=110) < 0.5, "north", "south")
    v = radial_velocity(t, 61.0, 2459010.0, 0.2, 1.0, 14.0) + radial_velocity(
        t, 5.8, 2459001.0, 0.0, 0.0, 9.0
    )
    v += np.where(inst == "south", 25.0, -3.0)
    err = np.full(110, 2.0)
    return RVData(t, v + rng.normal(0, 2.0, 110), err, inst)


def test_search_recovers_injected_signals_in_order():
    data = synthetic_two()
    result = search(data)
    sig = result.significant
    assert len(sig) == 2
    assert sig[0].period == pytest.approx(61.0, rel=0.02)
    assert sig[1].period == pytest.approx(5.8, rel=0.005)
    assert sig[0].K == pytest.approx(14.0, rel=0.15) and sig[1].K == pytest.approx(9.0, rel=0.15)
    assert not result.candidates[-1].significant
    assert f"{sig[0].period:.4f}" in result.table().split("\n")[1]


def test_search_on_noise_finds_nothing():
    rng = np.random.default_rng(4)
    t = nightly(rng, 60)
    data = RVData(t, rng.normal(0, 3, 60), np.full(60, 3.0), np.full(60, "a"))
    assert search(data).significant == []


def test_daily_alias_is_flagged():
    # nightly sampling, true P = 1.5 d: its one-day alias at 1/|1/1.5 - 1.0027| = 2.98 d
    # competes (Dawson & Fabrycky 2010, ApJ 722, 937), and the flag says so
    rng = np.random.default_rng(6)
    t = nightly(rng, 70, scatter=0.03)
    y = 6 * np.sin(2 * np.pi * t / 1.5) + rng.normal(0, 1.5, 70)
    data = RVData(t, y, np.full(70, 1.5), np.full(70, "a"))
    result = search(data, max_signals=1)
    cand = result.candidates[0]
    assert cand.period == pytest.approx(1.5, rel=1e-3) or cand.period == pytest.approx(
        2.98, rel=1e-2
    )
    flagged = {a.kind: a for a in cand.aliases if a.flagged}
    assert "day-" in flagged or "day+" in flagged
    other = [a.period for a in flagged.values()]
    assert any(abs(p - 2.98) < 0.05 or abs(p - 1.5) < 0.01 for p in other)


def test_activity_indicator_peak_is_reported():
    # an activity column varying with the same 13 d period as the velocities
    rng = np.random.default_rng(7)
    t = nightly(rng, 80)
    y = 8 * np.sin(2 * np.pi * t / 13.0) + rng.normal(0, 1.5, 80)
    fwhm = 7.0 + 0.05 * np.sin(2 * np.pi * t / 13.0) + rng.normal(0, 0.01, 80)
    data = RVData(t, y, np.full(80, 1.5), np.full(80, "a"), {"fwhm": fwhm})
    result = search(data, max_signals=1)
    assert result.candidates[0].activity == ["fwhm"]


def test_periodogram_command(tmp_path, capsys):
    data = synthetic_two()
    for name in data.instruments:
        m = data.instrument == name
        rows = "\n".join(
            f"{a:.6f} {b:.3f} {c:.3f}"
            for a, b, c in zip(data.time[m], data.rv[m], data.err[m], strict=True)
        )
        (tmp_path / f"{name}.txt").write_text(rows + "\n")
    out = tmp_path / "out"
    code = main(
        ["periodogram", str(tmp_path / "north.txt"), str(tmp_path / "south.txt"), "--out", str(out)]
    )
    assert code == 0
    text = capsys.readouterr().out
    assert "FAP" in text and (out / "periodogram.png").stat().st_size > 10_000
    assert (
        main(
            ["periodogram", str(tmp_path / "north.txt"), "--min-period", "50", "--max-period", "10"]
        )
        == 2
    )
