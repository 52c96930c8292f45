"""Figures. Each function returns a matplotlib Figure and can draw into a given one.

They share rvkep's look (:mod:`rvkep.style`): each companion keeps its colour and each
instrument its marker and ink in every figure; residual panels (O-C) sit over a
band of +-1 median error; binned phase points are bars with error strokes in the
companion's colour. Axes carry units. matplotlib is imported inside the functions so
the rest of rvkep starts fast.
"""

from __future__ import annotations

import math

import numpy as np

from rvkep.style import (
    BAND,
    INK,
    INSTRUMENT_INKS,
    INSTRUMENT_MARKERS,
    RESIDUAL_LABEL,
    VELOCITY_LABEL,
    companion_colour,
    figure_style,
    instrument_style,
)

__all__ = [
    "timeseries_figure",
    "phase_figure",
    "corner_figure",
    "INSTRUMENT_COLOURS",
    "INSTRUMENT_MARKERS",
    "instrument_style",
    "plot_periodograms",
    "plot_timeseries",
    "plot_phase",
    "plot_corner",
]

#: The instruments' inks and markers and the other colours: rvkep's look
#: (:mod:`rvkep.style`), the same in every figure and in the HTML report.
INSTRUMENT_COLOURS = INSTRUMENT_INKS
MODEL_COLOUR = INK
BAND_COLOUR = BAND
ACTIVITY_COLOUR = "#8a8f3a"  # olive: the stellar-activity signal, apart from companions
LEVEL_COLOUR = "#8c2f39"  # false-alarm levels
#: Opacity of the 68% posterior bands (a test keeps it visible).
BAND_ALPHA = 0.35


def _styled(func):
    """Draw inside rvkep's figure style (:func:`rvkep.style.figure_style`)."""
    import functools

    @functools.wraps(func)
    def wrapper(*args, **kwargs):
        with figure_style():
            return func(*args, **kwargs)

    return wrapper


def _figure(fig, nrows, height_ratios=None, figsize=(8, 6), sharex=True):
    """A new figure with ``nrows`` stacked panels, or the given one: its panels are
    drawn over when it has ``nrows`` of them (say, another run on the same axes), new
    ones are made when it has none; any other layout is refused (ValueError)."""
    import matplotlib.pyplot as plt

    if fig is None:
        fig = plt.figure(figsize=figsize, layout="constrained")
    elif fig.axes:
        if len(fig.axes) != nrows:
            raise ValueError(f"the figure has {len(fig.axes)} panels; this plot draws {nrows} "
                             "(give an empty figure, or one this plot drew)")  # fmt: skip
        return fig, np.array(fig.axes)
    axes = fig.subplots(nrows, 1, sharex=sharex, squeeze=False, height_ratios=height_ratios)[:, 0]
    return fig, axes


@_styled
def plot_periodograms(result, fig=None, activity: bool = True):
    """Periodogram of the data, of the residuals after each signal, and the window.

    Each panel names its series above the axes (so no level line crosses the name);
    the false-alarm levels' legend sits above the first panel, outside the data, so a
    peak's tag never lands on it; the accepted periods are marked in their companions'
    colours.

    Parameters
    ----------
    result : rvkep.period_search.SearchResult
    fig : matplotlib Figure, optional
        Drawn into instead of a new one.
    activity : bool
        Add one panel per activity indicator.

    Returns
    -------
    matplotlib.figure.Figure
        The figure.
    """
    pgs = list(result.periodograms)
    extra = list(result.activity.values()) if activity else []
    n = len(pgs) + len(extra) + 1
    fig, axes = _figure(fig, n, figsize=(8, 1.9 * n + 0.8))
    found = [c for c in result.candidates if c.significant]
    for k, (ax, pg) in enumerate(zip(axes, pgs + extra, strict=False)):
        ax.plot(pg.period, pg.power, lw=0.7, color=MODEL_COLOUR)
        for (fap, level), ls in zip(pg.fap_levels.items(), (":", "--", "-."), strict=False):
            ax.axhline(level, color=LEVEL_COLOUR, lw=0.8, ls=ls, label=f"FAP {fap:g}")
        top = max([1.05 * float(pg.power.max()), *(1.1 * v for v in pg.fap_levels.values())])
        ax.set_ylim(0, top * 1.12)
        if k < len(pgs) and k < len(result.candidates):
            c = result.candidates[k]
            ax.plot([c.period], [c.power], "v", color=MODEL_COLOUR, ms=6)
            lo, hi = np.log(pg.period.min()), np.log(pg.period.max())
            right = (np.log(c.period) - lo) / max(hi - lo, 1e-12) > 0.7
            ax.annotate(f"{c.period:.4g} d, FAP {c.fap:.1e}", (c.period, c.power),
                        xytext=(-6 if right else 6, 0), textcoords="offset points",
                        fontsize=8, va="center", ha="right" if right else "left",
                        bbox={"boxstyle": "round,pad=0.15", "fc": "white", "ec": "none",
                              "alpha": 0.85})  # fmt: skip
        ax.set_title(pg.label, fontsize=9, loc="left", fontweight="normal")
        ax.set_ylabel("power")
        for q, c in enumerate(found):
            ax.axvline(c.period, color=companion_colour(q), lw=0.8, alpha=0.7)
    if pgs and pgs[0].fap_levels:
        axes[0].legend(loc="lower right", bbox_to_anchor=(1.0, 1.0), ncol=3, fontsize=7,
                       borderaxespad=0.2)  # fmt: skip
    ax = axes[-1]
    ax.plot(1.0 / result.frequency, result.window, lw=0.7, color="#6b6b6b")
    ax.set_title("spectral window", fontsize=9, loc="left", fontweight="normal")
    ax.set_ylabel("window")
    ax.set_xscale("log")
    ax.set_xlabel("period [d]")
    return fig


