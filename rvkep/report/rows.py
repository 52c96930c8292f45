"""The one list of parameter rows every table renderer draws from.

Each row is one estimate of the posterior: the object it belongs to (a companion's
label, an instrument's name, ``trend``), its results.json key, its LaTeX symbol, its
estimate ``{"median", "minus", "plus"}`` and its unit in LaTeX and in plain text.
"""

from __future__ import annotations

from dataclasses import dataclass

from rvkep.formatting import p_relation
from rvkep.names import latex_escape

__all__ = ["ParameterRow", "parameter_rows", "PLANET_COLUMNS", "plain_unit", "TEQ_ASSUMPTIONS",
           "support_lines"]

PLANET_COLUMNS = [
    # (results.json key, posterior column, unit, LaTeX symbol)
    ("period_d", "period", "d", r"$P$"),
    ("K_mps", "K", "m s$^{-1}$", r"$K$"),
    ("ecc", "ecc", "", r"$e$"),
    ("omega_deg", "omega_deg", "deg", r"$\omega_\star$"),
    ("tp_bjd", "tp", "", r"$t_\mathrm{p}$"),  # an epoch in the data's time system: no unit
    ("tc_bjd", "tc", "", r"$t_\mathrm{c}$"),
    ("msini_mjup", "msini_mjup", "M$_\\mathrm{J}$", r"$m \sin i$"),
    ("msini_mearth", "msini_mearth", "M$_\\oplus$", r"$m \sin i$"),
    ("mass_mjup", "mass_mjup", "M$_\\mathrm{J}$", r"$m$"),  # N-body runs: the true mass
    ("inclination_deg", "inclination_deg", "deg", r"$i$"),  # N-body, inclinations free
    ("mutual_inclination_deg", "mutual_inclination_deg", "deg", r"$\Phi$"),
    ("a_au", "a_au", "au", r"$a$"),
    ("periastron_au", "periastron_au", "au", r"$r_\mathrm{peri}$"),
    ("apastron_au", "apastron_au", "au", r"$r_\mathrm{apo}$"),
    ("mass_function_msun", "mass_function_msun", "M$_\\odot$", r"$f(m)$"),
    ("transit_probability", "transit_probability", "", r"$p_\mathrm{tr}$"),
    ("teq_k", "teq_k", "K", r"$T_\mathrm{eq}$"),
    ("insolation_earth", "insolation_earth", "S$_\\oplus$", r"$S$"),
]


#: What the equilibrium temperature assumes (said wherever it is shown).
TEQ_ASSUMPTIONS = (
    "T_eq assumes a Bond albedo of 0 and full heat redistribution over the planet, with "
    "the orbit-averaged flux (Mendez & Rivera-Valentin 2017)"
)


def plain_unit(unit: str) -> str:
    """A LaTeX unit as plain text (``m s$^{-1}$`` -> ``m/s``).

    Parameters
    ----------
    unit : str
        The unit as LaTeX.

    Returns
    -------
    str
        Plain text.
    """
    return (unit.replace("$", "").replace("^{-1}", "^-1").replace("\\mathrm{J}", "Jup")
            .replace("_\\oplus", "_Earth").replace("_\\odot", "_Sun").replace(" s^-1", "/s")
            .replace("m s^-1", "m/s"))  # fmt: skip


@dataclass(frozen=True)
class ParameterRow:
    """One estimate for the tables."""

    object: str
    key: str
    symbol: str
    estimate: dict
    unit: str  # LaTeX
    unit_plain: str


#: units (LaTeX) and symbols of the noise models' own parameters in the tables
_NOISE_UNITS = {
    "amplitude": ("m s$^{-1}$", r"$A_\mathrm{act}$ (activity amplitude)"),
    "rotation_period": ("d", r"$P_\mathrm{rot}$ (rotation period)"),
    "evolution_time": ("d", r"$\ell$ (evolution time)"),
    "harmonic_fraction": ("", r"$f$ (harmonic fraction)"),
}


