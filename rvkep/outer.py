"""What signals longer than the data imply: open orbits, jitters that may hide a
signal, and the companion a trend asks for.

* *Open orbits* (:func:`open_orbits`): a companion whose posterior period reaches past
  the data's span (its 84th percentile above the span) has not been seen over a whole
  orbit; its medians are then less telling than one-sided limits, so the 1st
  percentiles of P, K, m sin i and a are given as lower limits ("not closed").
* *Jitter that may hide a signal* (:func:`jitter_notes`): an instrument's jitter whose
  median is above :data:`JITTER_RATIO` x its median error, or whose posterior piles at
  its prior's upper end, absorbs structure the model does not describe (on an invented
  brown dwarf cut at the span the misfit went into a 347 m/s jitter).
* *What a trend implies* (:func:`trend_companion`): a trend dv/dt caused by an unseen
  companion at separation a needs a mass M >= a^2 |dv/dt| / G for the most favourable
  geometry (Torres 1999, PASP 111, 169: M = 5.34e-6 M_sun (a / au)^2 |dv/dt / (m/s/yr)|
  at least), tabulated over separations from where its period would equal the span.
"""

from __future__ import annotations

import numpy as np

__all__ = ["open_orbits", "jitter_notes", "trend_companion", "JITTER_RATIO",
           "TORRES_COEFFICIENT"]  # fmt: skip

#: a jitter above this many median errors gets a note
JITTER_RATIO = 5.0
#: the mass (solar masses) that a^2 |dv/dt| / G gives for a = 1 au and dv/dt = 1 m/s
#: per year (CODATA G, IAU 2015 nominal solar mass, IAU 2012 au, the Julian year;
#: Torres 1999 quotes 5.34e-6)
_G, _M_SUN, _AU, _YEAR = 6.67430e-11, 1.988409870698051e30, 1.495978707e11, 365.25 * 86400.0
TORRES_COEFFICIENT = _AU**2 * (1.0 / _YEAR) / _G / _M_SUN
#: IAU 2015 nominal Jupiter mass in solar masses (GM ratio)
_M_JUP_SUN = 1.26686534e17 / 1.3271244e20


def open_orbits(columns: dict, labels: list[str], span: float) -> dict[str, dict]:
    """For each companion whose orbit is not closed, its lower limits.

    Parameters
    ----------
    columns : dict
        Posterior samples by name (``<label>.period``, ``.K``, ``.msini_mjup``,
        ``.a_au``).
    labels : list of str
    span : float
        The data's time span (days).

    Returns
    -------
    dict
        label -> {"p84_period_d", "lower_limits": {period_d, K_mps, msini_mjup, a_au}
        (1st percentiles)}; companions with closed orbits are absent.
    """
    out = {}
    for L in labels:
        P = np.asarray(columns.get(f"{L}.period", ()), float)
        if P.size == 0 or not np.percentile(P, 84.135) > span:
            continue
        limits = {}
        for key, col in (("period_d", "period"), ("K_mps", "K"), ("msini_mjup", "msini_mjup"),
                         ("a_au", "a_au")):  # fmt: skip
            x = np.asarray(columns.get(f"{L}.{col}", ()), float)
            if x.size:
                limits[key] = float(np.percentile(x, 1.0))
        out[L] = {"p84_period_d": float(np.percentile(P, 84.135)), "lower_limits": limits}
    return out


def open_orbit_note(label: str, entry: dict, span: float) -> str:
    """The note for one open orbit."""
    lim = entry["lower_limits"]
    parts = [f"P > {lim['period_d']:.4g} d"]
    if "K_mps" in lim:
        parts.append(f"K > {lim['K_mps']:.3g} m/s")
    if "msini_mjup" in lim:
        parts.append(f"m sin i > {lim['msini_mjup']:.3g} M_Jup")
    if "a_au" in lim:
        parts.append(f"a > {lim['a_au']:.3g} au")
    return (f"{label}: the orbit is not closed (the period's 84th percentile, "
            f"{entry['p84_period_d']:.4g} d, is beyond the data's {span:.4g} d); read the "
            f"medians with care; lower limits (1st percentiles): {', '.join(parts)}")


def jitter_notes(model, columns: dict) -> list[str]:
    """Notes on instruments whose jitter may be hiding a signal (see the module text).

    Parameters
    ----------
    model : SystemModel
        The sampled model.
    columns : dict
        Physical posterior samples by name.

    Returns
    -------
    list of str
        The notes (empty when no jitter is suspect).
    """
    notes = []
    for inst in model.instruments:
        x = np.asarray(columns.get(f"jitter.{inst.name}", ()), float)
        if inst.jitter.is_fixed or x.size < 20 or not np.all(np.isfinite(x)):
            continue
        err = float(np.median(model.data.err[model.data.instrument == inst.name]))
        med = float(np.median(x))
        hi = inst.jitter.bounds[1]
        piled = np.isfinite(hi) and np.mean(x >= 0.95 * hi) > 0.3
        if med > JITTER_RATIO * err or piled:
            why = (f"piles up at its prior's upper end ({hi:.3g} m/s)" if piled else
                   f"is {med / err:.1f} times the instrument's median error ({err:.3g} m/s)")
            notes.append(f"jitter of {inst.name}: {med:.3g} m/s {why}; it may be absorbing a "
                         "signal the model lacks (an orbit longer than the data, a trend, "
                         "stellar activity): compare --trend, --max-period or --noise")  # fmt: skip
    return notes


def trend_companion(columns: dict, span: float, star_mass: float,
                    n_separations: int = 8) -> list[dict]:  # fmt: skip
    """The least mass of a companion that could cause the trend, by separation.

    Parameters
    ----------
    columns : dict
        Posterior samples with ``trend.slope`` (m/s per year, at the epoch).
    span : float
        The data's time span (days): the separations start where a circular orbit
        around ``star_mass`` would have a period of one span (a shorter one would show
        as an orbit, not a trend).
    star_mass : float
        Solar masses.

    Returns
    -------
    list of dict
        Per separation ``a_au``: the least mass ``min_mass_mjup`` (median over the
        posterior of |slope|) and ``min_mass_mjup_p1`` (1st percentile), Jupiter masses.
    """
    slope = np.abs(np.asarray(columns.get("trend.slope", ()), float))
    if slope.size == 0:
        return []
    a0 = (star_mass * (span / 365.25) ** 2) ** (1.0 / 3.0)  # Kepler's third law, au
    rows = []
    for a in np.geomspace(a0, max(50.0, 10.0 * a0), n_separations):
        m = TORRES_COEFFICIENT * a * a * slope / _M_JUP_SUN
        rows.append({"a_au": float(a), "min_mass_mjup": float(np.median(m)),
                     "min_mass_mjup_p1": float(np.percentile(m, 1.0))})  # fmt: skip
    return rows
