"""The quasi-periodic Gaussian-process noise model (rvkep/noise/gp.py): its covariance
against celerite2's published oscillator term, its O(N) likelihood against a dense
multivariate normal (scipy), the marginalized offsets against direct integration, the
search power and the conditional mean against dense linear algebra, and the model
file's [noise] table."""

from dataclasses import replace

import numpy as np
import pytest
from helpers import one_planet, planet_model, write_table
from scipy import integrate, stats

from rvkep.errors import ModelFileError
from rvkep.likelihood import LogPosterior
from rvkep.noise.gp import covariance

HYPER = {"amplitude": 3.0, "rotation_period": 12.0, "evolution_time": 30.0,
         "harmonic_fraction": 0.4}  # fmt: skip


@pytest.fixture(scope="module")
def gp_fit():
    fit = planet_model(one_planet())
    model = replace(fit.model, noise="gp", noise_parameters=None)
    start = {**fit.model.to_physical(fit.theta[None, :]),
             **{f"noise.{k}": np.array([v]) for k, v in HYPER.items()}}  # fmt: skip
    return model, model.from_physical(start)


def dense(model, theta):
    """The full covariance matrix C, densely, and the physical parameters."""
    phys = model.to_physical(theta)
    tau = model.t[:, None] - model.t[None, :]
    white = model.err2 + phys["jitter.a"][0] ** 2
    return covariance(tau, **HYPER) + np.diag(white), phys


@pytest.mark.parametrize("f", [0.0, 0.4, 1.0])
def test_covariance_is_two_of_celerites_oscillators(f):
    # Foreman-Mackey et al. (2017) eq. 23, as celerite2's SHOTerm evaluates it, with
    # Q and w0 from the module text: the mapping of (A, P, L, f) is the published one
    from celerite2 import terms

    P, L, A = 12.0, 30.0, 3.0
    tau = np.linspace(0.0, 80.0, 161)
    ref = np.zeros_like(tau)
    for n, share in ((1, 1.0 - f), (2, f)):
        Q = 0.5 * np.sqrt(1.0 + (2 * np.pi * n * L / P) ** 2)
        w0 = 2 * np.pi * n / (P * np.sqrt(1.0 - 1.0 / (4 * Q * Q)))
        ref += terms.SHOTerm(sigma=A * np.sqrt(share), w0=w0, Q=Q).get_value(tau)
    got = covariance(tau, A, P, L, f)
    assert np.allclose(got, ref, rtol=1e-10, atol=1e-12 * A**2)
    assert got[0] == pytest.approx(A**2)


def test_likelihood_equals_dense_multivariate_normal(gp_fit):
    # scipy.stats.multivariate_normal of the same kernel, residuals after the offsets
    model, theta = gp_fit
    value, det = LogPosterior(model, "profile", include_prior=False).evaluate(theta)
    C, _ = dense(model, theta)
    r = det["resid"][0] - model.design @ det["beta"][0]
    ref = stats.multivariate_normal(np.zeros(r.size), C).logpdf(r)
    assert value[0] == pytest.approx(ref, rel=1e-8)
    # the offsets solved through C are the generalized least-squares ones
    X, y = model.design, det["resid"][0]
    beta = np.linalg.solve(X.T @ np.linalg.solve(C, X), X.T @ np.linalg.solve(C, y))
    assert det["beta"][0] == pytest.approx(beta, rel=1e-9)


def test_marginalized_offset_equals_direct_integration(gp_fit):
    # ln of the integral over the offset (flat prior) of the dense Gaussian likelihood,
    # by scipy's quad
    model, theta = gp_fit
    value, det = LogPosterior(model, "marginalize", include_prior=False).evaluate(theta)
    C, _ = dense(model, theta)
    y = det["resid"][0]
    mvn = stats.multivariate_normal(np.zeros(y.size), C)
    best = det["beta"][0][0]
    peak = mvn.logpdf(y - best)
    width = 1.0 / np.sqrt(det["chol"][0][0, 0] ** 2)
    lo, hi = best - 12 * width, best + 12 * width
    integral, _ = integrate.quad(lambda b: np.exp(mvn.logpdf(y - b) - peak), lo, hi,
                                 epsabs=0, epsrel=1e-11)  # fmt: skip
    assert value[0] == pytest.approx(peak + np.log(integral), rel=1e-9)


