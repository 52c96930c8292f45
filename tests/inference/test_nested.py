"""Nested sampling (rvkep/samplers/nested.py, dynesty): the evidence of a model whose
evidence has a closed form, and the posterior against the MCMC one."""

import math

import numpy as np
import pytest

from rvkep.data import RVData
from rvkep.likelihood import LogPosterior
from rvkep.model import Companion, Instrument, SystemModel
from rvkep.priors import Fixed, Normal
from rvkep.samplers import get_sampler
from rvkep.samplers.nested import NestedOptions

PERIODS, TCS = (5.3, 17.0), (2459001.3, 2459004.0)
MEAN, SD = np.array([9.0, 6.0]), np.array([2.0, 1.5])


def linear_star(seed=7, n=30):
    """Two circular companions with known periods and phases: the velocities are
    linear in the two semi-amplitudes (invented data)."""
    rng = np.random.default_rng(seed)
    t = np.sort(rng.uniform(2459000, 2459060, n))
    err = rng.uniform(1.0, 2.0, n)
    # a circular orbit's reflex velocity, v = -K sin(2 pi (t - tc) / P) about the time
    # of conjunction tc (the star crosses zero going down there; common practice, no
    # source)
    shape = np.column_stack([-np.sin(2 * np.pi * (t - tc) / P)
                             for P, tc in zip(PERIODS, TCS, strict=True)])  # fmt: skip
    v = 3.0 + shape @ np.array([10.0, 5.0]) + rng.normal(0, err)
    return RVData(t, v, err, np.full(n, "a")), shape


def linear_model(data):
    comps = [Companion(label, Fixed(P), Fixed(tc), Normal(m, s), Fixed(0.0), start={"K": m})
             for label, P, tc, m, s in zip("bc", PERIODS, TCS, MEAN, SD, strict=True)]  # fmt: skip
    return SystemModel(data, comps, [Instrument("a", Fixed(0.0))])


def exact_ln_z(y, err, G):
    """ln Z of y = b 1 + G K + noise (errors err), b under a flat prior of unit
    density, K ~ N(MEAN, diag(SD^2)): the Gaussian integrals of Bayesian linear
    regression (Bishop 2006, Pattern Recognition and Machine Learning, sec. 3.4-3.5,
    eq. 3.86), done here over b and K in turn."""
    n = y.size
    w = 1.0 / err**2
    one = np.ones(n)
    # integrating the flat offset out leaves the projector P = W - W 1 1^T W / (1^T W 1)
    P = np.diag(w) - np.outer(w, w) / w.sum()
    S_inv = np.diag(1.0 / SD**2)
    A = G.T @ P @ G + S_inv
    b = G.T @ P @ y + S_inv @ MEAN
    quad = y @ P @ y + MEAN @ S_inv @ MEAN - b @ np.linalg.solve(A, b)
    return (-0.5 * (n - 1) * math.log(2 * math.pi) + 0.5 * np.sum(np.log(w))
            - 0.5 * math.log(one @ (w * one)) - 0.5 * np.sum(np.log(SD**2))
            - 0.5 * np.linalg.slogdet(A)[1] - 0.5 * quad)  # fmt: skip


def test_evidence_of_a_linear_gaussian_model_matches_its_closed_form():
    data, G = linear_star()
    model = linear_model(data)
    assert model.names == ["b.K", "c.K"]
    exact = exact_ln_z(data.rv, data.err, G)
    opts = NestedOptions(seed=3, live_points=300, progress=False)
    run = get_sampler("nested").run(LogPosterior(model), model.start_theta(), opts)
    ln_z, err = run.extra["ln_z"], run.extra["ln_z_err"]
    assert abs(ln_z - exact) < 3 * err, (ln_z, err, exact)
    assert run.weights.sum() == pytest.approx(1.0) and run.info["likelihood_calls"] > 0
    # the weighted posterior mean of K against the exact Gaussian posterior mean
    w = 1.0 / data.err**2
    P = np.diag(w) - np.outer(w, w) / w.sum()
    A = G.T @ P @ G + np.diag(1.0 / SD**2)
    mean = np.linalg.solve(A, G.T @ P @ data.rv + MEAN / SD**2)
    sd = np.sqrt(np.diag(np.linalg.inv(A)))
    got = run.weights @ run.theta
    assert np.all(np.abs(got - mean) < 0.1 * sd)


def test_checkpoint_resumes_the_same_run_and_refuses_another_model(tmp_path):
    import warnings

    from rvkep.sampling import CheckpointNotice

    data, _ = linear_star()
    model = linear_model(data)
    path = tmp_path / "nested.save"
    opts = NestedOptions(seed=3, live_points=100, progress=False, checkpoint=path)
    first = get_sampler("nested").run(LogPosterior(model), model.start_theta(), opts)
    assert path.exists() and not first.info["resumed"]
    again = get_sampler("nested").run(LogPosterior(model), model.start_theta(), opts)
    assert again.info["resumed"] and again.extra["ln_z"] == first.extra["ln_z"]
    # another model (a wider prior on c's K) may not resume this state
    from dataclasses import replace

    other = model.with_companions([model.companions[0],
                                   replace(model.companions[1], K=Normal(6.0, 3.0))])  # fmt: skip
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", CheckpointNotice)
        fresh = get_sampler("nested").run(LogPosterior(other), other.start_theta(), opts)
    assert not fresh.info["resumed"] and fresh.extra["ln_z"] != first.extra["ln_z"]
    assert any("not resumed" in str(w.message) for w in caught)
