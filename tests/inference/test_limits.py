"""Detection limits (rvkep/limits.py, ``rvkep limits``): the many-series periodogram
against astropy, the 50% curve against its closed form in white noise, the 95% curve
on a held-out star, and a killed run that resumes to the same table."""

import json
import os
import subprocess
import sys
import time

import numpy as np
import pytest
from helpers import finished_run

from rvkep.limits import (
    EARTH_PER_JUPITER,
    LimitsSetup,
    _search_grid,
    completeness_curves,
    k50_white_noise,
    row_injections,
    run_limits,
)
from rvkep.periodogram import periodogram, power_many
from rvkep.physics import minimum_mass


def test_many_series_periodogram_is_the_periodogram():
    # two instruments: each series centred per instrument, then astropy's generalized
    # Lomb-Scargle periodogram (rvkep.periodogram.periodogram); to 1e-10
    rng = np.random.default_rng(1)
    n = 70
    t = np.sort(rng.uniform(0, 500, n)) + 2459000
    inst = np.where(rng.uniform(size=n) < 0.5, "x", "y")
    dy = rng.uniform(1, 4, n)
    ys = rng.normal(0, 3, (4, n)) + np.where(inst == "x", 10.0, -4.0)
    f = np.linspace(0.002, 0.8, 5000)
    many = power_many(t, ys, dy, inst, f, chunk=1000)
    for k in range(4):
        one = periodogram(t, ys[k], dy, inst, f).power
        assert np.max(np.abs(many[k] - one)) < 1e-10


def _white(seed, n=60, sigma=2.0):
    rng = np.random.default_rng(seed)
    t = np.sort(rng.uniform(2459000, 2459600, n))
    return t, rng.normal(0, sigma, n), np.full(n, sigma)


def _setup(t, resid, dy, periods, masses, n_inj, seed=0, circular=True):
    return LimitsSetup(time=t, residuals=resid, dy=dy, instrument=np.full(t.size, "a"),
                       period_edges=np.asarray(periods, float),
                       mass_edges=np.asarray(masses, float), n_injections=n_inj, star_mass=1.0,
                       seed=seed, circular=circular)  # fmt: skip


def test_fifty_percent_curve_matches_the_closed_form_in_white_noise():
    # circular orbits in white noise of known sigma (three seeded series, two period
    # rows each): the injections' 50% semi-amplitude over k50_white_noise (noncentral
    # chi-square at the Baluev 0.1% level, with each series' own leftover chi-square)
    # is 1 within 5% on average and within 12% per row (60 injections per cell: +-6%)
    ratios = []
    for seed in (3, 4, 5):
        t, resid, dy = _white(seed)
        _, pg = _search_grid(_setup(t, resid, dy, [5.0, 6.0], [1.0, 2.0], 1))
        left = float(np.sum(((resid - resid.mean()) / 2.0) ** 2)) - 2.0
        k50 = k50_white_noise(2.0, t.size, pg.level(1e-3), leftover=left)
        assert 1.0 < k50 < 3.0  # about 2 m/s for 60 points of 2 m/s
        masses = [float(minimum_mass(15.0, k50 * x, 0.0, 1.0)) * EARTH_PER_JUPITER
                  for x in np.geomspace(0.4, 2.5, 13)]  # fmt: skip
        centres = np.sqrt(np.array(masses[:-1]) * np.array(masses[1:]))
        setup = _setup(t, resid, dy, [7.0, 9.0, 23.0, 29.0], masses, 60, seed=2)
        for row, centre in ((0, np.sqrt(63.0)), (2, np.sqrt(667.0))):
            r = row_injections(setup, row)
            comp = np.array(r["recovered"]) / np.array(r["tried"])
            curve = completeness_curves([centre], centres, comp[None, :], 1.0)[0]
            ratios.append(curve["k50_mps"] / k50)
    assert abs(np.mean(ratios) - 1.0) < 0.05 and max(abs(np.array(ratios) - 1.0)) < 0.12, ratios


