"""How sure: evidence by nested sampling through the pipeline, and the eccentricity
test (Lucy & Sweeney 1971). Synthetic-recovery tests on invented, seeded stars."""

import json
import math
import warnings

import numpy as np
import pytest
from helpers import one_planet, write_table
from scipy import stats

from rvkep.data import RVData
from rvkep.eccentricity import eccentricity_tests, lucy_sweeney
from rvkep.evidence import EVIDENCE_THRESHOLD
from rvkep.model_choice import choose_model
from rvkep.orbit import radial_velocity
from rvkep.pipeline import AnalyzeOptions


def star(ecc, seed, n=40, K=12.0, err=2.0):
    """One planet (P = 9.4 d) of eccentricity ``ecc``; invented, seeded."""
    rng = np.random.default_rng(seed)
    t = np.sort(rng.uniform(2459000, 2459150, n))
    v = radial_velocity(t, 9.4, 2459001.0, ecc, 1.0, K)
    return RVData(t, v + rng.normal(0, err, n), np.full(n, err), np.full(n, "a"))


def short_posterior(data):
    from rvkep.optimize import fit_companions
    from rvkep.posterior import PosteriorSamples
    from rvkep.sampling import UnconvergedWarning

    fit = fit_companions(data, [[9.4]])
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UnconvergedWarning)
        run = fit.sample(seed=1, max_steps=1500, check_every=500, progress=False)
    return fit, PosteriorSamples.from_chain(fit.model, run.flat)


def test_lucy_sweeney_formula():
    # p = exp(-e^2 / (2 sigma^2)) (Lucy & Sweeney 1971, eq. 19): 1 at e = 0, exp(-1/2)
    # at one sigma, and the Rayleigh tail: uniform when e is Rayleigh-distributed
    assert lucy_sweeney(0.0, 0.1) == 1.0
    assert lucy_sweeney(0.1, 0.1) == pytest.approx(math.exp(-0.5))
    rng = np.random.default_rng(0)
    e = np.hypot(*rng.normal(0, 0.03, (2, 20000)))  # a circular orbit's fitted e
    p = np.array([lucy_sweeney(x, 0.03) for x in e])
    assert stats.kstest(p, "uniform").pvalue > 0.01


def test_an_eccentric_orbit_is_called_eccentric():
    fit, post = short_posterior(star(0.3, seed=2, K=20.0, err=1.5))
    t = eccentricity_tests(fit, post)["b"]
    assert t["lucy_sweeney_p"] < 1e-6 and not t["consistent_with_circular"]
    assert t["delta_bic_circular_minus_eccentric"] > 10


@pytest.mark.slow
def test_lucy_sweeney_probability_is_uniform_for_circular_orbits():
    # seeded circular stars: the test's probability should be about uniform
    p = []
    for seed in range(30):
        fit, post = short_posterior(star(0.0, seed=100 + seed))
        p.append(eccentricity_tests(fit, post)["b"]["lucy_sweeney_p"])
    assert stats.kstest(p, "uniform").pvalue > 0.01, sorted(p)


@pytest.mark.integration
def test_circular_auto_refits_a_circular_orbit(tmp_path):
    from rvkep.cli import main

    d = star(0.0, seed=5)
    f = write_table(d, tmp_path / "a.txt")
    out = tmp_path / "out"
    assert main(["analyze", str(f), "--quick", "--quiet", "--trend", "0", "--max-companions", "1",
                 "--circular", "auto", "--out", str(out)]) == 0  # fmt: skip
    r = json.loads((out / "results.json").read_text())
    t = r["planets"][0]["ecc_test"]
    assert t["consistent_with_circular"] and t["refitted_circular"]
    assert ["b.ecc", "fixed at 0 (circular)"] in [[p["parameter"], p["prior"]]
                                                  for p in r["priors"]]  # fmt: skip
    assert any("--circular auto" in n for n in r["notes"])


@pytest.mark.slow
def test_evidence_prefers_a_real_planet_and_not_noise():
    planet = one_planet()
    ch = choose_model(planet, AnalyzeOptions(quiet=True, trend=0, evidence=True, quick=True,
                                             max_companions=1))  # fmt: skip
    z = {e["n_companions"]: e for e in ch.evidence}
    assert z[1]["reliable"] and z[0]["reliable"]
    assert z[1]["ln_z"] - z[0]["ln_z"] > 20
    rng = np.random.default_rng(9)
    noise = RVData(planet.time, rng.normal(0, 2, planet.time.size), planet.err, planet.instrument)
    ch = choose_model(noise, AnalyzeOptions(quiet=True, trend=0, evidence=True, quick=True,
                                            companions=1))  # fmt: skip
    z = {e["n_companions"]: e for e in ch.evidence}
    assert z[1]["ln_z"] - z[0]["ln_z"] < EVIDENCE_THRESHOLD


@pytest.mark.slow
def test_nested_and_mcmc_posteriors_agree():
    from rvkep.likelihood import LogPosterior
    from rvkep.samplers import get_sampler
    from rvkep.samplers.nested import NestedOptions

    fit, mcmc = short_posterior(one_planet())
    run = get_sampler("nested").run(LogPosterior(fit.model), fit.theta,
                                    NestedOptions(seed=2, progress=False))  # fmt: skip
    theta, _ = run.equal_weight(rng=3)
    from rvkep.posterior import PosteriorSamples

    nested = PosteriorSamples.from_chain(fit.model, theta)
    for name in ("b.period", "b.K", "b.ecc", "b.tc", "jitter.a"):
        a, b = mcmc[name], nested[name]
        sd = np.std(a)
        assert abs(np.median(a) - np.median(b)) < 0.2 * sd, name
        assert np.std(b) == pytest.approx(sd, rel=0.15), name
