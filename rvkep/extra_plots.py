"""The figures beyond the fit, in rvkep's look (:mod:`rvkep.plots`): an observing
plan, a completeness map, the companions a trend allows and the stacked
periodograms. Each function returns a
matplotlib Figure and can draw into a given one.
"""

from __future__ import annotations

import math

import numpy as np

from rvkep.plots import INSTRUMENT_COLOURS, MODEL_COLOUR, _figure, _styled

__all__ = ["plan_figure", "trend_companion_figure", "plot_limits", "stacked_figure"]


@_styled
def plan_figure(plan, fig=None):
    """An observing plan (:class:`rvkep.plan.Plan`): above, the score of every
    observable time before any epoch is chosen, night by night, with the chosen epochs
    marked; below, the posterior's spread of the velocity the instrument would see
    (its standard deviation), which the chosen epochs sample.

    Parameters
    ----------
    plan : Plan
        The observing plan.
    fig : matplotlib Figure, optional
        Drawn into instead of a new one.

    Returns
    -------
    matplotlib.figure.Figure
        The figure.
    """
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


@_styled
def trend_companion_figure(results, fig=None):
    """The least mass of a companion that could cause the run's trend, against its
    separation (:meth:`rvkep.results.Results.trend_companion`): the median over the
    posterior of the slope and its 1st percentile, with the brown-dwarf and stellar
    limits (13 and 80 Jupiter masses) drawn for scale.

    Parameters
    ----------
    results : Results
        A finished run with a trend.
    fig : matplotlib Figure, optional
        Drawn into instead of a new one.

    Returns
    -------
    matplotlib.figure.Figure
        The figure.
    """
    rows = results.trend_companion()
    fig, axes = _figure(fig, 1, figsize=(6.5, 4.2))
    ax = axes[0]
    a = np.array([r["a_au"] for r in rows])
    ax.plot(a, [r["min_mass_mjup"] for r in rows], color=MODEL_COLOUR, lw=1.6,
            label="least mass (median slope)")  # fmt: skip
    ax.plot(a, [r["min_mass_mjup_p1"] for r in rows], color=MODEL_COLOUR, lw=1.0, ls="--",
            label="1st percentile of the slope")  # fmt: skip
    for m, text in ((13.0, "13 M_Jup"), (80.0, "80 M_Jup")):
        ax.axhline(m, color="0.6", lw=0.8, ls=":")
        ax.annotate(text, (a[0], m), xytext=(2, 2), textcoords="offset points", fontsize=7,
                    color="0.4")  # fmt: skip
    ax.set_xscale("log")
    ax.set_yscale("log")
    ax.set_xlabel("separation [au]")
    ax.set_ylabel("least companion mass [Jupiter masses]")
    ax.set_title("what the trend implies (Torres 1999)", fontsize=10)
    ax.legend(loc="lower right", fontsize=8, frameon=False)
    return fig


@_styled
def plot_limits(limits, companions=(), fig=None):
    """A completeness map (:class:`rvkep.limits.Limits`): the share of injected
    companions recovered in each period and M sin i cell, the 50% and 95% curves, and
    the run's companions as (period, M sin i, label).

    Parameters
    ----------
    limits : Limits
        The completeness grid.
    companions : iterable of (float, float, str), optional
        The run's companions.
    fig : matplotlib Figure, optional
        Drawn into instead of a new one.

    Returns
    -------
    matplotlib.figure.Figure
        The figure.
    """
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


@_styled
def stacked_figure(results, fig=None):
    """Each companion's stacked periodogram (:func:`rvkep.choice.stacked_power`, in
    results.json's ``planets[*].support.stacked_power``): the Lomb-Scargle power at its
    period of the first N observations against N, in the companion's colour. A
    coherent orbit's curve rises or holds; one that falls is a signal that faded.

    Parameters
    ----------
    results : Results
        A finished run with companions.
    fig : matplotlib Figure, optional
        Drawn into instead of a new one.

    Returns
    -------
    matplotlib.figure.Figure
        The figure.
    """
    from rvkep.style import companion_colour

    fig, axes = _figure(fig, 1, figsize=(6.5, 4.0))
    ax = axes[0]
    for k, p in enumerate(results.to_dict()["planets"]):
        rows = p.get("support", {}).get("stacked_power", [])
        if not rows:
            continue
        n = [r["n"] for r in rows]
        ax.plot(n, [r["power"] for r in rows], marker="o", ms=3.5, lw=1.4,
                color=companion_colour(k),
                label=f"{p['label']} ({p['period_d']['median']:.4g} d)")  # fmt: skip
    ax.set_xscale("log")
    ax.set_ylim(0, 1)
    ax.set_xlabel("number of observations (in time order)")
    ax.set_ylabel("power at the period")
    ax.set_title("each signal's power as the observations accumulate", fontsize=10)
    ax.legend(loc="lower right", fontsize=8, frameon=False)
    return fig
