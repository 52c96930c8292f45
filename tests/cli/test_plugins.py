"""The contract every registered plug-in keeps (noise models, samplers, report
formats): a new one added to a registry is checked here without a test of its own."""

import warnings

import numpy as np
import pytest
from helpers import one_planet, planet_model

from rvkep.likelihood import LogPosterior
from rvkep.noise import NOISE_MODELS, get_noise_model
from rvkep.report import RENDERERS, render
from rvkep.samplers import SAMPLERS, SampleSet, get_sampler
from rvkep.sampling import SamplerOptions, UnconvergedWarning


@pytest.fixture(scope="module")
def fit():
    return planet_model(one_planet())


@pytest.mark.parametrize("name", list(NOISE_MODELS))
def test_noise_model_contract(name, fit):
    from dataclasses import replace

    noise = get_noise_model(name)
    assert noise.name == name
    model = replace(fit.model, noise=name, noise_parameters=None)  # its own parameters
    start = {**fit.model.to_physical(fit.theta[None, :]),
             **{f"noise.{p.name}": p.start for p in model.noise_parameters}}  # fmt: skip
    theta = model.from_physical(start)
    assert model.ndim == fit.model.ndim + len(model.noise_parameters)
    assert np.isfinite(model.log_prior(theta)[0])  # the start values lie inside the priors
    phys = model.to_physical(theta)
    rows = np.array([0])
    var = noise.effective_variance(model, phys, rows)
    assert var.shape == (1, model.t.size) and np.all(var > 0)
    assert set(noise.parameter_names(model)) <= set(phys)
    resid = model.y[None, :] - np.median(model.y)
    values = {}
    for linear in ("marginalize", "profile"):
        logL, det = noise.loglike(model, phys, rows, resid, linear)
        assert logL.shape == (1,) and np.isfinite(logL[0])
        assert det["beta"].shape == (1, model.n_linear) and det["chol"].shape[1:] == (
            model.n_linear, model.n_linear)  # fmt: skip
        values[linear] = logL[0]
        fast = noise.fast_loglike(model, model.orbit_arrays(theta), rows, linear)
        if fast is not None:  # the compiled path scores the orbits' residuals the same
            general = LogPosterior(model, linear, include_prior=False).evaluate(theta)[0]
            assert fast[0] == pytest.approx(general[0], rel=1e-10)
    assert values["marginalize"] != values["profile"]


@pytest.mark.parametrize("name", list(SAMPLERS))
def test_sampler_contract(name, fit):
    from rvkep.samplers.nested import NestedOptions

    sampler = get_sampler(name)
    assert sampler.name == name
    # each sampler's quick settings (a new sampler adds its own line here)
    opts = {
        "emcee": SamplerOptions(seed=1, max_steps=200, check_every=100, progress=False),
        "nested": NestedOptions(seed=1, live_points=60, dlogz=2.0, progress=False),
    }[name]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UnconvergedWarning)
        result = sampler.run(LogPosterior(fit.model), fit.theta, opts)
    assert isinstance(result, SampleSet) and result.model is fit.model
    n = result.theta.shape[0]
    assert result.theta.shape == (n, fit.model.ndim) and result.log_prob.shape == (n,)
    assert result.weights.sum() == pytest.approx(1.0) and np.all(result.weights >= 0)
    assert np.all(np.isfinite(result.log_prob)) and isinstance(result.diagnostics(), dict)
    theta, _ = result.equal_weight(rng=0)
    assert np.all(np.isfinite(LogPosterior(fit.model)(theta)))


@pytest.mark.parametrize("fmt", list(RENDERERS))
def test_report_format_contract(fmt, fit):
    from rvkep.results import Results

    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UnconvergedWarning)
        run = fit.sample(seed=1, max_steps=200, check_every=100, progress=False)
    res = Results.from_sampling(run, quick=True)
    text = render(res, fmt)
    assert isinstance(text, str) and text.endswith("\n") and len(text) > 20
    # every format says what kind of run made it, and shows every companion
    assert "QUICK" in text.upper() and "b" in text