def _time_offset(t):
    """A round offset to subtract from times for readable axes (e.g. 2459000)."""
    t0 = float(np.min(t))
    if t0 > 2_400_000:
        return 1000.0 * math.floor(t0 / 1000.0)
    return 0.0


def _left_over(ax, x, residuals, data, k_styles, xlim=None):
    """A residual panel in rvkep's look: the points over a band of +-1 median error."""
    scale = float(np.median(data.err))
    lo, hi = (np.min(x), np.max(x)) if xlim is None else xlim
    ax.fill_between([lo, hi], -scale, scale, color="#e9ecee", lw=0, zorder=0,
                    label="+-1 median error")  # fmt: skip
    ax.axhline(0, color=MODEL_COLOUR, lw=0.7, ls=":")
    for m, st in k_styles:
        ax.errorbar(x[m], residuals[m], data.err[m], ls="none", ms=3.5, mec="white", mew=0.3,
                    elinewidth=0.6, **st)  # fmt: skip
    ax.set_ylabel(RESIDUAL_LABEL)


@_styled
def plot_timeseries(data, curve_t, curve, band=None, residuals=None, offsets=None, fig=None,
                    activity=None, removed: str = ""):  # fmt: skip
    """Velocities per instrument with the model and its posterior band; below, the
    band's width over time (the model's spread: where the orbit is least pinned down),
    and the residuals (O-C).

    Parameters
    ----------
    data : RVData
        The velocities.
    curve_t, curve : arrays
        Model times and velocities (offsets removed).
    band : (low, high) arrays, optional
        Posterior band of the model at ``curve_t`` (e.g. 16th and 84th percentiles).
    residuals : array, optional
        Data minus model at the data times.
    offsets : dict, optional
        Offset per instrument, subtracted from its velocities.
    activity : dict, optional
        A correlated signal apart from the companions (``time``, ``mean``, ``band``,
        and ``data``, the data minus offsets, trend and companions;
        :func:`rvkep.curves.timeseries_curves`): drawn in a panel of its own.
    removed : str
        What was taken out of the velocities besides the offsets (e.g. the trend),
        said on the figure.

    Returns
    -------
    Figure
    """
    panels = ([3] + ([1.6] if activity is not None else []) + ([0.7] if band is not None else [])
              + ([1] if residuals is not None else []))  # fmt: skip
    fig, axes = _figure(fig, len(panels), height_ratios=panels if len(panels) > 1 else None,
                        figsize=(9, 5.8 + 1.6 * (activity is not None)))  # fmt: skip
    t0 = _time_offset(data.time)
    ax = axes[0]
    if band is not None:
        ax.fill_between(curve_t - t0, band[0], band[1], color=BAND_COLOUR, alpha=BAND_ALPHA,
                        lw=0.6, edgecolor=BAND_COLOUR, label="68% of the posterior")  # fmt: skip
    ax.plot(curve_t - t0, curve, color=MODEL_COLOUR, lw=0.9,
            label="model" if activity is None else "companions' model")  # fmt: skip
    styles = _points(ax, axes[1] if activity is not None else None, data, offsets, activity, t0)
    ax.set_ylabel(VELOCITY_LABEL)
    ax.legend(ncol=5, loc="lower left", bbox_to_anchor=(0.0, 1.0), borderaxespad=0.2)
    what = "instrument offsets" + (f" and {removed}" if removed else "")
    ax.text(0.995, 0.02, f"{what} removed", transform=ax.transAxes, ha="right", va="bottom",
            fontsize=8, color="#5a6268")  # fmt: skip
    xlabel = f"time - {t0:.0f} [d]" if t0 else "time [d]"
    if activity is not None:
        _activity_panel(axes[1], activity, t0)
    if band is not None:
        _spread_panel(axes[1 + (activity is not None)], curve_t - t0, band)
    if residuals is not None:
        _left_over(axes[-1], data.time - t0, residuals, data, styles,
                   (curve_t[0] - t0, curve_t[-1] - t0))  # fmt: skip
    axes[-1].set_xlabel(xlabel)
    return fig


