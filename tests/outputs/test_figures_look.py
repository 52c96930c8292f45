"""The figures and tables as a reader sees them: each defect found by trying them as a
new user would, guarded here (a visible posterior band, no tag on the levels' legend,
no level line through a panel's name, math-text corner labels inside the figure, the
removed trend said, a residual panel under each phase plot, small numbers in powers of
ten, epochs without a unit, the derived temperatures with their assumptions), and the
look: one colour per companion in every figure and in the report."""

import warnings

import matplotlib
import pytest
from helpers import one_planet

from rvkep.model import SystemModel
from rvkep.optimize import fit_companions
from rvkep.period_search import search
from rvkep.physics import StarProperties
from rvkep.plots import (
    corner_figure,
    phase_figure,
    plot_periodograms,
    timeseries_figure,
)
from rvkep.results import Results
from rvkep.sampling import UnconvergedWarning
from rvkep.style import RESIDUAL_LABEL, companion_colour


@pytest.fixture(scope="module")
def run():
    data = one_planet(n=50)
    trend = data.rv + 4.0 * (data.time - data.time.mean()) / 365.25  # +4 m/s per year
    data = type(data)(data.time, trend, data.err, data.instrument)
    fit = fit_companions(data, [[9.4]], base=SystemModel(data, [], trend=1))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UnconvergedWarning)
        sampled = fit.sample(seed=3, max_steps=1500, check_every=500, progress=False)
    star = StarProperties(1.0, 0.05, radius=1.1, radius_err=0.05, teff=5700.0, teff_err=80.0)
    return Results.from_sampling(sampled, star=star, search=search(data, max_signals=1, trend=1))


def _drawn(fig):
    fig.canvas.draw()
    return fig.canvas.get_renderer()


def test_posterior_band_is_visible_and_its_width_drawn(run):
    import matplotlib.collections as mc

    fig = timeseries_figure(run)
    fills = [c for c in fig.axes[0].collections if isinstance(c, mc.PolyCollection)]
    assert fills and all(c.get_alpha() >= 0.3 for c in fills)
    spread = fig.axes[1]
    assert "spread" in spread.get_ylabel()
    top = spread.collections[0].get_paths()[0].vertices[:, 1].max()
    assert top > 0 and spread.get_ylim()[1] >= top  # the band's width, on its own axis
    matplotlib.pyplot.close(fig)


def test_trend_removed_from_the_time_series_is_said(run):
    fig = timeseries_figure(run)
    texts = " ".join(t.get_text() for t in fig.axes[0].texts)
    assert "trend (" in texts and "removed" in texts and "m/s/yr" in texts
    matplotlib.pyplot.close(fig)


def test_peak_tags_stay_off_the_legend_and_names_off_the_level_lines(run):
    fig = plot_periodograms(run.search)
    r = _drawn(fig)
    legend = fig.axes[0].get_legend().get_window_extent(r)
    for ax in fig.axes:
        box = ax.get_window_extent(r)
        for t in ax.texts:
            assert not t.get_window_extent(r).overlaps(legend), t.get_text()
        name = next(t for t in (ax.title, ax._left_title, ax._right_title) if t.get_text())
        assert name.get_window_extent(r).y0 >= box.y1 - 1  # above the axes, where no
        assert not any(t.get_text() == name.get_text() for t in ax.texts)  # level line runs
    matplotlib.pyplot.close(fig)


def test_corner_labels_are_math_text_and_titles_fit(run):
    fig = corner_figure(run, "b")
    r = _drawn(fig)
    whole = fig.bbox
    labels = [ax.get_xlabel() for ax in fig.axes if ax.get_xlabel()]
    assert labels and all("$" in lab for lab in labels)
    titles = [ax.title for ax in fig.axes if ax.title.get_text()]
    assert len(titles) == 5
    for t in titles:
        e = t.get_window_extent(r)
        assert "$" in t.get_text() and "+-" not in t.get_text()
        assert e.x0 >= 0 and e.x1 <= whole.x1 and e.y1 <= whole.y1, t.get_text()
    matplotlib.pyplot.close(fig)


def test_phase_plot_has_a_residual_panel_and_the_companion_colour(run):
    from matplotlib.colors import to_hex

    fig = phase_figure(run, "b")
    assert len(fig.axes) == 2 and fig.axes[1].get_ylabel() == RESIDUAL_LABEL
    curve = max(fig.axes[0].lines, key=lambda ln: len(ln.get_xdata()))
    assert to_hex(curve.get_color()) == companion_colour(0)
    matplotlib.pyplot.close(fig)


def test_tables_write_small_numbers_in_powers_of_ten_and_epochs_without_unit(run):
    tex = run.latex_table()
    assert "0.0000" not in tex and r"\times 10^{" in tex  # the mass function, ~1e-9 M_sun
    for line in tex.splitlines():
        if r"t_\mathrm{c}" in line or r"t_\mathrm{p}" in line:
            assert line.rstrip(" \\").endswith("&"), line  # no unit after an epoch
    assert "albedo" in tex


def test_transit_probability_and_temperatures_in_the_summary_with_assumptions(run):
    md = run.markdown()
    for words in ("a priori transit probability", "equilibrium temperature", "insolation",
                  "Bond albedo of 0", "full heat redistribution"):  # fmt: skip
        assert words in md, words


def test_the_report_shows_each_companion_in_its_figure_colour(run):
    from rvkep.report.html import render

    page = render(run)
    assert f'class="swatch" style="background: {companion_colour(0)}"' in page
