"""The night term (rvkep/noise/night.py): noise correlated within one instrument's
night. The likelihood is checked against scipy's dense multivariate normal (the
reference library) with the offsets profiled by generalized least squares and
marginalized (Bayesian linear regression: common practice, no source); recovery on
the invented seven-night star of tests/stars.py."""

import numpy as np
import pytest
from scipy.stats import multivariate_normal
from stars import seven_night_hot_jupiter

from rvkep.cli import demo_folder
from rvkep.data import RVData
from rvkep.model import SystemModel
from rvkep.noise import default_noise_model
from rvkep.noise.night import dense_instruments, nights
from rvkep.pipeline import AnalyzeOptions, choose_model
from rvkep.reading import load_rv


def _two_instruments():
    """The seven-night star plus a sparse second instrument (one point a night)."""
    a = seven_night_hot_jupiter()
    rng = np.random.default_rng(4)
    t = np.sort(rng.uniform(a.time.min(), a.time.max(), 15))
    time = np.r_[a.time, t]
    rv = np.r_[a.rv, 30 + rng.normal(0, 5, t.size)]
    err = np.r_[a.err, np.full(t.size, 5.0)]
    inst = np.r_[a.instrument, np.full(t.size, "owl")]
    return RVData(time, rv, err, inst)


@pytest.mark.parametrize("trend", [0, 1])  # offsets only (A diagonal), and a trend
@pytest.mark.parametrize("linear", ["profile", "marginalize"])
def test_likelihood_equals_the_dense_gaussian(linear, trend):
    data = _two_instruments()
    model = SystemModel(data, [], trend=trend, noise="night")
    assert [p.name for p in model.noise_parameters] == ["night_heron"]  # owl is sparse
    phys = model.to_physical(np.tile(model.start_theta(), (2, 1)))
    phys["noise.night_heron"] = np.array([1.7, 0.0])
    phys["jitter.heron"] = np.array([0.4, 0.9])
    phys["jitter.owl"] = np.array([2.0, 3.0])
    r = np.tile(model.y, (2, 1))
    got, _ = model.noise_model.loglike(model, phys, np.arange(2), r, linear)
    label = nights(model.t, model.inst_index)
    heron = model.inst_index == data.instruments.index("heron")
    X = model.design
    for row in range(2):
        jit = np.where(heron, phys["jitter.heron"][row], phys["jitter.owl"][row])
        same = (label[:, None] == label[None, :]) & heron[:, None] & heron[None, :]
        C = np.diag(model.err2 + jit**2) + phys["noise.night_heron"][row] ** 2 * same
        Ci = np.linalg.inv(C)
        A = X.T @ Ci @ X
        beta = np.linalg.solve(A, X.T @ Ci @ r[row])
        ref = multivariate_normal(np.zeros(r.shape[1]), C).logpdf(r[row] - X @ beta)
        if linear == "marginalize":
            ref += -0.5 * np.linalg.slogdet(A)[1] + 0.5 * X.shape[1] * np.log(2 * np.pi)
        assert got[row] == pytest.approx(ref, rel=1e-12, abs=1e-9)


def test_which_instruments_get_a_night_term():
    data = _two_instruments()
    assert dense_instruments(data) == ["heron"]
    assert default_noise_model(data) == "night"
    folder = demo_folder()  # one velocity a night: white noise stays the default
    demo = load_rv([folder / "kestrel.txt", folder / "osprey.csv"])
    assert dense_instruments(demo) == [] and default_noise_model(demo) == "white"
    # nights: gaps under 6 hours chain one instrument's points
    t = np.array([0.0, 0.1, 0.2, 0.6, 0.7, 5.0])
    assert nights(t, np.zeros(6, int)).tolist() == [0, 0, 0, 1, 1, 2]
    assert len(set(nights(t, np.array([0, 1, 0, 0, 0, 0])).tolist())) == 4


def test_seven_nights_give_one_companion_with_the_night_term():
    # invented star (tests/stars.py, seed 0, nightly shifts of 3 m/s): as white noise
    # the nightly shifts become a second companion; with the night term, one at P
    data = seven_night_hot_jupiter(0, 3.0)
    white = choose_model(data, AnalyzeOptions(quiet=True, noise="white"))
    assert len(white.fit.model.companions) == 2
    night = choose_model(data, AnalyzeOptions(quiet=True))  # the default for these data
    assert night.fit.model.noise == "night"
    periods = [night.fit.params[f"{c.label}.period"] for c in night.fit.model.companions]
    assert periods == pytest.approx([4.2308], rel=3e-3)
    assert night.fit.model.trend == 0
    assert 1.0 < night.fit.params["noise.night_heron"] < 6.0