def _points(ax, activity_ax, data, offsets, activity, t0: float) -> list:
    """Each instrument's velocities less its offset (and, on ``activity_ax``, less the
    companions too); returns each instrument's (mask, style) for the residual panel."""
    styles = []
    for k, name in enumerate(data.instruments):
        m = data.instrument == name
        off = offsets.get(name, 0.0) if offsets else 0.0
        st = instrument_style(k)
        styles.append((m, st))
        ax.errorbar(data.time[m] - t0, data.rv[m] - off, data.err[m], ls="none", ms=4,
                    mec="white", mew=0.4, elinewidth=0.8, label=name, **st)  # fmt: skip
        if activity_ax is not None:
            activity_ax.errorbar(data.time[m] - t0, activity["data"][m], data.err[m],
                                 ls="none", ms=4, mec="white", mew=0.4, elinewidth=0.8,
                                 **st)  # fmt: skip
    return styles


def _activity_panel(ax, activity: dict, t0: float) -> None:
    """The correlated signal apart from the companions: its mean and +-1 sigma band."""
    lo, hi = activity["band"]
    ax.fill_between(activity["time"] - t0, lo, hi, color=ACTIVITY_COLOUR, alpha=0.25, lw=0)
    ax.plot(activity["time"] - t0, activity["mean"], color=ACTIVITY_COLOUR, lw=0.9,
            label="activity (Gaussian process) given the data, +-1 sigma")  # fmt: skip
    ax.set_ylabel("minus companions [m/s]")
    ax.legend(fontsize=8, loc="upper left")


def _spread_panel(ax, x: np.ndarray, band) -> None:
    """The posterior band's width over time: where the orbit is least pinned down."""
    ax.fill_between(x, 0, band[1] - band[0], color=BAND_COLOUR, alpha=BAND_ALPHA, lw=0.8,
                    edgecolor=BAND_COLOUR)  # fmt: skip
    ax.set_ylabel("model spread\n68% [m/s]", fontsize=8)
    ax.set_ylim(bottom=0)


