"""The likelihood against a slow, plain implementation and numerical integration."""

import math

import numpy as np
import pytest
from scipy import integrate

from rvkep.data import RVData
from rvkep.likelihood import LogPosterior
from rvkep.model import SystemModel, default_companion
from rvkep.orbit import radial_velocity, tc_to_tp


def synthetic(seed=1, n=40, two_instruments=True):
    """Invented data (seed given): one eccentric companion, two instruments."""
    rng = np.random.default_rng(seed)
    t = np.sort(rng.uniform(2459000, 2459300, n))
    inst = (
        np.where(np.arange(n) % 3 == 0, "south", "north")
        if two_instruments
        else np.full(n, "north")
    )
    err = rng.uniform(1, 3, n)
    v = radial_velocity(t, 23.0, 2459010.0, 0.3, 1.0, 15.0) + np.where(inst == "south", 30.0, -5.0)
    return RVData(t, v + rng.normal(0, np.hypot(err, 2.0)), err, inst)


def slow_loglike(data, comps, jitters, offsets, slope=0.0):
    """Plain Gaussian log-likelihood, one point at a time (common practice, no source)."""
    total = 0.0
    for i in range(len(data)):
        model = offsets[data.instrument[i]] + slope * (data.time[i] - data.epoch) / 365.25
        for c in comps:
            tp = tc_to_tp(c["tc"], c["P"], c["e"], c["w"])
            model += float(radial_velocity([data.time[i]], c["P"], tp, c["e"], c["w"], c["K"])[0])
        var = data.err[i] ** 2 + jitters[data.instrument[i]] ** 2
        total += -0.5 * (data.rv[i] - model) ** 2 / var - 0.5 * math.log(2 * math.pi * var)
    return total


def make_model(data, trend=0):
    c = default_companion(data, "b", 23.0, 2459012.0, 14.0, 0.25, 1.2)
    return SystemModel(data, [c], trend=trend)


def test_profile_likelihood_matches_slow_reference_at_best_offsets():
    data = synthetic()
    model = make_model(data)
    like = LogPosterior(model, linear="profile", include_prior=False)
    theta = model.start_theta()
    value = like(theta)[0]
    offsets = like.linear_parameters(theta)[0]
    phys = {k: v[0] for k, v in model.to_physical(theta[None]).items()}
    comp = {"P": phys["b.period"], "tc": phys["b.tc"], "e": phys["b.ecc"],
            "w": phys["b.omega"], "K": phys["b.K"]}  # fmt: skip
    jit = {n: phys[f"jitter.{n}"] for n in model.data.instruments}
    off = dict(zip(model.data.instruments, offsets, strict=True))
    assert value == pytest.approx(slow_loglike(data, [comp], jit, off), abs=1e-8)
    # the solved offsets are the maximum: moving one lowers the slow likelihood
    for name in off:
        for d in (-0.01, 0.01):
            moved = dict(off, **{name: off[name] + d})
            assert slow_loglike(data, [comp], jit, moved) < value


def test_marginal_likelihood_against_numerical_integration():
    # ln of the integral over both offsets of exp(ln L) with a flat prior, by scipy's
    # dblquad (reference library), against the analytic marginalization
    data = synthetic(n=25)
    model = make_model(data)
    theta = model.start_theta()
    marg = LogPosterior(model, include_prior=False)(theta)[0]
    prof = LogPosterior(model, linear="profile", include_prior=False)
    best = prof.linear_parameters(theta)[0]
    lmax = prof(theta)[0]
    phys = {k: v[0] for k, v in model.to_physical(theta[None]).items()}
    comp = {"P": phys["b.period"], "tc": phys["b.tc"], "e": phys["b.ecc"],
            "w": phys["b.omega"], "K": phys["b.K"]}  # fmt: skip
    jit = {n: phys[f"jitter.{n}"] for n in data.instruments}
    names = data.instruments
    # the Keplerian part does not depend on the offsets: compute it point by point once,
    # then integrate the plain Gaussian over the two offsets
    curve = np.zeros(len(data))
    for i in range(len(data)):
        tp = tc_to_tp(comp["tc"], comp["P"], comp["e"], comp["w"])
        curve[i] = radial_velocity([data.time[i]], comp["P"], tp, comp["e"], comp["w"], comp["K"])[
            0
        ]
    var = data.err**2 + np.array([jit[n] for n in data.instrument]) ** 2
    is_first = data.instrument == names[0]

    def integrand(o2, o1):
        r = data.rv - curve - np.where(is_first, o1, o2)
        return math.exp(np.sum(-0.5 * r * r / var - 0.5 * np.log(2 * np.pi * var)) - lmax)

    w = 12.0
    val, _ = integrate.dblquad(
        integrand, best[0] - w, best[0] + w, best[1] - w, best[1] + w, epsabs=1e-12, epsrel=1e-9
    )
    assert marg == pytest.approx(lmax + math.log(val), abs=1e-5)


