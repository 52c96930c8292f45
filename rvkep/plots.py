"""Figures. Each function returns a matplotlib Figure and can draw into a given one.

Colours are the Okabe & Ito (2008) colour-blind-safe palette; each instrument keeps its
colour and marker in every figure (by its order in the data). Axes carry units.
matplotlib is imported inside the functions so the rest of rvkep starts fast.
"""

from __future__ import annotations

import math

import numpy as np

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
    "plan_figure",
    "plot_limits",
]

#: Okabe & Ito (2008), "Color Universal Design": blue, vermillion, bluish green,
#: reddish purple, orange, sky blue, yellow, black.
INSTRUMENT_COLOURS = (
    "#0072B2", "#D55E00", "#009E73", "#CC79A7", "#E69F00", "#56B4E9", "#F0E442", "#000000",
)  # fmt: skip
INSTRUMENT_MARKERS = ("o", "s", "^", "D", "v", "P", "X", "h")
MODEL_COLOUR = "#222222"
BAND_COLOUR = "#999999"
ACTIVITY_COLOUR = "#E69F00"  # Okabe & Ito orange: the stellar-activity signal


def instrument_style(index: int) -> dict:
    """Colour and marker of the instrument with this index (stable across figures)."""
    return {
        "color": INSTRUMENT_COLOURS[index % len(INSTRUMENT_COLOURS)],
        "marker": INSTRUMENT_MARKERS[index % len(INSTRUMENT_MARKERS)],
    }


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


def plot_periodograms(result, fig=None, activity: bool = True):
    """Periodogram of the data, of the residuals after each signal, and the window.

    Parameters
    ----------
    result : rvkep.search.SearchResult
    fig : matplotlib Figure, optional
        Drawn into (cleared first) instead of a new one.
    activity : bool
        Add one panel per activity indicator.
    """
    pgs = list(result.periodograms)
    extra = list(result.activity.values()) if activity else []
    n = len(pgs) + len(extra) + 1
    fig, axes = _figure(fig, n, figsize=(8, 1.7 * n + 0.6))
    found = [c for c in result.candidates if c.significant]
    for k, (ax, pg) in enumerate(zip(axes, pgs + extra, strict=False)):
        ax.plot(pg.period, pg.power, lw=0.7, color=MODEL_COLOUR)
        for (fap, level), ls in zip(pg.fap_levels.items(), (":", "--", "-."), strict=False):
            ax.axhline(level, color=INSTRUMENT_COLOURS[1], lw=0.8, ls=ls, label=f"FAP {fap:g}")
        if k < len(pgs) and k < len(result.candidates):
            c = result.candidates[k]
            ax.plot([c.period], [c.power], "v", color=INSTRUMENT_COLOURS[0], ms=6)
            tag = f"{c.period:.4g} d, FAP {c.fap:.1e}"
            ax.annotate(tag, (c.period, c.power), xytext=(4, -2), textcoords="offset points",
                        fontsize=8, va="top")  # fmt: skip
        ax.text(0.01, 0.95, pg.label, transform=ax.transAxes, va="top", fontsize=9)
        ax.set_ylabel("power")
        ax.set_ylim(0, max(1.05 * float(pg.power.max()), 1.1 * max(pg.fap_levels.values())))
        for c in found:
            ax.axvline(c.period, color=INSTRUMENT_COLOURS[2], lw=0.6, alpha=0.6)
    axes[0].legend(loc="upper right", fontsize=7, frameon=False)
    ax = axes[-1]
    ax.plot(1.0 / result.frequency, result.window, lw=0.7, color=INSTRUMENT_COLOURS[4])
    ax.text(0.01, 0.95, "spectral window", transform=ax.transAxes, va="top", fontsize=9)
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