@_styled
def plot_phase(data, phase, velocity, curve_phase, curve, label, period, band=None,
               n_bins: int = 12, fig=None, ax=None, colour: str | None = None):  # fmt: skip
    """One companion's phase-folded curve, the other signals and offsets removed, and
    (on a figure of its own) the residuals (O-C) below it.

    ``phase`` (in [0, 1), 0 at conjunction) and ``velocity`` are the points;
    ``curve_phase``/``curve`` the model; binned weighted means are drawn over the
    points as bars with their error strokes, in the companion's ``colour``. Given
    ``ax``, draws the upper panel alone into it.

    Parameters
    ----------
    data : RVData
        The velocities (instruments' markers).
    phase, velocity : ndarray
        The points.
    curve_phase, curve : ndarray
        The model over one period.
    label : str
        The companion.
    period : float
        Its period (days), for the axis label.
    band : (ndarray, ndarray), optional
        The 68% band of the model.
    n_bins : int, optional
        Bins of the binned means.
    fig, ax : optional
        Drawn into instead of a new figure.
    colour : str, optional
        The companion's colour.

    Returns
    -------
    matplotlib.figure.Figure
        The figure.
    """
    colour = colour or companion_colour(0)
    if ax is None:
        fig, axes = _figure(fig, 2, height_ratios=[3, 1], figsize=(6, 4.8))
        ax, rax = axes
    else:
        fig, rax = ax.figure, None
    if band is not None:
        ax.fill_between(curve_phase, band[0], band[1], color=colour, alpha=BAND_ALPHA, lw=0)
    ax.plot(curve_phase, curve, color=colour, lw=1.4)
    styles = []
    for k, name in enumerate(data.instruments):
        m = data.instrument == name
        st = instrument_style(k)
        styles.append((m, st))
        ax.errorbar(phase[m], velocity[m], data.err[m], ls="none", ms=3.5, alpha=0.6,
                    mec="white", mew=0.3, elinewidth=0.6, label=name, **st)  # fmt: skip
    edges = np.linspace(0, 1, n_bins + 1)
    w = 1.0 / data.err**2
    centres, means, errs = [], [], []
    for lo, hi in zip(edges[:-1], edges[1:], strict=True):
        m = (phase >= lo) & (phase < hi)
        if m.sum() >= 2:
            centres.append(0.5 * (lo + hi))
            means.append(np.sum(w[m] * velocity[m]) / np.sum(w[m]))
            errs.append(np.std(velocity[m]) / math.sqrt(m.sum()))
    ax.errorbar(centres, means, errs, fmt="_", color=colour, ms=16, mew=2.6, elinewidth=1.6,
                capsize=0, zorder=5, label=f"binned, {1 / n_bins:.2g} in phase")  # fmt: skip
    ax.set_xlim(0, 1)
    ax.set_ylabel(VELOCITY_LABEL)
    ax.set_title(f"{label}: P = {period:.5g} d")
    ax.legend(fontsize=7, ncol=2)
    if rax is not None:
        model_here = np.interp(phase, curve_phase, curve)
        _left_over(rax, phase, velocity - model_here, data, styles, (0.0, 1.0))
        rax.set_xlim(0, 1)
        rax.set_xlabel("orbital phase (0 = conjunction)")
    else:
        ax.set_xlabel("orbital phase (0 = conjunction)")
    return fig


@_styled
def plot_corner(samples: dict, names: list[str], labels: list[str], truths=None, fig=None,
                colour: str | None = None):  # fmt: skip
    """Corner plot (corner) of the named posterior columns; ``labels`` may be math text.

    Each diagonal panel's title gives the median and the 68% interval as math text
    (superscript and subscript errors), with room kept above the top panel for it.
    Columns that do not vary (fixed parameters, and quantities derived from them
    alone) have no distribution to draw: they are left out of the panels and listed
    with their value in the figure's title line instead. With fewer than one varying
    column the figure holds only that line.

    Parameters
    ----------
    samples : dict
        Posterior samples by name.
    names : list of str
        The columns drawn.
    labels : list of str
        Their axis labels.
    truths : sequence of float, optional
        Values marked on the panels.
    fig : matplotlib Figure, optional
        Drawn into instead of a new one.
    colour : str, optional
        The histograms' colour.

    Returns
    -------
    matplotlib.figure.Figure
        The figure.
    """
    import logging

    import corner
    import matplotlib.pyplot as plt

    from rvkep.formatting import format_uncertain

    columns = {n: np.asarray(samples[n], float) for n in names}
    constant = [(n, lab) for n, lab in zip(names, labels, strict=True) if np.ptp(columns[n]) == 0]
    keep = [(n, lab) for n, lab in zip(names, labels, strict=True) if np.ptp(columns[n]) > 0]
    fixed_text = ", ".join(f"{lab} = {columns[n][0]:.6g} (fixed)" for n, lab in constant)
    if not keep:
        fig = fig or plt.figure(figsize=(4.0, 1.2))
        fig.text(0.5, 0.5, fixed_text or "nothing to draw", ha="center", va="center", fontsize=9)
        return fig
    x = np.column_stack([columns[n] for n, _ in keep])
    if truths is not None:
        truths = [t for t, n in zip(truths, names, strict=True) if np.ptp(columns[n]) > 0]
    corner_log = logging.getLogger()  # corner warns about sparse contours on the root logger
    level = corner_log.level
    corner_log.setLevel(logging.ERROR)
    try:
        with plt.rc_context({"axes.grid": False}):  # a grid would cross the contours
            fig = corner.corner(
                x, labels=[lab for _, lab in keep], truths=truths, fig=fig,
                quantiles=[0.16, 0.5, 0.84], label_kwargs={"fontsize": 10},
                color=colour or companion_colour(0),
            )  # fmt: skip
    finally:
        corner_log.setLevel(level)
    axes = np.array(fig.axes).reshape(len(keep), len(keep))
    for i, (_, label) in enumerate(keep):  # titles rounded to the uncertainty, math text
        lo, med, hi = np.percentile(x[:, i], [15.87, 50.0, 84.13])
        v, m, p = format_uncertain(med, med - lo, hi - med)
        value = rf"${v} \pm {m}$" if m == p else rf"${v}^{{+{p}}}_{{-{m}}}$"
        name = label.split(" [")[0]
        axes[i, i].set_title(f"{name} = {value}", fontsize=8.5, loc="center")
    fig.subplots_adjust(top=1.0 - 0.6 / fig.get_figheight(), right=0.97)
    if fixed_text:
        fig.text(0.99, 0.995, fixed_text, ha="right", va="top", fontsize=8)
    return fig