def test_trend_profile_matches_slow_reference():
    data = synthetic(seed=3)
    model = make_model(data, trend=1)
    like = LogPosterior(model, linear="profile", include_prior=False)
    theta = model.start_theta()
    lin = like.linear_parameters(theta)[0]
    phys = {k: v[0] for k, v in model.to_physical(theta[None]).items()}
    comp = {"P": phys["b.period"], "tc": phys["b.tc"], "e": phys["b.ecc"],
            "w": phys["b.omega"], "K": phys["b.K"]}  # fmt: skip
    jit = {n: phys[f"jitter.{n}"] for n in data.instruments}
    off = dict(zip(data.instruments, lin[:2], strict=True))
    assert like(theta)[0] == pytest.approx(slow_loglike(data, [comp], jit, off, lin[2]), abs=1e-8)


def test_vectorized_and_invalid_rows_give_minus_inf_silently():
    data = synthetic()
    model = make_model(data)
    post = LogPosterior(model)
    base = model.start_theta()
    theta = np.repeat(base[None], 6, axis=0)
    names = model.names
    theta[1, names.index("b.sqrt_e_cos_omega")] = 1.2  # e >= 1
    theta[2, names.index("b.K")] = -3.0  # negative K
    theta[3, names.index("b.ln_period")] = math.log(1e6)  # outside the period prior
    theta[4, names.index("jitter.north")] = -1.0
    theta[5, 0] = np.nan
    with np.errstate(all="raise"):
        values = post(theta)
    assert values.shape == (6,)
    assert np.isfinite(values[0]) and np.all(values[1:] == -np.inf)
    assert post(base).shape == (1,)


def test_compiled_and_numpy_paths_agree():
    data = synthetic()
    for trend in (0, 1, 2):
        model = make_model(data, trend)
        rng = np.random.default_rng(0)
        theta = model.start_theta() + 1e-3 * rng.standard_normal((30, model.ndim))
        for linear in ("marginalize", "profile"):
            post = LogPosterior(model, linear=linear)
            assert np.allclose(post(theta), post.evaluate(theta)[0], rtol=1e-12, atol=1e-9)


def test_offset_draws_have_the_conditional_covariance():
    # N(A^-1 b, A^-1): for offsets alone A is diagonal, sum of weights per instrument
    data = synthetic()
    model = make_model(data)
    post = LogPosterior(model)
    theta = np.repeat(model.start_theta()[None], 20000, axis=0)
    draws = post.linear_parameters(theta, rng=np.random.default_rng(4))
    jit = model.to_physical(theta[:1])
    for k, name in enumerate(model.data.instruments):
        m = data.instrument == name
        w = 1 / (data.err[m] ** 2 + jit[f"jitter.{name}"][0] ** 2)
        assert np.std(draws[:, k]) == pytest.approx(1 / math.sqrt(w.sum()), rel=0.03)


