"""Posterior sampling: an analytic posterior, exact resume after kills, calibration."""

import math
import signal
import subprocess
import sys
import time
import warnings
from dataclasses import replace

import h5py
import numpy as np
import pytest
from helpers import HERE, finished_run, one_planet, planet_model, write_table  # noqa: F401

from rvkep.data import RVData
from rvkep.model import Companion, Instrument, SystemModel
from rvkep.orbit import radial_velocity
from rvkep.posterior import PosteriorSamples
from rvkep.priors import Fixed, LogUniform, Uniform
from rvkep.sampling import SamplerOptions, UnconvergedWarning, run_sampler


def linear_star(seed=0, n=30):
    """Invented data: two circular companions with known P and tc, so the model is
    linear in (K_b, K_c) and the offset."""
    rng = np.random.default_rng(seed)
    t = np.sort(rng.uniform(0, 100, n))
    err = rng.uniform(1.0, 2.0, n)
    # circular orbits, conjunctions at t = 53 and 51 (tp = tc for omega = pi/2)
    v = radial_velocity(t, 7.0, 53.0, 0.0, np.pi / 2, 4.0)
    v += radial_velocity(t, 17.0, 51.0, 0.0, np.pi / 2, 2.5)
    return RVData(t, v + 10.0 + rng.normal(0, err), err, np.full(n, "a"), epoch=50.0)


def test_linear_model_matches_analytic_posterior():
    # with P, tc fixed, e = 0 and jitter 0, v = K_b cos(.) + K_c cos(.) + offset: the
    # posterior (flat priors) is Gaussian with covariance (X^T W X)^-1
    # (common practice, no source; Bayesian linear regression)
    data = linear_star()
    comps = [
        Companion("b", Fixed(7.0), Fixed(53.0), Uniform(-50, 50), Fixed(0.0),
                  start={"period": 7.0, "tc": 53.0, "K": 4.0}),
        Companion("c", Fixed(17.0), Fixed(51.0), Uniform(-50, 50), Fixed(0.0),
                  start={"period": 17.0, "tc": 51.0, "K": 2.5}),
    ]  # fmt: skip
    model = SystemModel(data, comps, [Instrument("a", Fixed(0.0))])
    # the design: each companion's curve at unit K
    X = np.column_stack([
        radial_velocity(data.time, 7.0, 53.0, 0.0, np.pi / 2, 1.0),
        radial_velocity(data.time, 17.0, 51.0, 0.0, np.pi / 2, 1.0),
        np.ones(len(data)),
    ])  # fmt: skip
    W = np.diag(1 / data.err**2)
    cov = np.linalg.inv(X.T @ W @ X)
    mean = cov @ X.T @ W @ data.rv
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UnconvergedWarning)
        res = run_sampler(
            model, mean[:2], SamplerOptions(walkers=16, seed=2, progress=False, max_steps=6000)
        )
    flat = res.flat
    sd = np.sqrt(np.diag(cov))[:2]
    assert np.all(np.abs(flat.mean(0) - mean[:2]) < 0.1 * sd)
    assert np.allclose(np.cov(flat.T), cov[:2, :2], rtol=0.12, atol=0.05 * sd[0] * sd[1])
    post = PosteriorSamples.from_chain(model, flat, rng=1)
    # the offset drawn from its conditional Gaussian recovers its marginal posterior
    assert post["offset.a"].mean() == pytest.approx(mean[2], abs=0.1 * math.sqrt(cov[2, 2]))
    assert post["offset.a"].std() == pytest.approx(math.sqrt(cov[2, 2]), rel=0.06)


SCRIPT = r"""
import sys, warnings
import numpy as np
sys.path.insert(0, {tests!r})
from helpers import one_planet, planet_model
from rvkep.sampling import SamplerOptions, run_sampler
warnings.simplefilter("ignore")
fit = planet_model(one_planet())
opts = SamplerOptions(seed=5, max_steps={steps}, check_every=100, tau_factor=1e9,
                      progress=False, checkpoint={path!r})
res = run_sampler(fit.model, fit.theta, opts)
np.save({out!r}, res.chain)
"""


