"""Is a multi-companion solution dynamically possible? Analytic criteria per draw.

Two criteria for each adjacent pair of companions (sorted by semi-major axis), from
masses, semi-major axes and eccentricities (orbits taken coplanar):

* **Hill stability** (Gladman 1993, Icarus 106, 247, eq. 21 as the two-planet
  energy-angular momentum criterion of Marchal & Bozis 1982): the pair can never
  have a close encounter when

  alpha^-3 (mu1 + mu2 / delta^2) (mu1 gamma1 + mu2 gamma2 delta)^2
      > 1 + 3^(4/3) mu1 mu2 / alpha^(4/3),

  with mu_i = m_i / M_star, alpha = mu1 + mu2, gamma_i = sqrt(1 - e_i^2) and
  delta = sqrt(a2 / a1). For circular orbits it reduces to a separation of
  2 sqrt(3) mutual Hill radii (Gladman's eq. 26).
* **AMD stability** (Laskar & Petit 2017, A&A 605, A72): the system's angular
  momentum deficit AMD = sum_k Lambda_k (1 - sqrt(1 - e_k^2)), Lambda_k = m_k
  sqrt(G M a_k), in units of the outer planet's Lambda, is below the pair's critical
  value C_c(alpha, gamma) (their eqs. 29-35: the least AMD at which the two orbits
  can cross), alpha = a1 / a2, gamma = m1 / m2. Stable when beta = C / C_c < 1 for
  every pair. The refinement for pairs close enough for resonances to overlap
  (Petit, Laskar & Boue 2017) is not applied.

Each function broadcasts over draws; :func:`stability_summary` turns posterior draws
into the fractions reported in results.json, the summary and the report.
"""

from __future__ import annotations

import math

import numpy as np

__all__ = [
    "hill_stable_pair",
    "hill_margin",
    "critical_amd",
    "amd_beta",
    "stability_summary",
]


def hill_margin(a1, a2, e1, e2, m1, m2, star_mass) -> np.ndarray:
    """Gladman's left side over his right side, minus one: > 0 means Hill stable.

    Parameters
    ----------
    a1, a2 : array_like
        Semi-major axes of the inner and outer companion (any one unit).
    e1, e2 : array_like
        Eccentricities.
    m1, m2, star_mass : array_like
        Masses in one unit.

    Returns
    -------
    ndarray
        The margin (scalar for scalar input).

    References
    ----------
    .. [1] Gladman, B. (1993), Icarus 106, 247.
    """
    a1, a2, e1, e2, m1, m2, M = np.broadcast_arrays(*(np.asarray(x, float) for x in (
        a1, a2, e1, e2, m1, m2, star_mass)))  # fmt: skip
    mu1, mu2 = m1 / M, m2 / M
    alpha = mu1 + mu2
    delta = np.sqrt(a2 / a1)
    g1, g2 = np.sqrt(1.0 - e1 * e1), np.sqrt(1.0 - e2 * e2)
    left = alpha**-3 * (mu1 + mu2 / delta**2) * (mu1 * g1 + mu2 * g2 * delta) ** 2
    right = 1.0 + 3.0 ** (4.0 / 3.0) * mu1 * mu2 / alpha ** (4.0 / 3.0)
    return left / right - 1.0


def hill_stable_pair(a1, a2, e1, e2, m1, m2, star_mass) -> bool | np.ndarray:
    """True where Gladman's criterion holds (see :func:`hill_margin`).

    Parameters
    ----------
    a1, a2, e1, e2, m1, m2, star_mass : array_like
        As :func:`hill_margin`.

    Returns
    -------
    bool or ndarray
        Hill stable (scalar for scalar input).
    """
    out = hill_margin(a1, a2, e1, e2, m1, m2, star_mass) > 0.0
    return bool(out) if out.ndim == 0 else out