def test_search_power_equals_dense_generalized_least_squares(gp_fit):
    # the fraction of r^T C^-1 r (offsets removed) that a sinusoid removes, densely
    model, theta = gp_fit
    C, phys = dense(model, theta)
    rng = np.random.default_rng(3)
    resid = model.y + rng.normal(0, 1, model.t.size)
    freq = np.array([1 / 9.4, 1 / 3.1, 1 / 40.0])
    got = model.noise_model.periodogram_power(model, phys, resid, freq)

    def chi2(X):
        Ci_X = np.linalg.solve(C, X)
        beta = np.linalg.solve(X.T @ Ci_X, Ci_X.T @ resid)
        r = resid - X @ beta
        return r @ np.linalg.solve(C, r)

    X = model.design
    chi0 = chi2(X)
    for f, power in zip(freq, got, strict=True):
        arg = 2 * np.pi * f * model.t
        ref = (chi0 - chi2(np.column_stack([X, np.cos(arg), np.sin(arg)]))) / chi0
        assert power == pytest.approx(ref, rel=1e-8)


def test_conditional_mean_equals_dense_prediction(gp_fit):
    model, theta = gp_fit
    C, phys = dense(model, theta)
    resid = model.y - np.median(model.y)
    t_out = np.linspace(model.t.min() - 5, model.t.max() + 5, 37)  # minus the epoch
    mean, sd = model.noise_model.conditional_mean(model, phys, resid, t_out + model.data.epoch)
    K = covariance(t_out[:, None] - model.t[None, :], **HYPER)
    # abs 1e-8 m/s: the times' round trip through absolute BJD (ulp 5e-10 d) moves them
    assert mean == pytest.approx(K @ np.linalg.solve(C, resid), rel=1e-9, abs=1e-8)
    var = HYPER["amplitude"] ** 2 - np.einsum("ij,ji->i", K, np.linalg.solve(C, K.T))
    assert sd**2 == pytest.approx(var, rel=1e-8, abs=1e-10)


def test_default_priors_and_parameters(gp_fit):
    model, _ = gp_fit
    names = [p.name for p in model.noise_parameters]
    assert names == list(model.noise_model.parameter_keys)
    assert model.names[-4:] == [f"noise.{n}" for n in names]
    pri = dict(model.describe_priors())
    assert pri["noise.rotation_period [d]"].startswith("log-uniform(1.1, ")
    assert pri["noise.harmonic_fraction"] == "uniform(0, 1)"
    theta = model.start_theta()
    bad = theta.copy()
    bad[-1] = 1.5  # outside the harmonic fraction's domain, whatever a prior says
    assert np.isfinite(model.log_prior(theta[None])[0])
    assert np.isneginf(model.log_prior(bad[None])[0])


def test_model_file_noise_table(tmp_path):
    from rvkep.modelfile import parse_model

    data = one_planet()
    spec = parse_model({"noise": {
        "kind": "gp",
        "rotation_period": {"start": 24, "prior": "normal", "mean": 24, "sd": 3},
        "amplitude": {"hold": 2.5},
        "evolution_time": 50,
    }}, "m.toml")  # fmt: skip
    model = spec.base_model(data)
    par = {p.name: p for p in model.noise_parameters}
    assert model.noise == "gp"
    assert par["rotation_period"].prior.describe() == "normal(24, 3)"
    assert par["amplitude"].prior.is_fixed and "noise.amplitude" not in model.names
    assert par["evolution_time"].start == 50.0
    assert par["evolution_time"].prior.describe().startswith("log-uniform")  # the default
    bad = [
        ({"kind": "red"}, "noise.kind: must be one of white, gp, night, got 'red'"),
        ({"kind": "gp", "period": 3}, "noise: unknown key 'period'"),
        ({"kind": "gp", "harmonic_fraction": {"prior": "uniform", "min": 0, "max": 2}},
         "noise.harmonic_fraction: the prior uniform(0, 2) reaches outside [0, 1]"),
    ]  # fmt: skip
    for table, message in bad:
        with pytest.raises(ModelFileError, match=message.replace("(", r"\(").replace(")", r"\)")
                           .replace("[", r"\[").replace("]", r"\]")):  # fmt: skip
            parse_model({"noise": table}, "m.toml").base_model(data)
    with pytest.raises(ModelFileError, match="sets parameters of the gp noise model, but the "
                                             "white model was asked for"):  # fmt: skip
        spec.base_model(data, noise="white")