def plot_timeseries(data, curve_t, curve, band=None, residuals=None, offsets=None, fig=None,
                    activity=None):  # fmt: skip
    """Velocities per instrument with the model and its posterior band; residuals below.

    Parameters
    ----------
    data : RVData
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
    """
    panels = [3] + ([1.6] if activity is not None else []) + ([1] if residuals is not None else [])
    fig, axes = _figure(fig, len(panels), height_ratios=panels if len(panels) > 1 else None,
                        figsize=(9, 5.5 + 1.6 * (activity is not None)))  # fmt: skip
    t0 = _time_offset(data.time)
    ax = axes[0]
    if band is not None:
        ax.fill_between(curve_t - t0, band[0], band[1], color=BAND_COLOUR, alpha=0.4, lw=0,
                        label="68% posterior band")  # fmt: skip
    ax.plot(curve_t - t0, curve, color=MODEL_COLOUR, lw=0.8,
            label="model" if activity is None else "companions' model")  # fmt: skip
    for k, name in enumerate(data.instruments):
        m = data.instrument == name
        off = offsets.get(name, 0.0) if offsets else 0.0
        st = instrument_style(k)
        ax.errorbar(data.time[m] - t0, data.rv[m] - off, data.err[m], ls="none", ms=4,
                    mec="white", mew=0.4, elinewidth=0.8, label=name, **st)  # fmt: skip
        if activity is not None:
            axes[1].errorbar(data.time[m] - t0, activity["data"][m], data.err[m], ls="none",
                             ms=4, mec="white", mew=0.4, elinewidth=0.8, **st)  # fmt: skip
        if residuals is not None:
            axes[-1].errorbar(data.time[m] - t0, residuals[m], data.err[m], ls="none", ms=4,
                              mec="white", mew=0.4, elinewidth=0.8, **st)  # fmt: skip
    ax.set_ylabel("radial velocity [m/s]")
    ax.legend(fontsize=8, frameon=False, ncol=4, loc="upper left")
    xlabel = f"time - {t0:.0f} [d]" if t0 else "time [d]"
    if activity is not None:
        a_ax = axes[1]
        lo, hi = activity["band"]
        a_ax.fill_between(activity["time"] - t0, lo, hi, color=ACTIVITY_COLOUR, alpha=0.25, lw=0)
        a_ax.plot(activity["time"] - t0, activity["mean"], color=ACTIVITY_COLOUR, lw=0.9,
                  label="activity (Gaussian process) given the data, +-1 sigma")  # fmt: skip
        a_ax.set_ylabel("minus companions [m/s]")
        a_ax.legend(fontsize=8, frameon=False, loc="upper left")
    if residuals is not None:
        axes[-1].axhline(0, color=MODEL_COLOUR, lw=0.8)
        axes[-1].set_ylabel("O - C [m/s]")
    axes[-1].set_xlabel(xlabel)
    return fig


def plot_phase(data, phase, velocity, curve_phase, curve, label, period, band=None,
               n_bins: int = 12, fig=None, ax=None):  # fmt: skip
    """One companion's phase-folded curve, the other signals and offsets removed.

    ``phase`` (in [0, 1), 0 at conjunction) and ``velocity`` are the points;
    ``curve_phase``/``curve`` the model; binned weighted means are drawn over the
    points.
    """
    import matplotlib.pyplot as plt

    if ax is None:
        if fig is None:
            fig = plt.figure(figsize=(6, 4), layout="constrained")
        ax = fig.add_subplot(1, 1, 1)
    else:
        fig = ax.figure
    if band is not None:
        ax.fill_between(curve_phase, band[0], band[1], color=BAND_COLOUR, alpha=0.4, lw=0)
    ax.plot(curve_phase, curve, color=MODEL_COLOUR, lw=1.0)
    for k, name in enumerate(data.instruments):
        m = data.instrument == name
        st = instrument_style(k)
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
    ax.errorbar(centres, means, errs, fmt="o", color="black", mfc="white", ms=6, zorder=5,
                label="binned")  # fmt: skip
    ax.set_xlim(0, 1)
    ax.set_xlabel("phase from conjunction")
    ax.set_ylabel("radial velocity [m/s]")
    ax.set_title(f"{label}: P = {period:.5g} d", fontsize=10)
    ax.legend(fontsize=7, frameon=False)
    return fig