def _collision_e1(alpha: np.ndarray, gamma: np.ndarray) -> np.ndarray:
    """The inner eccentricity of the least-AMD crossing (Laskar & Petit 2017, eq. 35):
    the root in (0, 1) of alpha e + gamma e / sqrt(alpha (1 - e^2) + gamma^2 e^2) - 1 +
    alpha, by bisection (the left side increases with e)."""
    lo = np.zeros_like(alpha)
    hi = np.ones_like(alpha)
    for _ in range(60):
        e = 0.5 * (lo + hi)
        f = alpha * e + gamma * e / np.sqrt(alpha * (1 - e * e) + gamma**2 * e * e) - 1 + alpha
        up = f > 0
        hi = np.where(up, e, hi)
        lo = np.where(up, lo, e)
    return 0.5 * (lo + hi)


def critical_amd(alpha, gamma) -> np.ndarray:
    """C_c(alpha, gamma): the least relative AMD (in units of the outer Lambda) at
    which orbits with semi-major axis ratio ``alpha`` = a1/a2 < 1 and mass ratio
    ``gamma`` = m1/m2 can cross (Laskar & Petit 2017, eqs. 29-35).

    Parameters
    ----------
    alpha : array_like
        a1 / a2 (< 1).
    gamma : array_like
        m1 / m2.

    Returns
    -------
    ndarray
        C_c.

    References
    ----------
    .. [1] Laskar, J. & Petit, A. C. (2017), A&A 605, A72.
    """
    alpha, gamma = np.broadcast_arrays(np.asarray(alpha, float), np.asarray(gamma, float))
    e1 = _collision_e1(alpha, gamma)
    e2 = 1.0 - alpha - alpha * e1
    return gamma * np.sqrt(alpha) * (1.0 - np.sqrt(1.0 - e1 * e1)) + 1.0 - np.sqrt(1.0 - e2 * e2)


def amd_beta(a, e, m) -> np.ndarray:
    """beta = C / C_c of each adjacent pair for systems of companions.

    Parameters
    ----------
    a, e, m : array_like, shape (n_draws, n_companions)
        Semi-major axes (one unit), eccentricities, masses (one unit), any order.

    Returns
    -------
    numpy.ndarray, shape (n_draws, n_companions - 1)
        Pairs by increasing semi-major axis; the system is AMD stable where every
        beta < 1. G M cancels in the ratio.
    """
    a, e, m = (np.atleast_2d(np.asarray(x, float)) for x in (a, e, m))
    order = np.argsort(a, axis=1)
    a, e, m = (np.take_along_axis(x, order, axis=1) for x in (a, e, m))
    lam = m * np.sqrt(a)
    amd = (lam * (1.0 - np.sqrt(1.0 - e * e))).sum(axis=1, keepdims=True)
    alpha = a[:, :-1] / a[:, 1:]
    gamma = m[:, :-1] / m[:, 1:]
    return (amd / lam[:, 1:]) / critical_amd(alpha, gamma)


