"""Prior densities, quantiles and draws against scipy.stats (reference library)."""

import numpy as np
import pytest
from scipy import stats

from rvkep import priors

CASES = [
    (priors.Uniform(-2.0, 5.0), stats.uniform(-2.0, 7.0)),
    (priors.LogUniform(0.5, 400.0), stats.loguniform(0.5, 400.0)),
    (priors.Normal(3.0, 0.2), stats.norm(3.0, 0.2)),
    (priors.TruncatedNormal(1.0, 2.0, 0.0, 3.0), stats.truncnorm(-0.5, 1.0, loc=1.0, scale=2.0)),
    (priors.Beta(0.867, 3.03), stats.beta(0.867, 3.03)),  # Kipping (2013), MNRAS 434, L51
]


@pytest.mark.parametrize("prior,ref", CASES, ids=lambda p: getattr(p, "kind", ""))
def test_logpdf_ppf_against_scipy(prior, ref):
    lo, hi = ref.ppf([1e-6, 1 - 1e-6])
    x = np.linspace(lo, hi, 101)
    assert np.allclose(prior.logpdf(x), ref.logpdf(x), rtol=1e-10, atol=1e-10)
    u = np.linspace(0.001, 0.999, 57)
    assert np.allclose(prior.ppf(u), ref.ppf(u), rtol=1e-9, atol=1e-12)
    draws = prior.sample(4000, rng=7)
    assert stats.kstest(draws, ref.cdf).pvalue > 1e-3


@pytest.mark.parametrize("prior,ref", CASES, ids=lambda p: getattr(p, "kind", ""))
def test_outside_support_is_minus_inf_without_warnings(prior, ref):
    lo, hi = prior.bounds
    # outside a finite bound, and NaN for every prior (a NaN must never pass as valid)
    bad = [v for v in (lo - 1.0, hi + 1.0) if np.isfinite(v)] + [np.nan]
    with np.errstate(all="raise"):
        values = prior.logpdf(np.array(bad))
    assert values.shape == (len(bad),) and len(bad) >= 1
    assert np.all(values == -np.inf), dict(zip(bad, values, strict=True))


def test_fixed_prior():
    p = priors.Fixed(0.0)
    assert p.is_fixed and p.logpdf(0.0) == 0.0 and p.logpdf(0.1) == -np.inf
    assert np.all(p.sample(3) == 0.0)


def test_prior_from_dict_and_errors():
    assert priors.prior_from_dict({"prior": "normal", "mean": 1, "sd": 2}) == priors.Normal(
        1.0, 2.0
    )
    with pytest.raises(ValueError, match="unknown prior 'gauss'"):
        priors.prior_from_dict({"prior": "gauss"}, "x")
    with pytest.raises(ValueError, match="needs sd"):
        priors.prior_from_dict({"prior": "normal", "mean": 1}, "x")
    with pytest.raises(ValueError, match="min < max"):
        priors.prior_from_dict({"prior": "uniform", "min": 2, "max": 1}, "x")
    with pytest.raises(ValueError, match="must be a number"):
        priors.prior_from_dict({"prior": "uniform", "min": "a", "max": 1}, "x")


def test_the_packed_table_is_the_sum_of_the_priors_against_scipy():
    # one table over a vector of five columns: three packed kinds, one general prior
    # (beta, evaluated by its own logpdf) and a column without a prior (held)
    entries = [(0, CASES[1][0]), (1, CASES[0][0]), (2, CASES[4][0]), (4, CASES[2][0])]
    table = priors.PriorTable.pack(entries, 5)
    assert list(table.code) == [priors.PriorCode.LOGUNIFORM, priors.PriorCode.UNIFORM,
                                priors.PriorCode.GENERAL, priors.PriorCode.GENERAL,
                                priors.PriorCode.NORMAL]  # fmt: skip
    assert [col for col, _ in table.general] == [2]
    rng = np.random.default_rng(3)
    V = np.column_stack([rng.uniform(0.3, 450, 200), rng.uniform(-3, 6, 200),
                         rng.uniform(0.01, 0.99, 200), rng.normal(size=200),
                         rng.normal(3.0, 0.3, 200)])  # fmt: skip
    lp, inside = table.logpdf(V)
    refs = {0: CASES[1][1], 1: CASES[0][1], 2: CASES[4][1], 4: CASES[2][1]}
    want = sum(refs[c].logpdf(V[:, c]) for c in refs)
    assert np.array_equal(inside, np.isfinite(want))
    assert inside.sum() > 100 and (~inside).sum() > 10
    assert np.allclose(lp[inside], want[inside], rtol=1e-12, atol=1e-10)


def test_the_compiled_kernel_reads_the_same_kind_codes():
    # the compiled log posterior compares the table's codes with rvkep._constants,
    # the values PriorCode is made of (one enumeration)
    from rvkep import _constants

    assert {int(k) for k in priors.PACKED_DENSITY} == {
        _constants.PRIOR_UNIFORM, _constants.PRIOR_LOGUNIFORM, _constants.PRIOR_NORMAL}
    assert priors.PriorCode.GENERAL == _constants.PRIOR_GENERAL
