"""The figures' model curves as arrays: the vectorized phase band against a
draw-by-draw evaluation."""

import warnings

import numpy as np
import pytest
from helpers import one_planet

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


def test_figures_are_drawn_from_a_results_into_a_given_figure():
    import matplotlib.pyplot as plt

    from rvkep.plots import corner_figure, phase_figure, timeseries_figure

    data = one_planet()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UnconvergedWarning)
        run = rvkep.fit(data, [9.4]).sample(seed=3, max_steps=300, progress=False)
    res = rvkep.Results.from_sampling(run)
    fig = timeseries_figure(res)
    assert len(fig.axes) == 3  # velocities, the model's spread and what is left over
    # a second run drawn into the same figure: over the first one, not instead of it
    n_lines = len(fig.axes[0].get_lines())
    assert timeseries_figure(res, fig=fig) is fig and len(fig.axes) == 3
    assert len(fig.axes[0].get_lines()) == 2 * n_lines
    crowded, _ = plt.subplots(4, 1)
    with pytest.raises(ValueError, match="the figure has 4 panels; this plot draws 3"):
        timeseries_figure(res, fig=crowded)
    own, ax = plt.subplots()
    ax.plot([0, 1], [0, 1], label="drawn before")
    assert phase_figure(res, "b", fig=own, ax=ax) is own
    labels = [line.get_label() for line in ax.get_lines()]
    assert "drawn before" in labels and len(ax.get_lines()) > 1  # drawn over, not cleared
    corner = corner_figure(res, "b")
    assert corner._suptitle.get_text() == "companion b" and len(corner.axes) == 25  # 5 x 5
    plt.close("all")
