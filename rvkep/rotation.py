"""The star's rotation in the model choice: the period given (``--star-rotation``,
the model file's ``[star] rotation``), the prior it puts on a Gaussian process's
rotation period, and notes on companions whose period lies near it or its half (where
spots put their signal).
"""

from __future__ import annotations

from dataclasses import replace

__all__ = ["star_rotation", "rotation_prior", "rotation_match", "rotation_notes",
           "near_rotation"]  # fmt: skip


def star_rotation(opts, spec=None) -> tuple[float, float] | None:
    """(period, sd) of the star's rotation: ``--star-rotation`` (with its error, default
    10% of it) over the model file's ``[star] rotation``; None when neither gives it.

    Parameters
    ----------
    opts : AnalyzeOptions
        The run's options.
    spec : ModelSpec, optional
        The model file, when one is given.

    Returns
    -------
    tuple of float or None
        The rotation period and its error, days.
    """
    period, err = opts.star_rotation, opts.star_rotation_err
    if period is None and spec is not None and spec.star_rotation is not None:
        period, err = spec.star_rotation
    if period is None:
        return None
    return float(period), float(err) if err else 0.1 * float(period)


def rotation_prior(base, rotation: tuple[float, float]):
    """The GP's rotation period with a normal prior at the given rotation (truncated
    at 5 sd, and above 0.05 d), starting there; other noise models unchanged.

    Parameters
    ----------
    base : SystemModel
        The model without companions.
    rotation : tuple of float
        The rotation period and its error, days.

    Returns
    -------
    SystemModel
        A new model, or ``base`` itself when its noise model has no rotation period.
    """
    from rvkep.priors import TruncatedNormal

    P, sd = rotation
    pars = list(base.noise_parameters)
    names = [p.name for p in pars]
    if "rotation_period" not in names:
        return base
    k = names.index("rotation_period")
    prior = TruncatedNormal(P, sd, max(0.05, P - 5 * sd), P + 5 * sd)
    pars[k] = replace(pars[k], prior=prior, start=P)
    return replace(base, noise_parameters=pars)


def rotation_notes(fit, rotation: float) -> list[str]:
    """Notes on companions whose period lies within 10% of the star's rotation period
    or its half (where spots put their signal).

    Parameters
    ----------
    fit : FitResult
        The chosen fit.
    rotation : float
        The star's rotation period, days.

    Returns
    -------
    list of str
        One note per such companion.
    """
    notes = []
    remedy = "" if fit.model.noise == "gp" else "; --noise gp models the activity"
    for c in fit.model.companions:
        P = fit.params[f"{c.label}.period"]
        near = rotation_match(P, rotation)
        if near is not None:
            what, at = near
            notes.append(f"the period of {c.label} ({P:.4g} d) lies near the star's {what} "
                         f"({at:.4g} d): it may be activity{remedy}")  # fmt: skip
    return notes


def rotation_match(period: float, rotation: float) -> tuple[str, float] | None:
    """("rotation period" or "half rotation period", that period) when ``period`` lies
    within 10% of the rotation period or of half of it (where spots put their signal).

    Parameters
    ----------
    period, rotation : float
        A companion's period and the rotation period, days.

    Returns
    -------
    tuple or None
        What it lies near and that period, or None.
    """
    for share, what in ((1.0, "rotation period"), (0.5, "half rotation period")):
        if abs(period / (share * rotation) - 1.0) < 0.1:
            return what, share * rotation
    return None


def near_rotation(fit, periods) -> str:
    """', and its period X d lies near the activity's rotation period' when a noise
    model with a rotation period has one within 10% of a period (or of half of it).

    Parameters
    ----------
    fit : FitResult
        A fit whose noise model may have a rotation period.
    periods : list of float
        The periods to compare, days.

    Returns
    -------
    str
        The clause, or an empty string.
    """
    p = fit.params.get("noise.rotation_period")
    for P in periods if p is not None else ():
        near = rotation_match(P, p)
        if near is not None:
            return f", and its period {P:.4g} d lies near the activity's {near[0]} {near[1]:.4g} d"
    return ""
