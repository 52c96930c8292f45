"""The model's coordinates and log prior against plain references."""

import math
from dataclasses import replace

import numpy as np
import pytest

from rvkep.data import RVData
from rvkep.model import Companion, Instrument, SystemModel
from rvkep.orbit import from_sqrt_e, tc_to_tp
from rvkep.priors import Beta, Fixed, LogUniform, Normal, TruncatedNormal, Uniform


def mixed_model():
    """Invented data and a model using every prior kind."""
    rng = np.random.default_rng(0)
    t = np.sort(rng.uniform(0, 200, 30))
    inst = np.where(np.arange(30) % 2, "a", "b")
    data = RVData(t, rng.normal(0, 5, 30), np.ones(30), inst, epoch=100.0)
    comps = [
        Companion("b", LogUniform(2, 50), Uniform(95, 115), Uniform(0, 50), Beta(0.867, 3.03)),
        Companion(
            "c",
            Normal(30.0, 0.5),
            TruncatedNormal(101.0, 2.0, 95, 110),
            LogUniform(0.5, 80),
            Uniform(0, 0.9),
        ),
        Companion("d", Fixed(70.0), Normal(120.0, 3.0), Fixed(4.0), Fixed(0.0)),
    ]
    insts = [Instrument("a", Uniform(0, 10)), Instrument("b", Fixed(1.5))]
    return SystemModel(data, comps, insts, trend=1)


def reference_log_prior(model, theta):
    """Sum of each prior's logpdf on the physical values, plus ln P Jacobians, with
    e >= 1, K < 0 and negative jitter refused (plain loop, one row at a time)."""
    out = []
    for row in theta:
        phys = {k: v[0] for k, v in model.to_physical(row[None]).items()}
        total = 0.0
        for c in model.companions:
            L = c.label
            if not c.period.is_fixed:
                total += float(c.period.logpdf(phys[f"{L}.period"])) + math.log(phys[f"{L}.period"])
            if not c.tc.is_fixed:
                total += float(c.tc.logpdf(phys[f"{L}.tc"]))
            if not c.circular:
                e = phys[f"{L}.ecc"]
                total += float(c.ecc.logpdf(e)) if e < 1 else -np.inf
            if not c.K.is_fixed:
                K = phys[f"{L}.K"]
                total += float(c.K.logpdf(K)) if K >= 0 else -np.inf
        for i in model.instruments:
            if not i.jitter.is_fixed:
                s = phys[f"jitter.{i.name}"]
                total += float(i.jitter.logpdf(s)) if s >= 0 else -np.inf
        out.append(total if np.isfinite(total) else -np.inf)
    return np.array(out)


def test_log_prior_matches_plain_reference():
    model = mixed_model()
    assert model.names == [
        "b.ln_period", "b.tc", "b.sqrt_e_cos_omega", "b.sqrt_e_sin_omega", "b.K",
        "c.ln_period", "c.tc", "c.sqrt_e_cos_omega", "c.sqrt_e_sin_omega", "c.K",
        "d.tc", "jitter.a",
    ]  # fmt: skip
    rng = np.random.default_rng(1)
    centre = np.array([math.log(10), 5, 0.2, 0.1, 20, math.log(30), 1, -0.3, 0.2, 10, 20, 3])
    theta = centre + rng.normal(0, [1, 8, 0.5, 0.5, 25, 0.05, 4, 0.5, 0.5, 30, 5, 6], (400, 12))
    got = model.log_prior(theta)
    ref = reference_log_prior(model, theta)
    assert np.array_equal(np.isfinite(got), np.isfinite(ref))
    assert 20 < np.isfinite(ref).sum() < 380  # both valid and invalid rows are tested
    ok = np.isfinite(ref)
    assert np.allclose(got[ok], ref[ok], rtol=1e-12, atol=1e-10)


def test_to_physical_matches_orbit_functions():
    model = mixed_model()
    theta = np.array([[math.log(10), 5, 0.2, 0.1, 20, math.log(30), 1, -0.3, 0.2, 10, 20, 3]])
    p = {k: v[0] for k, v in model.to_physical(theta).items()}
    e, w = from_sqrt_e(0.2, 0.1)
    assert p["b.ecc"] == pytest.approx(float(e)) and p["b.omega"] == pytest.approx(float(w))
    # times in the data's system: the coordinate tc = 5 is 5 d after the epoch (100)
    assert p["b.tc"] == 105.0
    assert p["b.tp"] == pytest.approx(100.0 + float(tc_to_tp(5.0, 10.0, e, w)), abs=1e-12)
    assert p["d.period"] == pytest.approx(70.0, rel=1e-15) and p["d.K"] == 4.0 and p["d.ecc"] == 0.0
    assert p["d.tc"] == pytest.approx(120.0) and p["jitter.b"] == 1.5
    back = model.from_physical({k: np.array([v]) for k, v in p.items()})
    assert np.allclose(back, theta)


