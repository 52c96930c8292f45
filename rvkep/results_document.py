"""The content of ``results.json`` for a fresh run, section by section: the companions,
the instruments, the trend, the search, the sampler, the star, the best fit and the
comparisons (a reloaded run keeps the document it was saved with).
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np

from rvkep import __version__
from rvkep.report.rows import PLANET_COLUMNS

if TYPE_CHECKING:
    from rvkep.results import Results

__all__ = ["document"]

#: the integrator an N-body run uses, as results.json states it
INTEGRATOR = ("REBOUND: WHFast (step P_min/20), or IAS15 for e >= 0.5 or crossing orbits; "
              "coplanar, Jacobi elements at the epoch")  # fmt: skip


def document(res: Results) -> dict:
    """The dictionary written as ``results.json``.

    Parameters
    ----------
    res : Results
        A fresh run (its best fit, sampler and posterior at hand).

    Returns
    -------
    dict
        Estimates as ``{"median", "minus", "plus"}``, the run's kind, diagnostics,
        comparisons, priors and notes (numpy scalars not yet cleaned for JSON).
    """
    model = res.fit.model
    return {
        "rvkep_version": __version__,
        "run_kind": {
            "label": res.run_label(),
            "quick": bool(res.quick),
            "converged": res.converged,
            "star_mass_assumed": bool(res.star_assumed),
        },
        "n_planets": len(res.labels),
        "planets": _planets(res),
        "instruments": _instruments(res),
        "trend": _trend(res),
        "decorrelation": [
            {"indicator": ind, "instrument": inst,
             "coefficient": res.estimate(f"decorr.{ind}.{inst}")}
            for ind, inst in res.decorrelation_terms
        ],  # fmt: skip
        "noise": {
            "kind": model.noise,
            **{name: res.estimate(f"noise.{name}") for name in res.noise_names},
        },
        "search": _search(res),
        "search_method": getattr(res.search, "kind", None),
        **({"provenance": res.provenance} if res.provenance else {}),
        "sampler": _sampler(res),
        "star": _star(res),
        "best_fit": _best_fit(res),
        "model_comparison": res.comparison,
        "evidence": list(res.evidence),
        "timings": {k: float(v) for k, v in res.timings.items()},
        "trend_comparison": res.trend_comparison,
        "harmonic_checks": [{k: (bool(v) if k == "kept" else v) for k, v in r.items()}
                            for r in res.harmonic_checks],  # fmt: skip
        **({"dynamics": _dynamics(res)} if model.dynamics != "keplerian" else {}),
        **({"stability": res.stability} if res.stability else {}),
        **({"trend_companion": res.trend_companion()} if model.trend else {}),
        "priors": [{"parameter": p, "prior": d} for p, d in model.describe_priors()],
        "reference_epoch": res.data.epoch,
        "seed": res.seed,
        "notes": list(res.notes),
    }


def _planets(res: Results) -> list[dict]:
    planets = []
    for L in res.labels:
        entry = {"label": L}
        for key, col, _, _ in PLANET_COLUMNS:
            if f"{L}.{col}" in res.posterior:
                entry[key] = res.estimate(f"{L}.{col}")
        if L in res.ecc_tests:
            entry["ecc_test"] = dict(res.ecc_tests[L])
        if res.fit is not None and L in {c.label for c in res.fit.model.companions}:
            entry["support"] = _support(res.fit, L)
        entry["orbit_closed"] = L not in res.open_orbits
        if L in res.open_orbits:
            entry["lower_limits"] = dict(res.open_orbits[L]["lower_limits"])
        planets.append(entry)
    return planets


def _support(fit, label: str) -> dict:
    """K of one companion fitted per instrument and per observing season at the best
    fit, and its stacked periodogram (:func:`rvkep.choice.instrument_support`,
    :func:`~rvkep.choice.season_support`, :func:`~rvkep.choice.stacked_power`)."""
    from rvkep.choice import instrument_support, season_support, stacked_power

    inst, season = instrument_support(fit, label), season_support(fit, label)
    return {
        "instruments": [{"name": n, **v} for n, v in inst["instruments"].items()],
        "chi2_instruments": inst["chi2"], "p_instruments": inst["p"],
        "seasons": season["seasons"],
        "chi2_seasons": season["chi2"], "p_seasons": season["p"],
        "stacked_power": stacked_power(fit, label),
    }  # fmt: skip


def _instruments(res: Results) -> list[dict]:
    model = res.fit.model
    out = []
    for k, inst in enumerate(model.instruments):
        m = model.inst_index == k
        out.append({
            "name": inst.name,
            "n_points": int(m.sum()),
            "offset_mps": res.estimate(f"offset.{inst.name}"),
            "jitter_mps": res.estimate(f"jitter.{inst.name}"),
            "rms_residual_mps": res.fit.rms[inst.name],
            "median_error_mps": float(np.median(res.data.err[m])),
        })  # fmt: skip
    return out


def _trend(res: Results) -> dict:
    degree = res.fit.model.trend
    trend: dict = {"degree": degree}
    if degree >= 1:
        trend["slope_mps_per_yr"] = res.estimate("trend.slope")
    else:
        trend["slope_mps_per_yr"] = {"median": 0.0, "minus": 0.0, "plus": 0.0}
        trend["note"] = "no trend fitted (degree 0)"
    if degree >= 2:
        trend["curvature_mps_per_yr2"] = res.estimate("trend.curvature")
    return trend


def _search(res: Results) -> list[dict]:
    if res.search is None:
        return []
    return [
        {
            "period_d": float(c.period),
            "power": float(c.power),
            "fap": float(c.fap),
            "significant": bool(c.significant),
            "K_mps": None if c.K is None else float(c.K),
            "aliases_flagged": [a.kind for a in c.aliases if a.flagged],
            "alias_periods_d": {a.kind: float(a.period) for a in c.aliases},
            "activity": list(c.activity),
            "periodogram": getattr(c, "periodogram", "sine"),
            "notes": list(getattr(c, "notes", [])),
        }
        for c in res.search.candidates
    ]


def _sampler(res: Results) -> dict:
    given = res.sampling.diagnostics() if res.sampling is not None else {}
    first = ("walkers", "steps", "autocorr_steps", "converged")
    return {
        "walkers": given.get("walkers", 0),
        "steps": given.get("steps", 0),
        "autocorr_steps": given.get("autocorr_steps", 0.0),
        "converged": given.get("converged", False),
        **{k: v for k, v in given.items() if k not in first},
        "quick_mode": res.quick,
    }


def _star(res: Results) -> dict:
    star = res.star
    return {
        **({"name": res.star_name} if res.star_name else {}),
        "mass_msun": star.mass,
        "mass_err_msun": star.mass_err,
        "radius_rsun": star.radius,
        "teff_k": star.teff,
        "assumed": res.star_assumed,
    }


def _best_fit(res: Results) -> dict:
    fit = res.fit
    return {
        "log_likelihood": fit.log_likelihood,
        "chi2": fit.chi2,
        "bic": fit.bic,
        "aic": fit.aic,
        "n_points": fit.n_points,
        "n_free_parameters": fit.n_free,
        "parameters": fit.params,
    }


def _dynamics(res: Results) -> dict:
    return {
        "kind": res.fit.model.dynamics,
        **({"inclination_deg": res.estimate("dynamics.inclination_deg")}
           if "dynamics.inclination_deg" in res.posterior else {}),  # fmt: skip
        "comparison": res.dynamics_comparison,
        "integrator": INTEGRATOR,
    }
