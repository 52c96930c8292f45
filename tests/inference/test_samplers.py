"""Samplers as plug-ins: the registry, the sample set, and the emcee driver through
the same interface any later sampler uses."""

import warnings

import numpy as np
import pytest
from helpers import one_planet, planet_model

from rvkep.likelihood import LogPosterior
from rvkep.samplers import SampleSet, available_samplers, get_sampler
from rvkep.sampling import SamplerOptions, UnconvergedWarning, run_sampler


def test_registry_names_the_samplers():
    assert "emcee" in available_samplers()
    assert get_sampler("emcee").name == "emcee"
    with pytest.raises(ValueError, match="unknown sampler 'nope'; available: emcee"):
        get_sampler("nope")


def test_emcee_through_the_interface_equals_the_driver():
    fit = planet_model(one_planet())
    opts = SamplerOptions(seed=4, max_steps=400, check_every=100, progress=False)
    post = LogPosterior(fit.model)  # built once, handed over
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UnconvergedWarning)
        sset = get_sampler("emcee").run(post, fit.theta, opts)
        direct = run_sampler(fit.model, fit.theta, opts)
    assert np.array_equal(sset.theta, direct.flat)
    assert np.allclose(
        sset.weights, 1.0 / len(sset.weights)
    ) and sset.weights.sum() == pytest.approx(1)
    assert sset.diagnostics()["steps"] == 400 and sset.converged == direct.converged
    theta, _ = sset.equal_weight()
    assert theta is sset.theta  # equal weights: nothing resampled
    with pytest.raises(ValueError, match="another model"):
        run_sampler(planet_model(one_planet(seed=5)).model, fit.theta, opts, posterior=post)


def test_unequal_weights_are_resampled_in_proportion():
    # systematic resampling keeps each sample about n w_i times (common practice, no
    # source; e.g. the resampling step of particle filters)
    theta = np.arange(4.0)[:, None]
    w = np.array([0.1, 0.2, 0.3, 0.4])
    sset = SampleSet(None, theta, np.zeros(4), w, True)
    big = SampleSet(None, np.repeat(theta, 250, axis=0), np.zeros(1000), np.repeat(w, 250) / 250,
                    True)  # fmt: skip
    drawn, _ = big.equal_weight(rng=1)
    counts = np.bincount(drawn[:, 0].astype(int), minlength=4)
    assert np.allclose(counts / 1000, w, atol=0.002)
    assert sset.equal_weight(rng=2)[0].shape == (4, 1)
    with pytest.raises(ValueError, match="sum to 1"):
        SampleSet(None, theta, np.zeros(4), np.ones(4), True)