def run_script(tmp_path, path, out, steps, kill_after=None):
    code = SCRIPT.format(tests=HERE, steps=steps, path=str(path), out=str(out))
    proc = subprocess.Popen([sys.executable, "-c", code], stderr=subprocess.PIPE)
    if kill_after is None:
        assert proc.wait(timeout=300) == 0, proc.stderr.read().decode()
        return
    deadline = time.time() + 120
    while time.time() < deadline:  # kill once some, but not all, steps are on disk
        time.sleep(0.2)
        if proc.poll() is not None:
            break
        if path.exists():
            try:
                with h5py.File(path, "r", locking=False) as f:
                    if f["mcmc"].attrs["iteration"] >= kill_after:
                        break
            except (OSError, KeyError):
                pass
    proc.send_signal(signal.SIGKILL)
    proc.wait()


@pytest.mark.integration
def test_resume_after_sigkill_gives_the_same_chain(tmp_path):
    steps = 1500
    whole = tmp_path / "whole.h5"
    run_script(tmp_path, whole, tmp_path / "whole.npy", steps)
    part = tmp_path / "part.h5"
    run_script(tmp_path, part, tmp_path / "part.npy", steps, kill_after=300)
    with h5py.File(part, "r") as f:
        done = int(f["mcmc"].attrs["iteration"])
    assert 0 < done < steps
    run_script(tmp_path, part, tmp_path / "part.npy", steps)  # resumes
    assert np.array_equal(np.load(tmp_path / "whole.npy"), np.load(tmp_path / "part.npy"))


def test_resume_after_keyboard_interrupt(tmp_path, monkeypatch):
    import rvkep.sampling as sampling

    data = one_planet()
    fit = planet_model(data)
    opts = dict(seed=9, max_steps=600, check_every=100, tau_factor=1e9, progress=False)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UnconvergedWarning)
        whole = run_sampler(
            fit.model, fit.theta, SamplerOptions(**opts, checkpoint=tmp_path / "a.h5")
        )

        calls = {"n": 0}
        real = sampling.LogPosterior

        class Interrupting(real):
            def __call__(self, theta):
                calls["n"] += 1
                if calls["n"] == 500:  # in the middle of a chunk
                    raise KeyboardInterrupt
                return super().__call__(theta)

        monkeypatch.setattr(sampling, "LogPosterior", Interrupting)
        with pytest.raises(KeyboardInterrupt):
            run_sampler(fit.model, fit.theta, SamplerOptions(**opts, checkpoint=tmp_path / "b.h5"))
        monkeypatch.setattr(sampling, "LogPosterior", real)
        with h5py.File(tmp_path / "b.h5", "r") as f:
            assert 0 < f["mcmc"].attrs["iteration"] < 600
        resumed = run_sampler(
            fit.model, fit.theta, SamplerOptions(**opts, checkpoint=tmp_path / "b.h5")
        )
    assert np.array_equal(whole.chain, resumed.chain)


def test_converges_and_recovers_a_planet():
    data = one_planet()
    fit = planet_model(data)
    res = run_sampler(fit.model, fit.theta, SamplerOptions(seed=3, progress=False))
    assert res.converged and res.steps > 50 * np.max(res.tau)
    post = PosteriorSamples.from_chain(fit.model, res.flat, res.flat_log_prob)
    s = post.summary()
    for name, truth in (("b.period", 9.4), ("b.K", 12.0), ("b.ecc", 0.2)):
        med, lo, hi = s[name]["median"], s[name]["minus"], s[name]["plus"]
        assert med - 3 * lo < truth < med + 3 * hi
    d = res.diagnostics()
    assert 0.1 < d["acceptance_mean"] < 0.7 and d["effective_samples"] > 1000