# -- figures of a Results -----------------------------------------------------------
# Each takes a Results (and, like the functions above, an optional figure or axes to
# draw into) and returns the figure; the curves come from rvkep.curves.


def _removed(results) -> str:
    """What the time series takes out of the velocities besides the offsets."""
    p, parts = results.fit.params, []
    if "trend.slope" in p:
        parts.append(f"trend ({p['trend.slope']:+.3g} m/s/yr"
                     + (f", {p['trend.curvature']:+.3g} m/s/yr^2" if "trend.curvature" in p else "")
                     + ")")  # fmt: skip
    if getattr(results, "decorrelation_terms", None):
        parts.append("activity-indicator terms")
    return " and ".join(parts)


def timeseries_figure(results, fig=None):
    """The time series of a :class:`rvkep.results.Results`: data, model, 68% band, the
    band's width and the residuals (O-C) (:func:`rvkep.curves.timeseries_curves`,
    :func:`plot_timeseries`); a fitted trend is removed from the points and said.

    Parameters
    ----------
    results : Results
        A finished run.
    fig : matplotlib Figure, optional
        Drawn into instead of a new one.

    Returns
    -------
    matplotlib.figure.Figure
        The figure.
    """
    from rvkep.curves import timeseries_curves

    ts = timeseries_curves(results)
    return plot_timeseries(ts["data"], ts["time"], ts["curve"], ts["band"], ts["residuals"],
                           ts["offsets"], fig=fig, activity=ts["activity"],
                           removed=_removed(results))  # fmt: skip


def phase_figure(results, label: str, fig=None, ax=None):
    """One companion's phase-folded curve from a Results (:func:`plot_phase`), in the
    companion's own colour.

    Parameters
    ----------
    results : Results
        A finished run.
    label : str
        The companion.
    fig, ax : optional
        Drawn into instead of a new figure.

    Returns
    -------
    matplotlib.figure.Figure
        The figure.
    """
    from rvkep.curves import phase_curves

    ph = phase_curves(results, label)
    colour = companion_colour(results.labels.index(label))
    return plot_phase(results.data, ph["phase"], ph["velocity"], ph["grid"], ph["curve"],
                      f"companion {label}", ph["period"], ph["band"], fig=fig, ax=ax,
                      colour=colour)  # fmt: skip


#: The columns of a companion's corner plot and their axis labels (math text).
CORNER_COLUMNS = [("period", r"$P$ [d]"), ("K", r"$K$ [m s$^{-1}$]"), ("ecc", r"$e$"),
                  ("omega_deg", r"$\omega$ [deg]"),
                  ("msini_mjup", r"$m\,\sin i$ [$M_\mathrm{J}$]")]  # fmt: skip


def corner_figure(results, label: str, fig=None):
    """One companion's posterior (P, K, e, omega, m sin i) from a Results, in the
    companion's own colour.

    Parameters
    ----------
    results : Results
        A finished run.
    label : str
        The companion.
    fig : matplotlib Figure, optional
        Drawn into instead of a new one.

    Returns
    -------
    matplotlib.figure.Figure
        The figure.
    """
    post = results.posterior
    chosen = [(f"{label}.{c}", text) for c, text in CORNER_COLUMNS if f"{label}.{c}" in post]
    colour = companion_colour(results.labels.index(label))
    fig = plot_corner(post.columns, [n for n, _ in chosen], [t for _, t in chosen], fig=fig,
                      colour=colour)  # fmt: skip
    fig.suptitle(f"companion {label}", fontsize=11, x=0.02, ha="left", color=colour,
                 fontweight="bold")  # fmt: skip
    return fig
