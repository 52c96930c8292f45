"""A finished run as ArviZ InferenceData (the reference library for MCMC diagnostics:
arviz.summary's R-hat and ESS, arviz.loo's PSIS-LOO, Vehtari et al. 2017)."""

import numpy as np
import pytest
from helpers import finished_run

from rvkep.results import Results

az = pytest.importorskip("arviz")  # in the test extra; optional for users


@pytest.fixture(scope="module")
def run(tmp_path_factory):
    return Results.load(finished_run(tmp_path_factory.mktemp("arviz") / "run"))


def test_posterior_has_the_walkers_as_chains_and_arviz_diagnostics_run(run):
    idata = run.to_inference_data()
    walkers = run.to_dict()["sampler"]["walkers"]
    post = idata.posterior
    assert post.sizes["chain"] == walkers
    assert post.sizes["chain"] * post.sizes["draw"] == len(run.posterior["b.period"])
    # chain k is walker k: its draws are every walkers-th flat sample
    flat = run.posterior["b.period"]
    assert np.array_equal(post["b.period"].values[1], flat[1::walkers])
    table = az.summary(idata, var_names=["b.period", "b.K"])
    assert set(table.index) == {"b.period", "b.K"} and np.all(table["r_hat"] < 1.5)
    assert idata.observed_data["rv"].size == len(run.data)
    assert "lp" in idata.sample_stats


def test_pointwise_log_likelihood_feeds_loo(run):
    idata = run.to_inference_data()
    ll = idata.log_likelihood["rv"].values
    assert ll.shape[-1] == len(run.data)
    # no sample beats the best fit's likelihood (offsets and jitters drawn back, the
    # fit's maximized): the pointwise sums come from the same model, computed apart
    sums = ll.reshape(-1, ll.shape[-1]).sum(axis=1)
    best = run.fit.log_likelihood
    assert sums.max() <= best + 0.5 and sums.max() > best - 15
    # per sample: the model's own likelihood with the offsets (and trend) profiled is
    # the pointwise sum at the best offsets, so it is never below it, and above it by
    # the Gaussian quadratic of the drawn offsets' deviation: m/2 on average for m
    # linear parameters (Bayesian linear regression: common practice, no source)
    from rvkep.likelihood import LogPosterior

    model = run.fit.model
    cols = run.posterior.columns
    rows = np.arange(0, len(sums), 7)
    flat_ll = ll.transpose(1, 0, 2).reshape(-1, ll.shape[-1])  # back to flat order
    phys = {k: np.asarray(v)[rows] for k, v in cols.items()}
    for c in model.companions:  # the sampler's angle in radians
        phys[f"{c.label}.omega"] = np.radians(phys[f"{c.label}.omega_deg"])
    theta = model.from_physical(phys)
    prof = LogPosterior(model, linear="profile", include_prior=False)(theta)
    gap = prof - flat_ll[rows].sum(axis=1)
    assert np.all(gap > -1e-6)
    assert 0.2 * model.n_linear / 2 < gap.mean() < 3 * model.n_linear / 2 + 1
    loo = az.loo(idata)
    assert 1.0 < float(loo["p_loo"]) < 20.0  # about the number of fitted parameters