def test_unconverged_run_warns_and_flags():
    data = one_planet()
    fit = planet_model(data)
    with pytest.warns(UnconvergedWarning, match="did NOT converge"):
        res = run_sampler(
            fit.model, fit.theta, SamplerOptions(seed=3, max_steps=200, progress=False)
        )
    assert not res.converged and res.diagnostics()["converged"] is False


def test_posterior_exports(tmp_path):
    data = one_planet()
    fit = planet_model(data)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UnconvergedWarning)
        res = run_sampler(
            fit.model, fit.theta, SamplerOptions(seed=3, max_steps=400, progress=False)
        )
    post = PosteriorSamples.from_chain(fit.model, res.flat, res.flat_log_prob)
    csv = post.to_csv(tmp_path / "s.csv")
    header = csv.read_text().splitlines()[0].split(",")
    assert {"b.period", "b.tc", "b.tp", "offset.a", "jitter.a", "log_posterior"} <= set(header)
    back = PosteriorSamples.read_npz(post.to_npz(tmp_path / "s.npz"))
    assert np.array_equal(back["b.K"], post["b.K"])
    assert len(post.thin(4)) == math.ceil(len(post) / 4)
    assert not list(tmp_path.glob(".*tmp*"))


@pytest.mark.slow
def test_calibration_across_synthetic_datasets():
    # In the spirit of simulation-based calibration (Talts et al. 2018, Validating
    # Bayesian inference algorithms with simulation-based calibration): 20 invented
    # single-planet datasets drawn from the prior (seed 100); the truth must fall in
    # the central 68% interval at a rate between 0.5 and 0.85.
    rng = np.random.default_rng(100)
    inside = total = 0
    for _ in range(20):
        P = float(np.exp(rng.uniform(np.log(6.0), np.log(25.0))))
        tc = float(rng.uniform(-2.5, 2.5))
        K = float(rng.uniform(4.0, 15.0))
        e = float(rng.uniform(0.0, 0.5))
        w = float(rng.uniform(0, 2 * np.pi))
        jit = float(rng.uniform(0.0, 3.0))
        t = np.sort(rng.uniform(-100, 100, 40))
        err = np.full(40, 2.0)
        from rvkep.orbit import tc_to_tp

        v = radial_velocity(t, P, tc_to_tp(tc, P, e, w), e, w, K) + rng.normal(
            0, np.hypot(err, jit)
        )
        data = RVData(t, v, err, np.full(40, "a"), epoch=0.0)
        comp = Companion(
            "b",
            LogUniform(6.0, 25.0),
            Uniform(-2.5, 2.5),
            Uniform(4.0, 15.0),
            Uniform(0.0, 0.5),
            start={"period": P, "tc": tc, "K": K, "ecc": max(e, 0.01), "omega": w},
        )
        model = SystemModel(data, [comp], [Instrument("a", Uniform(0.0, 3.0), max(jit, 0.1))])
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", UnconvergedWarning)
            # started at the truth (allowed: a converged chain forgets its start)
            res = run_sampler(
                model,
                model.start_theta(),
                SamplerOptions(seed=int(rng.integers(1e6)), progress=False, max_steps=8000),
            )
        post = PosteriorSamples.from_chain(model, res.flat)
        for name, truth in (("b.period", P), ("b.K", K), ("b.ecc", e), ("jitter.a", jit)):
            lo, hi = np.percentile(post[name], [15.87, 84.13])
            inside += lo <= truth <= hi
            total += 1
    rate = inside / total
    print(f"68% interval coverage over {total} (dataset, parameter) pairs: {rate:.3f}")
    assert 0.5 <= rate <= 0.85, rate


