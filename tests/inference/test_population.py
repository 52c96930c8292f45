"""From stars to a population (rvkep/hierarchy.py). The reweighting is checked against
a closed form (Gaussian measurements of a Gaussian population: the marginal of each
measurement is N(mu, tau^2 + sigma^2), common practice, no source); the Beta
eccentricity population and the occurrence rate on invented populations of known
truth (e from Beta(0.867, 3.03), Kipping 2013)."""

import numpy as np
import pytest
from scipy.stats import norm

from rvkep.hierarchy import (
    MAX_SAMPLES,
    StarRecord,
    _thin,
    beta_population,
    importance_loglike,
    occurrence,
)
from rvkep.priors import Uniform


def test_reweighting_equals_the_gaussian_closed_form():
    rng = np.random.default_rng(1)
    mu, tau, sigma, n, K = 2.0, 0.7, 0.5, 25, 40_000
    theta = rng.normal(mu, tau, n)
    x = rng.normal(theta, sigma)
    # each member's posterior under a flat prior (ln pi = 0): N(x_j, sigma^2)
    samples = [rng.normal(xj, sigma, K) for xj in x]
    for m, t in ((2.0, 0.7), (1.5, 1.2), (2.4, 0.3)):
        got = importance_loglike([norm.logpdf(s, m, t) for s in samples])
        # the samples carry the likelihood only up to its constant N(x; theta, sigma)
        # integrates to 1 over theta: ln L = sum ln N(x_j; m, t^2 + sigma^2)
        exact = np.sum(norm.logpdf(x, m, np.hypot(t, sigma)))
        assert got == pytest.approx(exact, abs=0.05), (m, t)


def _posteriors(e_true, rng, sd=0.08, K=1500):
    """Posterior samples of e under a uniform prior on [0, 0.99] from a Gaussian
    measurement of sd ``sd``: the truncation at 0 biases small medians upward."""
    stars = []
    for j, e in enumerate(e_true):
        obs = rng.normal(e, sd)
        draws = rng.normal(obs, sd, 20 * K)
        draws = draws[(draws >= 0) & (draws < 0.99)][:K]
        draws = _thin(draws, MAX_SAMPLES)  # as a batch read thins them
        stars.append(StarRecord(f"s{j}", [{"label": "b", "ecc": draws, "prior": Uniform(0, 0.99),
                                           "period": np.full(10, 10.0),
                                           "msini": np.full(10, 1.0)}]))  # fmt: skip
    return stars


@pytest.mark.slow
def test_beta_population_recovers_the_mean_better_than_per_star_medians():
    truth = 0.867 / (0.867 + 3.03)
    wins, inside = 0, 0
    for k in range(10):
        rng = np.random.default_rng(100 + k)
        e = rng.beta(0.867, 3.03, 30)
        stars = _posteriors(e, rng)
        pop = beta_population(stars, rng=k, steps=600)
        lo, hi = np.percentile(pop["mean"], [2.5, 97.5])
        inside += lo <= truth <= hi
        naive = np.mean([np.median(s.companions[0]["ecc"]) for s in stars])
        wins += abs(np.median(pop["mean"]) - truth) < abs(naive - truth)
    assert inside >= 9 and wins >= 7, (inside, wins)


def test_beta_population_of_one_sample_set():
    rng = np.random.default_rng(3)
    stars = _posteriors(rng.beta(0.867, 3.03, 30), rng)
    pop = beta_population(stars, rng=0, steps=600)
    lo, hi = np.percentile(pop["mean"], [2.5, 97.5])
    assert lo <= 0.2225 <= hi
    assert len(pop["shrunk"]) == 30 and all(0 <= e < 1 for e in pop["shrunk"])