def test_prior_transform_draws_the_stated_priors():
    """Uniform points of the unit cube through prior_transform give the priors the
    model states: each physical parameter against draws of its own prior
    (two-sample Kolmogorov-Smirnov, scipy), omega uniform, log_prior finite."""
    from scipy import stats

    from rvkep.data import RVData
    from rvkep.model import Companion, Instrument, SystemModel
    from rvkep.priors import Beta, LogUniform, Normal, Uniform

    rng = np.random.default_rng(11)
    t = np.sort(rng.uniform(2459000, 2459400, 30))
    data = RVData(t, rng.normal(0, 5, 30), np.full(30, 2.0), np.full(30, "a"))
    start = {"period": 20.0, "tc": 2459100.0, "K": 5.0}
    comp = Companion("b", LogUniform(2.0, 200.0), Normal(2459100.0, 3.0), Uniform(0.0, 50.0),
                     Beta(0.867, 3.03), start=start)  # fmt: skip
    model = SystemModel(data, [comp], [Instrument("a", Uniform(0.0, 10.0))])
    u = rng.uniform(size=(20000, model.ndim))
    theta = model.prior_transform(u)
    assert np.all(np.isfinite(model.log_prior(theta)))
    phys = model.to_physical(theta)
    for name, prior, shift in (("b.period", comp.period, 0.0), ("b.tc", comp.tc, 0.0),
                               ("b.K", comp.K, 0.0), ("b.ecc", comp.ecc, 0.0),
                               ("jitter.a", model.instruments[0].jitter, 0.0)):  # fmt: skip
        ref = prior.sample(20000, rng=rng)
        assert stats.ks_2samp(phys[name] + shift, ref).pvalue > 1e-3, name
    assert stats.kstest(phys["b.omega"] / (2 * np.pi), "uniform").pvalue > 1e-3
    assert np.allclose(model.prior_transform(u[0]), theta[0])


def steep_twin(model):
    """The same model with every eccentric companion in the steep coordinates."""
    return replace(model, companions=[replace(c, steep=not c.circular) for c in model.companions])


def test_steep_coordinates_same_orbits_and_prior_up_to_the_jacobian():
    # The prior is one distribution in either set of coordinates, so the two log
    # densities must differ by the log-determinant of the map between them. The
    # reference determinant is a central finite-difference Jacobian of the composed
    # map (numpy slogdet), independent of the derivation in model.py.
    model = mixed_model()
    steep = steep_twin(model)
    assert "b.stretched_e_cos_omega" in steep.names and "c.K_sqrt_1_minus_e2" in steep.names
    rng = np.random.default_rng(1)
    theta = model.prior_transform(rng.uniform(size=(6, model.ndim)))
    phys = model.to_physical(theta)
    x = steep.from_physical(phys)
    back = steep.to_physical(x)
    assert all(np.allclose(back[k], phys[k], rtol=1e-12, atol=1e-9) for k in phys)

    def to_plain(v):
        return model.from_physical(steep.to_physical(v))

    step = 1e-6
    for row in x:
        jac = np.empty((model.ndim, model.ndim))
        for j in range(model.ndim):
            d = np.zeros(model.ndim)
            d[j] = step
            jac[:, j] = (to_plain((row + d)[None])[0] - to_plain((row - d)[None])[0]) / (2 * step)
        log_det = np.linalg.slogdet(jac)[1]
        gap = steep.log_prior(row[None])[0] - model.log_prior(to_plain(row[None]))[0]
        assert gap == pytest.approx(log_det, abs=1e-6)


def test_steep_prior_transform_draws_the_stated_priors():
    # Uniform points through the steep model's prior transform give e, omega and K
    # distributed as the priors state (Kolmogorov-Smirnov against scipy.stats).
    from scipy import stats

    steep = steep_twin(mixed_model())
    u = np.random.default_rng(2).uniform(size=(4000, steep.ndim))
    phys = steep.to_physical(steep.prior_transform(u))
    assert stats.kstest(phys["b.ecc"], stats.beta(0.867, 3.03).cdf).pvalue > 1e-3
    assert stats.kstest(phys["c.ecc"], stats.uniform(0, 0.9).cdf).pvalue > 1e-3
    assert stats.kstest(phys["b.omega"], stats.uniform(0, 2 * np.pi).cdf).pvalue > 1e-3
    assert stats.kstest(phys["b.K"], stats.uniform(0, 50).cdf).pvalue > 1e-3
    assert stats.kstest(phys["c.K"], stats.loguniform(0.5, 80).cdf).pvalue > 1e-3


def test_steep_flag_is_part_of_the_model_description():
    model = mixed_model()
    steep = steep_twin(model)
    assert steep.canonical() != model.canonical()  # checkpoints keyed apart
    again = SystemModel.from_dict(steep.to_dict(), steep.data)
    assert again.names == steep.names
    with pytest.raises(ValueError, match="circular"):
        replace(model.companions[2], steep=True)