def steep_star(seed=5, n=40, e=0.85, start_e=None):
    """Invented data: one companion on an e = 0.85 orbit (P = 13.7 d) and its model,
    started at the truth."""
    from rvkep.orbit import tc_to_tp

    rng = np.random.default_rng(seed)
    t = np.sort(rng.uniform(-60, 60, n))
    P, tc, K, w = 13.7, 1.3, 20.0, 1.1
    v = radial_velocity(t, P, tc_to_tp(tc, P, e, w), e, w, K) + rng.normal(0, 2.0, n)
    data = RVData(t, v, np.full(n, 2.0), np.full(n, "a"), epoch=0.0)
    start = {"period": P, "tc": tc, "K": K, "ecc": e if start_e is None else start_e, "omega": w}
    comp = Companion("b", LogUniform(5.0, 40.0), Uniform(tc - P / 2, tc + P / 2),
                     Uniform(0.0, 100.0), Uniform(0.0, 0.99), start=start)  # fmt: skip
    return SystemModel(data, [comp], [Instrument("a", Uniform(0.0, 10.0), 0.5)])


def test_steep_orbit_is_sampled_in_its_coordinates_and_returned_in_the_models():
    # A start eccentricity >= 0.5 moves the walkers in the steep coordinates; what comes
    # back is in the caller's model: its coordinates, and its log posterior as
    # LogPosterior(model) computes it (the density, not the steep one's).
    from rvkep.likelihood import LogPosterior

    model = steep_star()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UnconvergedWarning)
        res = run_sampler(model, model.start_theta(),
                          SamplerOptions(seed=1, max_steps=300, progress=False))  # fmt: skip
    assert res.model is model and res.sampled_model.companions[0].steep
    d = res.diagnostics()
    assert d["steep_coordinates"] == ["b"] and "b.K_sqrt_1_minus_e2" in d["autocorr_by_parameter"]
    rows = np.random.default_rng(0).choice(len(res.flat), 40, replace=False)
    want = LogPosterior(model)(res.flat[rows])
    assert np.allclose(res.flat_log_prob[rows], want, rtol=0, atol=1e-7)
    # below the threshold the model's own coordinates are sampled
    mild = steep_star(start_e=0.3)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UnconvergedWarning)
        res = run_sampler(mild, mild.start_theta(),
                          SamplerOptions(seed=1, max_steps=50, progress=False))  # fmt: skip
    assert res.diagnostics()["steep_coordinates"] == []


def test_steep_coordinates_sample_the_prior_when_data_say_nothing():
    # Errors of 1e5 m/s make the likelihood flat, so the chain must draw the prior:
    # e ~ U(0.6, 0.95) and K ~ U(10, 30), checked by Kolmogorov-Smirnov (scipy.stats)
    # on the chain after 3 tau, thinned by tau (about 1,700 draws). Without the
    # coordinates' Jacobian the steep chain draws e with weights up to 3x off
    # (measured: KS p = 1e-27 against 0.09 and 0.15 for two seeds).
    from scipy import stats

    model = steep_star(n=20)
    data = RVData(model.data.time, model.data.rv, np.full(20, 1e5), model.data.instrument)
    comp = replace(model.companions[0], K=Uniform(10.0, 30.0), ecc=Uniform(0.6, 0.95))
    model = SystemModel(data, [comp], [Instrument("a", Fixed(0.0))])
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UnconvergedWarning)
        res = run_sampler(model, model.start_theta(),
                          SamplerOptions(seed=4, max_steps=4000, progress=False))  # fmt: skip
    assert res.sampled_model.companions[0].steep
    tau = int(np.max(res.tau))
    phys = model.to_physical(res.chain[3 * tau :: tau].reshape(-1, model.ndim))
    assert stats.kstest(phys["b.ecc"], stats.uniform(0.6, 0.35).cdf).pvalue > 1e-3
    assert stats.kstest(phys["b.K"], stats.uniform(10.0, 20.0).cdf).pvalue > 1e-3