def parameter_rows(results) -> list[ParameterRow]:
    """Every companion's elements and derived quantities, every instrument's offset and
    jitter, the noise model's own parameters and the trend terms, in the order the
    tables show them.

    Parameters
    ----------
    results : Results
        A finished run.

    Returns
    -------
    list of ParameterRow
        The rows.
    """
    rows = []
    for L in results.labels:
        for key, col, unit, sym in PLANET_COLUMNS:
            if f"{L}.{col}" in results.posterior:
                est = results.estimate(f"{L}.{col}")
                rows.append(ParameterRow(L, key, sym, est, unit, plain_unit(unit)))
    for name in results.instrument_names:
        for key, col, sym in (("offset_mps", "offset", r"$\gamma$ (offset)"),
                              ("jitter_mps", "jitter", r"$\sigma_\mathrm{jit}$")):  # fmt: skip
            est = results.estimate(f"{col}.{name}")
            rows.append(ParameterRow(name, key, sym, est, "m s$^{-1}$", "m/s"))
    for ind, inst in getattr(results, "decorrelation_terms", []):
        est = results.estimate(f"decorr.{ind}.{inst}")
        tex = latex_escape(ind)  # a column name of the user's, as LaTeX text
        symbol = rf"$\partial v / \partial$ {tex}"
        rows.append(ParameterRow(inst, f"decorr_{ind}", symbol, est, f"m s$^{{-1}}$ per {tex} unit",
                                 f"m/s per {ind} unit"))  # fmt: skip
    for name in results.noise_names:
        unit, symbol = _NOISE_UNITS.get(name, ("", name.replace("_", " ")))
        est = results.estimate(f"noise.{name}")
        rows.append(ParameterRow(f"noise ({results.noise_kind})", name, symbol, est, unit,
                                 plain_unit(unit)))  # fmt: skip
    if "dynamics.inclination_deg" in results.posterior:
        est = results.estimate("dynamics.inclination_deg")
        rows.append(ParameterRow("dynamics (N-body)", "inclination_deg", r"$i$", est, "deg",
                                 "deg"))  # fmt: skip
    degree = results.trend_degree
    if degree >= 1:
        rows.append(ParameterRow("trend", "slope_mps_per_yr", r"$\dot\gamma$",
                                 results.estimate("trend.slope"), "m s$^{-1}$ yr$^{-1}$",
                                 "m/s/yr"))  # fmt: skip
    if degree >= 2:
        rows.append(ParameterRow("trend", "curvature_mps_per_yr2", r"$\ddot\gamma$",
                                 results.estimate("trend.curvature"), "m s$^{-1}$ yr$^{-2}$",
                                 "m/s/yr^2"))  # fmt: skip
    return rows


def support_lines(planets: list[dict]) -> list[str]:
    """Each companion's K fitted per instrument and per observing season, one line per
    companion (summary.md and report.html).

    Parameters
    ----------
    planets : list of dict
        results.json's ``planets`` (their ``support`` entries).

    Returns
    -------
    list of str
        The lines, then one blank line; empty when no companion has support values.
    """
    lines = []
    for p in planets:
        s = p.get("support")
        if not s:
            continue
        parts = []
        if len(s["instruments"]) > 1:
            each = ", ".join(f"{i['name']} {i['K']:.3g} +- {i['sd']:.2g}" for i in s["instruments"])
            parts.append(f"per instrument {each} m/s (p {p_relation(s['p_instruments'])})")
        if len(s["seasons"]) > 1:
            each = ", ".join(f"{v['K']:.3g} +- {v['sd']:.2g}" for v in s["seasons"])
            parts.append(f"per observing season {each} m/s (p {p_relation(s['p_seasons'])})")
        if parts:
            lines.append(f"K of {p['label']} at the best fit, " + "; ".join(parts) + ".")
    return lines + [""] if lines else lines