def test_one_compiled_pass_equals_the_model_and_noise_model_step_by_step():
    # The white-noise log posterior in one compiled pass (coordinates, prior,
    # likelihood) against the general path built from SystemModel.orbit_arrays,
    # SystemModel.log_prior and WhiteNoise.loglike in numpy: uniform, log-uniform and
    # normal priors, a fixed period and a fixed tc, a circular and a steep companion,
    # a fixed jitter, trends 0-2, both linear treatments, with and without the prior,
    # and rows outside the prior or with e >= 1.
    rng = np.random.default_rng(3)
    for trend in (0, 1, 2):
        model = mixed_white_model(trend)
        assert model.compiled_plan() is not None
        theta = model.start_theta() + 0.02 * rng.standard_normal((40, model.ndim))
        theta[3, model.names.index("b.sqrt_e_cos_omega")] = 1.1  # e >= 1
        theta[4, model.names.index("jitter.north")] = -0.5  # negative jitter
        theta[5, model.names.index("b.ln_period")] = np.log(45.0)  # outside its prior
        for linear in ("marginalize", "profile"):
            for include_prior in (True, False):
                post = LogPosterior(model, linear=linear, include_prior=include_prior)
                assert post._compiled_parts() is not None
                want = post._general(*post._prepare(theta))[0]
                got = post(theta)
                assert np.array_equal(np.isinf(got), np.isinf(want)) and np.isinf(got[3:6]).all()
                ok = np.isfinite(want)
                assert np.allclose(got[ok], want[ok], rtol=1e-12, atol=1e-9)
    with pytest.raises(ValueError, match="coordinates"):  # the compiled pass reads no bounds
        post(theta[:, :-1])


def mixed_white_model(trend):
    """Invented data and a white-noise model with uniform, log-uniform and normal priors,
    fixed values, a circular and a steep companion, one fixed jitter."""
    from rvkep.model import Companion, Instrument
    from rvkep.priors import Fixed, LogUniform, Normal, Uniform

    data = synthetic()
    comps = [
        Companion("b", LogUniform(10, 40), Uniform(2459000, 2459030), Normal(15, 4),
                  Uniform(0, 0.95), start={"period": 23.0, "tc": 2459012.0, "K": 14.0,
                                           "ecc": 0.25, "omega": 1.2}),
        Companion("c", Fixed(61.0), Normal(2459020, 5), Uniform(0, 20), Fixed(0.0),
                  start={"tc": 2459021.0, "K": 3.0}),
        Companion("d", Normal(5.1, 0.2), Fixed(2459002.5), LogUniform(0.5, 30),
                  Uniform(0, 0.99), start={"period": 5.1, "K": 2.0, "ecc": 0.7, "omega": 4.0},
                  steep=True),
    ]  # fmt: skip
    insts = [Instrument("north", Uniform(0, 8), 1.0), Instrument("south", Fixed(2.0))]
    return SystemModel(data, comps, insts, trend=trend)


def test_best_fit_gradient_against_central_differences():
    # The analytic gradient of the profiled log posterior (the best fit's objective)
    # against central differences of the log posterior itself (numerical
    # differentiation, step 1e-6 of each coordinate), with every coordinate kind:
    # ln P, tc, the sqrt(e) and stretched pairs, K and K sqrt(1 - e^2), a jitter,
    # priors of three kinds, trends 0 and 2; the value is the posterior's own.
    rng = np.random.default_rng(3)
    for trend in (0, 2):
        model = mixed_white_model(trend)
        post = LogPosterior(model, linear="profile")
        grad_of = post.gradient_function()
        for _ in range(3):
            theta = model.start_theta() + 0.01 * rng.standard_normal(model.ndim)
            value, grad = grad_of(theta)
            assert value == pytest.approx(post(theta[None])[0], abs=1e-9)
            want = np.empty(model.ndim)
            for j in range(model.ndim):
                step = np.zeros(model.ndim)
                step[j] = 1e-6 * max(1.0, abs(theta[j]))
                up, down = post(np.array([theta + step, theta - step]))
                want[j] = (up - down) / (2 * step[j])
            assert np.allclose(grad, want, rtol=2e-5, atol=1e-3)
    assert LogPosterior(model).gradient_function() is None  # marginalized: no
    outside = model.start_theta()
    outside[model.names.index("b.ln_period")] = np.log(45.0)
    assert grad_of(outside)[0] == -np.inf