def test_command_line_refuses_an_unknown_noise_model(tmp_path, capsys):
    from rvkep.cli import main

    f = write_table(one_planet(), tmp_path / "a.txt")
    assert main(["analyze", str(f), "--noise", "red", "--out", str(tmp_path / "o")]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert err == ["rvkep analyze: error: --noise must be one of white, gp, night, got 'red'"]


def test_figures_draw_the_activity_apart_and_remove_it_from_the_phase_plot():
    import warnings

    from rvkep.curves import phase_curves, timeseries_curves
    from rvkep.model import SystemModel
    from rvkep.optimize import fit_companions
    from rvkep.plots import timeseries_figure
    from rvkep.results import Results
    from rvkep.sampling import UnconvergedWarning

    data = one_planet()
    base = SystemModel(data, [], noise="gp")
    fit = fit_companions(data, [[9.4]], base=base.noise_model.initial(base))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UnconvergedWarning)
        res = Results.from_sampling(fit.sample(seed=1, max_steps=200, check_every=100,
                                               progress=False), quick=True)  # fmt: skip
    ts = timeseries_curves(res, n_grid=50, n_draws=20)
    act = ts["activity"]
    model = fit.model
    best = model.to_physical(fit.theta[None, :])
    mean, _ = model.noise_model.conditional_mean(model, best, act["data"])
    assert act["at_data"] == pytest.approx(mean) and act["mean"].shape == (50,)
    assert ts["residuals"] == pytest.approx(fit.residuals - act["at_data"])
    white = phase_curves(res, "b", n_draws=20)["velocity"]
    # the phase plot's points: data minus offsets minus the activity's conditional mean
    assert white + act["at_data"] == pytest.approx(data.rv - model.linear_part(fit.params))
    fig = timeseries_figure(res)
    assert len(fig.axes) == 4 and "activity" in fig.axes[1].get_legend().texts[0].get_text()


def test_the_rotation_prior_starts_above_the_daily_alias_and_a_window_peak_is_named():
    # the sidereal day is the spectral window's strongest peak for nightly ground-based
    # data (Deeming 1975, Ap&SS 36, 137; Dawson & Fabrycky 2010, ApJ 722, 937): the
    # default rotation prior starts 10% above it, and a GP rotation on a window peak
    # (here a 29.5-d sampling pattern, one run of nights a month) is named as suspect
    from rvkep.data import RVData
    from rvkep.noise.gp import ROTATION_MIN, QuasiPeriodicGP
    from rvkep.pipeline import window_notes

    rng = np.random.default_rng(4)
    nights = np.array([d for d in range(600) if (d % 29.53) < 7])
    t = 2459000.0 + nights + rng.normal(0, 0.02, nights.size)
    data = RVData(t, rng.normal(0, 3, t.size), np.full(t.size, 2.0), np.array(["a"] * t.size))
    rot = {p.name: p for p in QuasiPeriodicGP().parameters(data)}["rotation_period"]
    assert rot.prior.bounds[0] == ROTATION_MIN and ROTATION_MIN > 1.0 / 1.0027 * 1.1 - 1e-3
    assert window_notes(data, {"noise.rotation_period": np.full(100, 29.8)})[0].startswith(
        "the activity's rotation period (29.8 d) lies within 10% of a peak")
    assert window_notes(data, {"noise.rotation_period": np.full(100, 21.0)}) == []
    assert window_notes(data, {}) == []