def stability_summary(draws: dict[str, np.ndarray], labels: list[str], median: dict) -> dict:
    """Fractions of posterior draws stable by each criterion.

    Parameters
    ----------
    draws : dict
        Columns ``<label>.a`` (au), ``<label>.ecc`` and ``<label>.mass`` (any one mass
        unit) per companion, and ``star_mass`` in the same unit, one value per draw.
    labels : list of str
        Two or more companions.
    median : dict
        The same keys for the median solution (one value each).

    Returns
    -------
    dict
        ``hill_stable_fraction``, ``amd_stable_fraction``, ``median_hill_stable``,
        ``median_amd_stable``, ``pairs`` (per adjacent pair of the median solution:
        names, Hill margin, AMD beta) and ``criteria`` (the references).
    """

    def matrices(source):
        a = np.column_stack([np.atleast_1d(source[f"{L}.a"]) for L in labels])
        e = np.column_stack([np.atleast_1d(source[f"{L}.ecc"]) for L in labels])
        m = np.column_stack([np.atleast_1d(source[f"{L}.mass"]) for L in labels])
        M = np.atleast_1d(source["star_mass"])
        return a, e, m, M

    def verdicts(source):
        a, e, m, M = matrices(source)
        order = np.argsort(a, axis=1)
        a_s, e_s, m_s = (np.take_along_axis(x, order, axis=1) for x in (a, e, m))
        margins = hill_margin(a_s[:, :-1], a_s[:, 1:], e_s[:, :-1], e_s[:, 1:], m_s[:, :-1],
                              m_s[:, 1:], M[:, None])  # fmt: skip
        beta = amd_beta(a, e, m)
        return order, margins, beta

    _, margins, beta = verdicts(draws)
    hill = np.all(margins > 0, axis=1)
    amd = np.all(beta < 1, axis=1)
    order, m_margin, m_beta = verdicts(median)
    names = [labels[i] for i in order[0]]
    pairs = [
        {"inner": names[k], "outer": names[k + 1], "hill_margin": float(m_margin[0, k]),
         "amd_beta": float(m_beta[0, k])}
        for k in range(len(names) - 1)
    ]  # fmt: skip
    return {
        "hill_stable_fraction": float(np.mean(hill)),
        "amd_stable_fraction": float(np.mean(amd)),
        "median_hill_stable": bool(np.all(m_margin > 0)),
        "median_amd_stable": bool(np.all(m_beta < 1)),
        "pairs": pairs,
        "criteria": {
            "hill": "Gladman (1993), Icarus 106, 247",
            "amd": "Laskar & Petit (2017), A&A 605, A72 (no resonance-overlap term)",
        },
        "draws": int(hill.size),
    }


def _hill_radius_separation(a1, a2, m1, m2, star_mass) -> float:
    """(a2 - a1) in mutual Hill radii ((m1 + m2) / 3M)^(1/3) (a1 + a2) / 2 (for notes)."""
    rh = ((m1 + m2) / (3.0 * star_mass)) ** (1.0 / 3.0) * 0.5 * (a1 + a2)
    return (a2 - a1) / rh if rh > 0 else math.inf


def posterior_stability(model, posterior) -> dict:
    """Hill and AMD stability per posterior draw (:mod:`rvkep.stability`): masses are
    the true masses of an N-body run, else m sin i (coplanar, edge-on: the least
    masses, so the most favourable case)."""
    import numpy as np

    from rvkep.physics import M_JUP, M_SUN

    labels = [c.label for c in model.companions]
    mass_key = "mass_mjup" if model.dynamics == "nbody" else "msini_mjup"
    draws = {"star_mass": np.asarray(posterior["star.mass_msun"], float)}
    for L in labels:
        draws[f"{L}.a"] = np.asarray(posterior[f"{L}.a_au"], float)
        draws[f"{L}.ecc"] = np.asarray(posterior[f"{L}.ecc"], float)
        draws[f"{L}.mass"] = np.asarray(posterior[f"{L}.{mass_key}"], float) * (M_JUP / M_SUN)
    median = {k: float(np.median(v)) for k, v in draws.items()}
    out = stability_summary(draws, labels, median)
    out["masses"] = "true masses (N-body inclination)" if mass_key == "mass_mjup" else (
        "minimum masses m sin i, coplanar")  # fmt: skip
    return out


def stability_warning(stab: dict) -> str:
    """The note for a median solution that fails a criterion."""
    failed = [name for name, ok in (("Hill (Gladman 1993)", stab["median_hill_stable"]),
                                    ("AMD (Laskar & Petit 2017)", stab["median_amd_stable"]))
              if not ok]  # fmt: skip
    return (f"WARNING: the median solution is not {' or '.join(failed)} stable; stable draws: "
            f"Hill {stab['hill_stable_fraction']:.0%}, AMD {stab['amd_stable_fraction']:.0%} "
            "(a resonance can protect such a pair: check with rvkep stability)")
