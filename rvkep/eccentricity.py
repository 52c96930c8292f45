"""Is an orbit really eccentric? The Lucy & Sweeney test and a circular refit.

The eccentricity is positive by construction, so noise alone gives a circular orbit a
fitted e > 0 with an error bar that can look significant. Lucy & Sweeney (1971) give
the probability that an orbit whose true eccentricity is zero yields a fitted value of
at least e_hat, when each of e cos omega and e sin omega carries a Gaussian error sigma:

    p = exp(-e_hat^2 / (2 sigma^2))

(the Rayleigh tail; Lucy & Sweeney 1971, AJ 76, 544, eq. 19). They recommend treating
an orbit as eccentric only when p < 0.05. Here e_hat is the best fit's eccentricity and
sigma the posterior standard deviation of e cos omega and e sin omega, averaged
(posterior samples stand in for the least-squares errors they used).

Beside it, the BIC of the best fit with that companion held circular (the other
parameters refitted) against the eccentric best fit: Delta BIC = BIC(circular) -
BIC(eccentric); positive values favour the eccentric orbit (more than 10: very
strongly, Kass & Raftery 1995).

References
----------
.. [1] Lucy, L. B. & Sweeney, M. A. (1971), AJ 76, 544.
.. [2] Kass, R. E. & Raftery, A. E. (1995), JASA 90, 773.
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np

__all__ = ["lucy_sweeney", "eccentricity_tests", "circular_model", "LS_LEVEL"]

#: below this probability an orbit counts as eccentric (Lucy & Sweeney 1971)
LS_LEVEL = 0.05


def lucy_sweeney(e_hat: float, sigma: float) -> float:
    """Probability that a circular orbit gives a fitted eccentricity of ``e_hat`` or more
    when e cos omega and e sin omega each have the Gaussian error ``sigma`` (Lucy &
    Sweeney 1971, eq. 19).

    >>> round(lucy_sweeney(0.1, 0.05), 4)  # 2 sigma: exp(-2)
    0.1353

    Parameters
    ----------
    e_hat : float
        The fitted eccentricity.
    sigma : float
        The error of each of e cos omega and e sin omega.

    Returns
    -------
    float
        The probability p = exp(-e_hat^2 / 2 sigma^2).

    References
    ----------
    .. [1] Lucy, L. B. & Sweeney, M. A. (1971), AJ 76, 544.
    """
    if not sigma > 0:
        return 0.0 if e_hat > 0 else 1.0
    return float(math.exp(-0.5 * (e_hat / sigma) ** 2))


def circular_model(model, labels):
    """``model`` with the companions named in ``labels`` held circular (e fixed at 0).

    Parameters
    ----------
    model : SystemModel
        The model (not changed).
    labels : iterable of str
        The companions to hold circular.

    Returns
    -------
    SystemModel
        The new model.
    """
    from rvkep.priors import Fixed

    comps = [replace(c, ecc=Fixed(0.0), start={**c.start, "ecc": 0.0})
             if c.label in labels else c for c in model.companions]  # fmt: skip
    return model.with_companions(comps)


def eccentricity_tests(fit, posterior) -> dict[str, dict]:
    """For each eccentric companion of the best fit ``fit``: the Lucy & Sweeney
    probability (e_hat from the fit, sigma from the ``posterior`` samples: columns
    ``<label>.ecc`` and ``.omega_deg``) and Delta BIC of a circular refit.

    Parameters
    ----------
    fit : FitResult
        The best fit.
    posterior : PosteriorSamples
        The posterior samples.

    Returns
    -------
    dict
        {label: {"e_best_fit", "sigma_e_components", "lucy_sweeney_p", "bic_circular",
        "bic_eccentric", "delta_bic_circular_minus_eccentric", "consistent_with_circular"}}.
    """
    from rvkep.optimize import fit as refit

    out = {}
    for c in fit.model.companions:
        if c.circular:
            continue
        L = c.label
        e = np.asarray(posterior[f"{L}.ecc"], float)
        w = np.radians(np.asarray(posterior[f"{L}.omega_deg"], float))
        sigma = 0.5 * (np.std(e * np.cos(w)) + np.std(e * np.sin(w)))
        e_hat = float(fit.params[f"{L}.ecc"])
        p = lucy_sweeney(e_hat, float(sigma))
        circ = circular_model(fit.model, {L})
        start = circ.from_physical({**fit.params, f"{L}.ecc": 0.0})[0]
        circular = refit(circ, [start])
        out[L] = {
            "e_best_fit": e_hat,
            "sigma_e_components": float(sigma),
            "lucy_sweeney_p": p,
            "bic_circular": float(circular.bic),
            "bic_eccentric": float(fit.bic),
            "delta_bic_circular_minus_eccentric": float(circular.bic - fit.bic),
            "consistent_with_circular": bool(p >= LS_LEVEL),
        }
    return out