def plot_corner(samples: dict, names: list[str], labels: list[str], truths=None, fig=None):
    """Corner plot (corner) of the named posterior columns.

    Columns that do not vary (fixed parameters, and quantities derived from them
    alone) have no distribution to draw: they are left out of the panels and listed
    with their value in the figure's title line instead. With fewer than one varying
    column the figure holds only that line.
    """
    import logging

    import corner
    import matplotlib.pyplot as plt

    from rvkep.formatting import text_value

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
        fig = corner.corner(
            x, labels=[lab for _, lab in keep], truths=truths, fig=fig,
            quantiles=[0.16, 0.5, 0.84], label_kwargs={"fontsize": 9},
            color=INSTRUMENT_COLOURS[0],
        )  # fmt: skip
    finally:
        corner_log.setLevel(level)
    axes = np.array(fig.axes).reshape(len(keep), len(keep))
    for i, (_, label) in enumerate(keep):  # titles rounded to the uncertainty
        lo, med, hi = np.percentile(x[:, i], [15.87, 50.0, 84.13])
        axes[i, i].set_title(f"{label} = {text_value(med, med - lo, hi - med)}", fontsize=8)
    if fixed_text:
        fig.text(0.99, 0.99, fixed_text, ha="right", va="top", fontsize=8)
    return fig


# -- figures of a Results -----------------------------------------------------------
# Each takes a Results (and, like the functions above, an optional figure or axes to
# draw into) and returns the figure; the curves come from rvkep.curves.


def timeseries_figure(results, fig=None):
    """The time series of a :class:`rvkep.results.Results`: data, model, 68% band and
    residuals (:func:`rvkep.curves.timeseries_curves`, :func:`plot_timeseries`)."""
    from rvkep.curves import timeseries_curves

    ts = timeseries_curves(results)
    return plot_timeseries(ts["data"], ts["time"], ts["curve"], ts["band"], ts["residuals"],
                           ts["offsets"], fig=fig, activity=ts["activity"])  # fmt: skip


def phase_figure(results, label: str, fig=None, ax=None):
    """One companion's phase-folded curve from a Results (:func:`plot_phase`)."""
    from rvkep.curves import phase_curves

    ph = phase_curves(results, label)
    return plot_phase(results.data, ph["phase"], ph["velocity"], ph["grid"], ph["curve"],
                      f"companion {label}", ph["period"], ph["band"], fig=fig, ax=ax)  # fmt: skip


#: The columns of a companion's corner plot and their axis labels.
CORNER_COLUMNS = [("period", "P [d]"), ("K", "K [m/s]"), ("ecc", "e"),
                  ("omega_deg", "omega [deg]"), ("msini_mjup", "m sin i [M_Jup]")]  # fmt: skip


def corner_figure(results, label: str, fig=None):
    """One companion's posterior (P, K, e, omega, m sin i) from a Results."""
    post = results.posterior
    chosen = [(f"{label}.{c}", text) for c, text in CORNER_COLUMNS if f"{label}.{c}" in post]
    fig = plot_corner(post.columns, [n for n, _ in chosen], [t for _, t in chosen], fig=fig)
    fig.suptitle(f"companion {label}", fontsize=11)
    return fig


