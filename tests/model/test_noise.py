"""Noise models as plug-ins: the white model through the interface any later model
uses, checked against direct integration, and a new model added by registration."""

import numpy as np
import pytest
from helpers import one_planet, planet_model
from scipy import integrate

import rvkep.noise as noise
from rvkep.likelihood import LogPosterior
from rvkep.noise.white import WhiteNoise


def test_registry():
    assert "white" in noise.available_noise_models()
    assert isinstance(noise.get_noise_model("white"), WhiteNoise)
    with pytest.raises(ValueError, match="unknown noise model 'red'; available: white"):
        noise.get_noise_model("red")


@pytest.mark.parametrize("linear", ["marginalize", "profile"])
def test_compiled_and_general_paths_agree(linear):
    fit = planet_model(one_planet())
    post = LogPosterior(fit.model, linear=linear)
    rng = np.random.default_rng(2)
    theta = fit.theta + 0.01 * rng.standard_normal((50, fit.theta.size)) * np.abs(fit.theta)
    fast = post(theta)
    general = post.evaluate(theta)[0]
    ok = np.isfinite(general)
    assert ok.sum() > 10 and np.array_equal(np.isfinite(fast), ok)
    assert np.allclose(fast[ok], general[ok], rtol=1e-10, atol=1e-8)


def test_white_marginal_likelihood_equals_direct_integration():
    # one instrument, no trend: ln of the integral over the offset (flat prior) of the
    # Gaussian likelihood, by scipy's quad, against the closed form
    fit = planet_model(one_planet())
    model = fit.model
    post = LogPosterior(model, linear="marginalize", include_prior=False)
    _, det = post.evaluate(fit.theta[None, :])
    resid = det["resid"][0]
    var = WhiteNoise().effective_variance(model, det["phys"], det["rows"])[0]

    def like(offset):
        r = resid - offset
        return np.exp(-0.5 * np.sum(r * r / var) - 0.5 * np.sum(np.log(2 * np.pi * var)) + 120.0)

    centre = np.sum(resid / var) / np.sum(1 / var)
    width = 1 / np.sqrt(np.sum(1 / var))
    value, _ = integrate.quad(like, centre - 12 * width, centre + 12 * width, epsabs=0)
    assert post(fit.theta[None, :])[0] == pytest.approx(np.log(value) - 120.0, abs=1e-8)


class DoubledNoise(WhiteNoise):
    """A test noise model: white noise with every error doubled."""

    name = "doubled"

    def effective_variance(self, model, phys, rows):
        return 4.0 * super().effective_variance(model, phys, rows)

    def fast_loglike(self, model, arrays, rows, linear):
        return None  # no compiled path: the general one is used


def test_a_new_noise_model_is_one_class_and_one_registration(monkeypatch):
    from dataclasses import replace

    monkeypatch.setitem(noise.NOISE_MODELS, "doubled", "test_noise:DoubledNoise")
    fit = planet_model(one_planet())
    model = replace(fit.model, noise="doubled")
    assert isinstance(model.noise_model, DoubledNoise)
    assert model.canonical()["noise"] == "doubled" != fit.model.canonical()["noise"]
    white = LogPosterior(fit.model, linear="profile", include_prior=False)
    doubled = LogPosterior(model, linear="profile", include_prior=False)
    assert isinstance(doubled.noise, DoubledNoise)
    # chi2 falls by 4, ln|C| rises by n ln 4: the profile likelihood of the same fit
    n = model.t.size
    _, d_white = white.evaluate(fit.theta[None, :])
    expected = white(fit.theta[None, :])[0] + 0.75 * 0.5 * d_white["chi2"][0] - 0.5 * n * np.log(4)
    assert doubled(fit.theta[None, :])[0] == pytest.approx(expected, rel=1e-12)


class ScaledNoise(WhiteNoise):
    """A model that owns one parameter: every variance times scale^2."""

    name = "scaled"

    def parameters(self, data):
        from rvkep.noise import NoiseParameter
        from rvkep.priors import Uniform

        return [NoiseParameter("scale", Uniform(0.5, 4.0), 1.0, "", "error scale")]

    def effective_variance(self, model, phys, rows):
        s = np.asarray(phys["noise.scale"])[rows]
        return s[:, None] ** 2 * super().effective_variance(model, phys, rows)

    def fast_loglike(self, model, arrays, rows, linear):
        return None


def test_a_noise_model_owns_parameters_like_any_other(monkeypatch):
    """Its parameter joins the sampled vector with its prior, bounds, start value, unit
    cube map and posterior column; nothing outside its own file names it."""
    from dataclasses import replace

    from rvkep.data import RVData
    from rvkep.model import default_instrument
    from rvkep.optimize import fit as best_fit
    from rvkep.posterior import PosteriorSamples
    from rvkep.priors import Fixed

    monkeypatch.setitem(noise.NOISE_MODELS, "scaled", "test_noise:ScaledNoise")
    d = one_planet()
    # the file's errors are a third of the scatter: the fitted scale must find 3
    small = RVData(d.time, d.rv, d.err / 3.0, d.instrument)
    base = planet_model(d).model
    inst = [replace(default_instrument(small, i.name), jitter=Fixed(0.0)) for i in base.instruments]
    model = replace(base, data=small, noise="scaled", noise_parameters=None, instruments=inst)
    assert model.names[-1] == "noise.scale" and model.ndim == base.ndim  # jitter out, scale in
    assert "noise_parameters" in model.canonical()
    assert ("noise.scale", "uniform(0.5, 4)") in model.describe_priors()
    theta = model.start_theta()
    assert theta[-1] == 1.0
    post = LogPosterior(model)
    lp = model.log_prior(np.vstack([theta, theta]))
    bad = theta.copy()
    bad[-1] = 5.0  # outside its prior
    assert np.isneginf(post(bad[None, :])[0]) and np.isfinite(lp).all()
    unit = np.full((3, model.ndim), 0.5)
    unit[:, -1] = [0.0, 0.5, 1.0]
    assert model.prior_transform(unit)[:, -1] == pytest.approx([0.5, 2.25, 4.0])
    best = best_fit(model, [theta])
    assert best.params["noise.scale"] == pytest.approx(3.0, rel=0.3)
    samples = PosteriorSamples.from_chain(model, np.vstack([best.theta] * 4))
    assert np.all(samples["noise.scale"] == best.params["noise.scale"])
    with pytest.raises(ValueError, match="noise model 'scaled' has parameters scale, got none"):
        replace(model, noise_parameters=[])