def test_steep_orbit_checkpoint_resumes_to_the_same_chain(tmp_path):
    # the checkpoint holds the steep coordinates' chain (keyed on them); a run cut at
    # 500 steps and continued to 1,000 returns what one uninterrupted run does
    model = steep_star()
    path = tmp_path / "chain.h5"
    runs = []
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UnconvergedWarning)
        for steps, checkpoint in ((500, path), (1000, path), (1000, None)):
            opts = SamplerOptions(seed=2, max_steps=steps, progress=False, checkpoint=checkpoint)
            runs.append(run_sampler(model, model.start_theta(), opts))
    with h5py.File(path) as f:
        assert "K_sqrt_1_minus_e2" in f["mcmc"].attrs["rvkep_model"]
    assert runs[1].steps == 1000 and np.array_equal(runs[1].chain, runs[2].chain)
    assert np.array_equal(runs[1].log_prob, runs[2].log_prob)


@pytest.mark.slow
def test_calibration_of_steep_orbits():
    # Simulation-based calibration (Talts et al. 2018) of orbits sampled in the steep
    # coordinates: 16 invented single-planet datasets with e drawn from U(0.6, 0.95)
    # (seed 200); the truth must fall in the central 68% interval at a rate between
    # 0.5 and 0.85 (measured 0.59; 0.64 in the sqrt(e) coordinates). With 40 points
    # the likelihood outweighs the prior, so this checks the sampling and the way
    # back to the model's coordinates; the prior's Jacobian is checked where the
    # prior alone is sampled (test_steep_coordinates_sample_the_prior_when_data_say_nothing).
    from rvkep.orbit import tc_to_tp

    rng = np.random.default_rng(200)
    inside = total = 0
    for _ in range(16):
        P = float(np.exp(rng.uniform(np.log(6.0), np.log(25.0))))
        tc = float(rng.uniform(-2.5, 2.5))
        K = float(rng.uniform(10.0, 30.0))
        e = float(rng.uniform(0.6, 0.95))
        w = float(rng.uniform(0, 2 * np.pi))
        t = np.sort(rng.uniform(-100, 100, 40))
        err = np.full(40, 2.0)
        v = radial_velocity(t, P, tc_to_tp(tc, P, e, w), e, w, K) + rng.normal(0, err)
        data = RVData(t, v, err, np.full(40, "a"), epoch=0.0)
        comp = Companion("b", LogUniform(6.0, 25.0), Uniform(-2.5, 2.5), Uniform(10.0, 30.0),
                         Uniform(0.6, 0.95),
                         start={"period": P, "tc": tc, "K": K, "ecc": e, "omega": w})  # fmt: skip
        model = SystemModel(data, [comp], [Instrument("a", Fixed(0.0))])
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", UnconvergedWarning)
            res = run_sampler(
                model,
                model.start_theta(),
                SamplerOptions(seed=int(rng.integers(1e6)), progress=False, max_steps=12000),
            )
        assert res.sampled_model.companions[0].steep
        post = PosteriorSamples.from_chain(model, res.flat)
        for name, truth in (("b.period", P), ("b.K", K), ("b.ecc", e), ("b.tp", None)):
            if truth is None:  # periastron time, the cycle nearest the posterior's median
                med = float(np.median(post[name]))
                truth = tc_to_tp(tc, P, e, w)
                truth += P * round((med - truth) / P)
            lo, hi = np.percentile(post[name], [15.87, 84.13])
            inside += lo <= truth <= hi
            total += 1
    rate = inside / total
    print(f"steep orbits: 68% interval coverage over {total} pairs: {rate:.3f}")
    assert 0.5 <= rate <= 0.85, rate


def test_autocorrelation_times_are_emcees():
    # the stopping rule's tau against emcee.autocorr.integrated_time (the reference
    # estimator) on chains with short and long memory, one of them constant in one
    # parameter, and a chain shorter than its window
    import emcee

    from rvkep.sampling import _autocorr

    rng = np.random.default_rng(0)
    for shape in ((500, 48, 12), (3000, 32, 5), (7, 4, 3)):
        x = rng.standard_normal(shape).cumsum(axis=0) * 0.05 + rng.standard_normal(shape)
        want = emcee.autocorr.integrated_time(x, tol=0)
        assert np.allclose(_autocorr(x), want, rtol=1e-12, atol=0)
    x[:, :, 1] = 2.0  # a fixed column: NaN in both
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        want = emcee.autocorr.integrated_time(x, tol=0)
    got = _autocorr(x)
    assert np.isnan(got[1]) and np.isnan(want[1]) and np.allclose(got[[0, 2]], want[[0, 2]])