def test_occurrence_with_completeness_recovers_the_fraction():
    rng = np.random.default_rng(5)
    n, f_true, c = 200, 0.5, 0.6
    has = rng.uniform(size=n) < f_true
    seen = has & (rng.uniform(size=n) < c)
    P, m = np.geomspace(1, 1000, 6), np.geomspace(0.1, 13, 6)
    grid = np.array([(p, q, 6.0, 10.0) for p in P for q in m])  # 60% recovered
    stars = []
    for j in range(n):
        one = {"label": "b", "period": np.full(50, 30.0), "msini": np.full(50, 1.0),
               "ecc": np.full(50, 0.1), "prior": Uniform(0, 0.99)}
        comps = [one] if seen[j] else []
        stars.append(StarRecord(f"s{j}", comps, limits=grid))
    occ = occurrence(stars, (1.0, 1000.0), (0.1, 13.0))
    lo, hi = occ["interval95"]
    assert lo <= f_true <= hi and occ["n_hosts"] == int(seen.sum())
    assert occ["completeness"]["s0"] == pytest.approx(0.6)
    # ignoring completeness would have given about f c = 0.3
    assert occ["fraction"]["median"] > 0.4 and occ["without_limits"] == []


@pytest.fixture(scope="module")
def batch(tmp_path_factory):
    """A quick batch of three invented stars (tests/helpers.py's make_targets)."""
    from helpers import make_targets

    from rvkep.cli import main

    root = tmp_path_factory.mktemp("pop")
    targets = make_targets(root / "in", 3)
    main(["batch", str(targets), "--out", str(root / "batch"), "--quick", "--quiet",
          "--workers", "2"])  # fmt: skip
    return root / "batch"


@pytest.mark.integration
def test_population_command_end_to_end(batch, tmp_path, capsys):
    import json

    from rvkep.cli import main

    out = tmp_path / "pop"
    # quick runs are skipped by default: then nothing is left, one line, exit 2
    assert main(["population", str(batch), "--out", str(out)]) == 2
    err = capsys.readouterr().err.strip()
    assert "no finished target to use" in err and "quick run" in err
    assert len(err.splitlines()) == 1 and not out.exists()
    assert main(["population", str(batch), "--out", str(out), "--include-quick",
                 "--period-range", "1,100", "--quiet"]) == 0  # fmt: skip
    doc = json.loads((out / "population.json").read_text())
    assert doc["n_stars"] == 3 and doc["n_companions"] >= 2
    assert {s["name"]: s["reason"] for s in doc["skipped"]}["broken"] == "failed"
    e = doc["eccentricity"]
    assert e["distribution"] == "beta" and set(e["mean"]) == {"median", "minus", "plus"}
    occ = doc["occurrence"]
    assert occ["period_range_d"] == [1.0, 100.0] and occ["stars_without_limits"]
    assert 0 <= occ["fraction"]["median"] <= 1
    assert (out / "eccentricity.png").exists() and (out / "occurrence.png").exists()
    assert "completeness 1" in (out / "population.md").read_text()


def test_population_refuses_a_folder_that_is_no_batch(tmp_path, capsys):
    from rvkep.cli import main

    assert main(["population", str(tmp_path), "--out", str(tmp_path / "p")]) == 2
    err = capsys.readouterr().err.strip()
    assert err.endswith("not a batch folder (no summary.csv; run rvkep batch first)")


@pytest.mark.integration
def test_a_population_inside_the_batch_shows_in_its_index(batch, capsys):
    from rvkep.cli import main

    out = batch / "population"
    argv = ["population", str(batch), "--out", str(out), "--include-quick", "--quiet"]
    assert main(argv) == 0
    page = (batch / "index.html").read_text()
    assert '<section id="population">' in page and 'href="./population/population.md"' in page
    assert 'src="./population/eccentricity.png"' in page
    # the population's own folder is not read as a star, and a rerun into it is allowed
    assert main(argv) == 0
    import json

    doc = json.loads((out / "population.json").read_text())
    assert "population" not in doc["stars"] + [s["name"] for s in doc["skipped"]]