def plan_figure(plan, fig=None):
    """An observing plan (:class:`rvkep.plan.Plan`): above, the score of every
    observable time before any epoch is chosen, night by night, with the chosen epochs
    marked; below, the posterior's spread of the velocity the instrument would see
    (its standard deviation), which the chosen epochs sample."""
    fig, axes = _figure(fig, 2, height_ratios=[3, 2], figsize=(8, 5.5))
    g, c = plan.grid, plan.choice
    x = g.utc_jd - math.floor(g.utc_jd[0] + 0.5) + 0.5  # days since the start date, 0h UTC
    first = c.first_scores
    ok = np.isfinite(first)
    for k in np.unique(g.night[ok]):  # one line per night: no line across the day
        on = ok & (g.night == k)
        axes[0].plot(x[on], first[on], color=MODEL_COLOUR, lw=1.0)
        axes[1].plot(x[on], plan.velocity_sd[on], color=MODEL_COLOUR, lw=1.0)
    chosen = c.order
    axes[0].plot(x[chosen], first[chosen], ls="none", marker="v", ms=7,
                 color=INSTRUMENT_COLOURS[1], label="chosen epochs")  # fmt: skip
    axes[1].plot(x[chosen], plan.velocity_sd[chosen], ls="none", marker="v", ms=7,
                 color=INSTRUMENT_COLOURS[1])  # fmt: skip
    what = "information gain [nats]" if plan.aim == "all" else f"share of Var({plan.aim}) removed"
    axes[0].set_ylabel(what)
    axes[0].set_ylim(bottom=0)
    axes[0].legend(loc="upper right", fontsize=8, frameon=False)
    axes[1].set_ylabel("spread of v [m/s]")
    axes[1].set_ylim(bottom=0)
    axes[1].set_xlabel(f"days since {g.night_dates[0]} 0h UTC (observable times only)")
    axes[0].set_title(f"one more velocity from {plan.instrument} (noise {plan.noise_sd:.2g} m/s)",
                      fontsize=10)  # fmt: skip
    return fig


def plot_limits(limits, companions=(), fig=None):
    """A completeness map (:class:`rvkep.limits.Limits`): the share of injected
    companions recovered in each period and M sin i cell, the 50% and 95% curves, and
    the run's companions as (period, M sin i, label)."""
    from matplotlib.colors import ListedColormap

    fig, axes = _figure(fig, 1, figsize=(7.5, 5.0))
    ax = axes[0]
    s = limits.setup
    shades = ListedColormap(np.linspace([1.0, 1.0, 1.0], [0.0, 0.447, 0.698], 11))
    mesh = ax.pcolormesh(s.period_edges, s.mass_edges, limits.completeness.T, cmap=shades,
                         vmin=0, vmax=1, shading="flat")  # fmt: skip
    fig.colorbar(mesh, ax=ax, label="share recovered")
    curves = limits.curves()
    P = np.array([c["period_d"] for c in curves])
    for key, style, text in (("msini50_mearth", "--", "50%"), ("msini95_mearth", "-", "95%")):
        m = np.array([np.nan if c[key] is None else c[key] for c in curves], float)
        ax.plot(P, m, color=MODEL_COLOUR, ls=style, lw=1.4, label=f"{text} recovered")
    for period, mass, label in companions:
        ax.plot([period], [mass], marker="*", ms=13, color=INSTRUMENT_COLOURS[1],
                markeredgecolor="black", ls="none")  # fmt: skip
        ax.annotate(label, (period, mass), xytext=(6, 4), textcoords="offset points")
    ax.set_xscale("log")
    ax.set_yscale("log")
    ax.set_xlim(s.period_edges[0], s.period_edges[-1])
    shown = [m for p, m, _ in companions if s.period_edges[0] <= p <= s.period_edges[-1]]
    masses = [s.mass_edges[0], s.mass_edges[-1], *shown]
    ax.set_ylim(min(masses) / 1.3 if len(masses) > 2 else s.mass_edges[0],
                max(masses) * 1.3 if len(masses) > 2 else s.mass_edges[-1])  # fmt: skip
    ax.set_xlabel("period [d]")
    ax.set_ylabel("M sin i [Earth masses]")
    ax.legend(loc="upper left", fontsize=8, frameon=False)
    return fig