def test_companions_above_the_95_percent_curve_are_recovered_on_a_held_out_star(tmp_path):
    # the curve from one seeded white-noise star; companions 1.2x above it at random
    # phases injected into another seed's noise at the same epochs are recovered at
    # least 90% of the time over 240 injections (the expected rate is >= 95%: 90% is
    # 3.5 binomial sigma below it)
    t, resid, dy = _white(5)
    masses = list(np.geomspace(1.0, 100.0, 15))
    periods = [3.0, 4.0, 20.0, 27.0, 70.0, 90.0]
    setup = _setup(t, resid, dy, periods, masses, 30, seed=4, circular=False)
    lim = run_limits(setup, tmp_path, quiet=True)
    curves = lim.curves()
    _, other, _ = _white(6)
    recovered = tried = 0
    for i in (0, 2, 4):
        m95 = curves[i]["msini95_mearth"]
        assert m95 is not None
        held = _setup(t, other, dy, periods[i : i + 2], [1.2 * m95, 1.3 * m95], 80, seed=9,
                      circular=False)  # fmt: skip
        r = row_injections(held, 0)
        recovered += r["recovered"][0]
        tried += r["tried"][0]
    assert tried == 240 and recovered / tried >= 0.90, recovered / tried


@pytest.fixture(scope="module")
def run_dir(tmp_path_factory):
    return finished_run(tmp_path_factory.mktemp("limits") / "run", n=60)


@pytest.mark.integration
def test_limits_command_writes_its_tables_and_resumes_after_a_kill(run_dir, tmp_path):
    from rvkep.cli import main

    args = ["--grid", "10", "--injections", "12", "--seed", "3", "--quiet"]
    whole = tmp_path / "whole"
    assert main(["limits", str(run_dir), "--out", str(whole), *args]) == 0
    head = (whole / "limits.csv").read_text().splitlines()[1]
    assert head == "period_d,msini_mearth,K_mps,recovered,tried"
    curves = (whole / "limits_curves.csv").read_text().splitlines()[1]
    assert curves == "period_d,k50_mps,k95_mps,msini50_mearth,msini95_mearth"
    assert (whole / "limits.png").stat().st_size > 10_000
    saved = json.loads((whole / "results.json").read_text())
    assert len(saved["limits"]["curves"]) == 10 and "Beta(0.867, 3.03)" in saved["limits"]["method"]
    assert "## Detection limits" in (whole / "summary.md").read_text()
    # a run killed after its first rows resumes and ends with the same table
    killed = tmp_path / "killed"
    cmd = [sys.executable, "-m", "rvkep", "limits", str(run_dir), "--out", str(killed), *args]
    proc = subprocess.Popen(cmd, stderr=subprocess.PIPE)
    parts = killed / "limits_parts"
    deadline = time.monotonic() + 120
    while time.monotonic() < deadline and len(list(parts.glob("row_*.json"))) < 3:
        time.sleep(0.02)
    proc.kill()
    proc.wait()
    n_before = len(list(parts.glob("row_*.json")))
    assert 3 <= n_before < 10 and not (killed / "limits.csv").exists()
    stamp = {p.name: p.stat().st_mtime_ns for p in parts.glob("row_*.json")}
    done = subprocess.run(cmd[:-1], capture_output=True, text=True, timeout=300)
    assert done.returncode == 0, done.stderr
    assert f"resuming, {n_before} of 10 period rows already done" in done.stderr
    assert all(p.stat().st_mtime_ns == stamp[p.name] for p in parts.glob("row_*.json")
               if p.name in stamp)  # fmt: skip
    assert (killed / "limits.csv").read_text() == (whole / "limits.csv").read_text()
    # another seed changes the answer: nothing is reused
    again = subprocess.run([*cmd[:-2], "4"], capture_output=True, text=True, timeout=300)
    assert again.returncode == 0 and "resuming" not in again.stderr
    assert (killed / "limits.csv").read_text() != (whole / "limits.csv").read_text()
    assert os.path.exists(killed / "limits_curves.csv")


@pytest.mark.integration
def test_the_same_table_on_local_processes_and_a_dask_cluster(tmp_path):
    distributed = pytest.importorskip("distributed")
    t, resid, dy = _white(8)
    setup = _setup(t, resid, dy, np.geomspace(2, 200, 5), np.geomspace(1, 50, 6), 6, seed=1,
                   circular=False)  # fmt: skip
    here = run_limits(setup, tmp_path / "here", quiet=True)
    pool = run_limits(setup, tmp_path / "pool", workers=2, quiet=True)
    with distributed.LocalCluster(
        n_workers=2, threads_per_worker=1, processes=True, host="127.0.0.1",
        dashboard_address="127.0.0.1:0", local_directory=str(tmp_path / "dask"),
    ) as cluster:  # fmt: skip
        dask = run_limits(setup, tmp_path / "dask_out", scheduler=cluster.scheduler_address,
                          quiet=True)  # fmt: skip
    for other in (pool, dask):
        assert np.array_equal(other.recovered, here.recovered)
        assert np.array_equal(other.K, here.K)
    assert here.tried.sum() == 4 * 5 * 6