def test_snooker_update_is_emcees():
    # rvkep's snooker draws its walkers for the whole ensemble at once; the update
    # itself must be emcee's DESnookerMove.get_proposal (the reference) for the same
    # chosen walkers: a stub random state forces emcee's choice (indices 2, 0, 1 of
    # the three quarters, no shuffle)
    from emcee.moves import DESnookerMove

    from rvkep.moves import snooker_proposal

    class Forced:
        def __init__(self):
            self.next = iter([2, 0, 1] * 100)

        def randint(self, n):
            return next(self.next)

        def shuffle(self, x):
            pass

    rng = np.random.default_rng(3)
    s = rng.standard_normal((6, 5))
    c = [rng.standard_normal((6, 5)) for _ in range(3)]
    want_q, want_f = DESnookerMove().get_proposal(s, c, Forced())
    n = len(s)
    q, f = snooker_proposal(s, np.repeat(c[0][[2]], n, 0), np.repeat(c[1][[0]], n, 0),
                            np.repeat(c[2][[1]], n, 0), 1.7)  # fmt: skip
    assert np.allclose(q, want_q, rtol=1e-13, atol=1e-13)
    assert np.allclose(f, want_f, rtol=1e-12, atol=1e-12)


def test_snooker_picks_one_walker_of_each_other_quarter_in_random_roles(monkeypatch):
    # each proposal's (centre, first, second) are one walker from each of the three
    # other quarters, every one of the 6 role orders about equally often (chi-square
    # against uniform, scipy.stats)
    from scipy import stats

    from rvkep.moves import _snooker

    move = _snooker()
    c = [np.full((4, 2), float(j)) + np.arange(4)[:, None] * 0.1 for j in range(3)]
    s = np.full((3000, 2), 10.0)
    captured = {}

    def spy(s_, z, z1, z2, gamma):
        captured["roles"] = np.stack([np.floor(z[:, 0]), np.floor(z1[:, 0]), np.floor(z2[:, 0])], 1)
        captured["member"] = np.round((z[:, 0] % 1) * 10)
        return s_, np.zeros(len(s_))

    monkeypatch.setattr("rvkep.moves.snooker_proposal", spy)
    move.get_proposal(s, c, np.random.RandomState(0))
    roles = captured["roles"]
    assert (np.sort(roles, axis=1) == [0, 1, 2]).all()  # one walker of each quarter
    perms, counts = np.unique(roles, axis=0, return_counts=True)
    assert len(perms) == 6 and stats.chisquare(counts).pvalue > 1e-3
    assert stats.chisquare(np.bincount(captured["member"].astype(int), minlength=4)).pvalue > 1e-3


def test_the_largest_walker_count_a_model_file_allows_writes_its_checkpoint(tmp_path):
    """The commit record (628 + walkers numbers) is one HDF5 attribute, limited to
    64 KiB in compact storage (HDF5 user guide, attribute size: from memory); the
    model file's cap on walkers keeps it writable (8,100 walkers failed with "object
    header message is too large")."""
    import h5py

    from rvkep.modelfile import _SAMPLING_RANGE
    from rvkep.sampling import BufferedHDFBackend

    n = _SAMPLING_RANGE["walkers"][1]
    backend = BufferedHDFBackend(tmp_path / "chain.h5")
    backend.reset(n, 3)
    with h5py.File(tmp_path / "chain.h5", "r") as f:
        assert f["mcmc"].attrs["rvkep_commit"].size == 628 + n
    with pytest.raises((ValueError, RuntimeError, OSError)):
        BufferedHDFBackend(tmp_path / "big.h5").reset(8_100, 3)
