"""The figures' model curves as arrays: the vectorized phase band against a
draw-by-draw evaluation."""

import warnings

import numpy as np
from test_sampling import one_planet

import rvkep
from rvkep.curves import phase_curves, timeseries_curves
from rvkep.likelihood import keplerian_velocity
from rvkep.sampling import UnconvergedWarning


def test_phase_band_equals_draw_by_draw_curves():
    data = one_planet()
    best = rvkep.fit(data, [9.4])
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UnconvergedWarning)
        run = best.sample(seed=3, max_steps=300, progress=False)
    res = rvkep.Results.from_sampling(run)
    ph = phase_curves(res, "b", n_draws=50)
    model = best.model
    theta = res.posterior.theta
    idx = np.random.default_rng(0).choice(len(theta), size=50, replace=False)
    phys = model.to_physical(theta[idx])
    single = model.with_companions([model.companions[0]])
    loop = np.array([
        keplerian_velocity(single, {k: v[j : j + 1] for k, v in phys.items()},
                           t=phys["b.tc"][j] + ph["grid"] * phys["b.period"][j])[0]
        for j in range(50)
    ])  # fmt: skip
    assert np.allclose(ph["band"], np.percentile(loop, [15.87, 84.13], axis=0), atol=1e-9)
    ts = timeseries_curves(res)
    assert ts["band"][0].shape == ts["time"].shape and np.all(ts["band"][0] <= ts["band"][1])
    # the folded points sit on the best-fit curve within the noise (errors 2 m/s)
    model_at_points = np.interp(ph["phase"], ph["grid"], ph["curve"])
    assert np.std(ph["velocity"] - model_at_points) < 4.0
