"""The priors over a model's sampled vector: bounds, the packed prior table, the log
prior, the unit-cube map and the compiled path's tables.

The values the priors are stated on are the columns of
V = [period | tc (data time) | ecc | K | jitter | noise | dynamics] (companions,
instruments, the noise model's and the dynamics' own parameters, in the model's
order). :func:`prior_table` packs every prior over V into one
:class:`rvkep.priors.PriorTable`, which :func:`log_prior` evaluates in numpy and
:func:`compiled_plan` hands to the compiled log posterior
(:func:`rvkep._posterior_numba.white_noise_logpost`): one table, one implementation of
each density, one enumeration of kinds (:class:`rvkep.priors.PriorCode`).
:class:`rvkep.model.SystemModel`'s ``log_prior``, ``prior_transform``,
``compiled_plan``, ``coordinate_bounds`` and ``coordinate_log_jacobian`` are these.
"""

from __future__ import annotations

import math
from typing import TYPE_CHECKING

import numpy as np

from rvkep.components import _stretch
from rvkep.priors import PriorTable

if TYPE_CHECKING:
    from rvkep.model import SystemModel

__all__ = [
    "coordinate_bounds",
    "prior_table",
    "log_prior",
    "compiled_plan",
    "prior_transform",
    "coordinate_log_jacobian",
]


def coordinate_bounds(model: SystemModel) -> list[tuple[float | None, float | None]]:
    """(low, high) of each sampled coordinate (None where open), as L-BFGS-B takes
    them: ln P from the period prior's bounds, tc minus the epoch, the sqrt(e) pair in
    the unit square (a steep pair within the radius of the prior's largest e), K and
    jitter from zero.

    Parameters
    ----------
    model : SystemModel
        The model.

    Returns
    -------
    list of (float or None, float or None)
        One pair per sampled coordinate.
    """
    out = []
    for kind, i, f in model._slots:
        if kind == "instrument":
            lo, hi = model.instruments[i].jitter.bounds
            out.append((max(lo, 0.0), hi if np.isfinite(hi) else None))
            continue
        if kind in ("noise", "dynamics"):
            lo, hi = model._owned_parameter(kind, i).prior.bounds
            out.append((lo if np.isfinite(lo) else None, hi if np.isfinite(hi) else None))
            continue
        c = model.companions[i]
        if f == "ln_period":
            lo, hi = c.period.bounds
            out.append(
                (math.log(lo) if lo > 0 else None, math.log(hi) if np.isfinite(hi) else None)
            )
        elif f == "tc":
            lo, hi = c.tc.bounds
            ep = model.data.epoch
            out.append((lo - ep if np.isfinite(lo) else None, hi - ep if np.isfinite(hi) else None))
        elif f in ("h", "k") and c.steep:  # radius sqrt(-ln(1 - e)) up to the prior's e
            e_hi = c.ecc.bounds[1]
            r = math.sqrt(-math.log1p(-e_hi)) if e_hi < 1.0 else None
            out.append((-r if r else None, r))
        elif f in ("h", "k"):
            out.append((-1.0, 1.0))
        else:  # K, or for a steep companion K sqrt(1 - e^2), which is at most K
            lo, hi = c.K.bounds
            out.append((0.0 if c.steep else max(lo, 0.0), hi if np.isfinite(hi) else None))
    return out


def prior_table(model: SystemModel) -> tuple[PriorTable, np.ndarray]:
    """The packed priors over V (see the module) and the companions whose period is
    sampled (their ln P Jacobian), built once per model.

    Parameters
    ----------
    model : SystemModel
        The model (the result is cached on it).

    Returns
    -------
    table : PriorTable
        The packed priors.
    period_jac : ndarray of bool
        Which periods are sampled.
    """
    if model._plan is not None:
        return model._plan
    nc, ni = len(model.companions), len(model.instruments)
    entries = []  # (column in V, prior)
    for ci, c in enumerate(model.companions):
        if not c.period.is_fixed:
            entries.append((ci, c.period))
        if not c.tc.is_fixed:
            entries.append((nc + ci, c.tc))
        if not c.circular:
            entries.append((2 * nc + ci, c.ecc))
        if not c.K.is_fixed:
            entries.append((3 * nc + ci, c.K))
    for ii, inst in enumerate(model.instruments):
        if not inst.jitter.is_fixed:
            entries.append((4 * nc + ii, inst.jitter))
    owned = model.noise_parameters + model.dynamics_parameters
    for pi, par in enumerate(owned):
        if not par.prior.is_fixed:
            entries.append((4 * nc + ni + pi, par.prior))
    table = PriorTable.pack(entries, 4 * nc + ni + len(owned))
    jac = np.array(
        [ci for ci, c in enumerate(model.companions) if not c.period.is_fixed], dtype=np.intp
    )
    model._plan = (table, jac)
    return model._plan


def log_prior(model: SystemModel, theta: np.ndarray, arrays: dict | None = None) -> np.ndarray:
    """Log prior density in the sampled coordinates, (n_sets,); -inf when invalid.

    Includes the Jacobian of ln P; the sqrt(e) coordinates have a constant
    Jacobian (dropped); a steep companion's coordinates add ln(1 - e) (the
    stretched pair) and -ln sqrt(1 - e^2) (K sqrt(1 - e^2)). Rows with e >= 1,
    K < 0, a negative jitter or a noise parameter outside its domain are invalid
    whatever the priors say. ``arrays`` (from :meth:`SystemModel.orbit_arrays`) saves
    recomputing them.

    Parameters
    ----------
    model : SystemModel
        The model.
    theta : ndarray, shape (n_sets, ndim)
        Sampled coordinates.
    arrays : dict, optional
        The orbit arrays of ``theta``.

    Returns
    -------
    ndarray, shape (n_sets,)
        The log prior.
    """
    arr = model.orbit_arrays(theta) if arrays is None else arrays
    table, jac = prior_table(model)
    V = np.concatenate(
        [arr["period"], arr["tc_rel"] + model.data.epoch, arr["ecc"], arr["K"],
         arr["jitter"], arr["noise"], arr["dynamics"]],
        axis=1,
    )  # fmt: skip
    noise_lo, noise_hi = model._noise_domain
    dyn_lo, dyn_hi = model._dyn_domain
    ok = (
        (arr["ecc"] < 1.0).all(axis=1)
        & (arr["K"] >= 0).all(axis=1)
        & (arr["jitter"] >= 0).all(axis=1)
        & ((arr["noise"] >= noise_lo) & (arr["noise"] <= noise_hi)).all(axis=1)
        & ((arr["dynamics"] >= dyn_lo) & (arr["dynamics"] <= dyn_hi)).all(axis=1)
    )
    lp, inside = table.logpdf(V)
    ok &= inside
    with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
        if jac.size:
            lp += np.log(np.where(ok[:, None], arr["period"][:, jac], 1.0)).sum(axis=1)
        if model._steep.any():
            lp += coordinate_log_jacobian(model, np.where(ok[:, None], arr["ecc"], 0.0))
    lp[~ok | ~np.isfinite(lp)] = -np.inf
    return lp


def compiled_plan(model: SystemModel) -> tuple | None:
    """The coordinate and prior tables of the compiled log posterior
    (:func:`rvkep._posterior_numba.white_noise_logpost`, arguments ``cols`` to
    ``epoch``), or None when the model needs the general path: a prior without a
    packed form (truncated normal, beta), a noise model's own parameters, or N-body
    dynamics. The prior columns are the packed table's rows over
    [period | tc | ecc | K | jitter].

    Parameters
    ----------
    model : SystemModel
        The model (the result is cached on it).

    Returns
    -------
    tuple or None
        The tables, in the kernel's argument order.
    """
    if model._compiled is not None:
        return model._compiled or None
    nc, ni = len(model.companions), len(model.instruments)
    table, jac = prior_table(model)
    if table.general or model.noise_parameters or model.dynamics != "keplerian":
        model._compiled = ()
        return None
    fields = ("ln_period", "tc_rel", "h", "k", "K")
    cols = np.full((5, nc), -1, dtype=np.int64)
    fill = np.zeros((5, nc))
    for f, name in enumerate(fields):
        fill[f] = np.nan_to_num(model._fill[name])
        j, ci = model._gather[name]
        cols[f, ci] = j
    jit_cols = np.full(ni, -1, dtype=np.int64)
    jit_cols[model._jit_gather[1]] = model._jit_gather[0]
    nv = 4 * nc + ni
    period_jac = np.zeros(nc, dtype=bool)
    period_jac[jac] = True
    model._compiled = (cols, fill, model._circular, model._steep, model._steep_K, jit_cols,
                       np.nan_to_num(model._jit_fill), table.code[:nv].copy(),
                       table.a[:nv].copy(), table.b[:nv].copy(), table.c[:nv].copy(),
                       period_jac, float(model.data.epoch))  # fmt: skip
    return model._compiled


def prior_transform(model: SystemModel, u: np.ndarray) -> np.ndarray:
    """Sampled coordinates from points of the unit cube, through each prior's
    inverse CDF (``ppf``): the map nested samplers draw the prior with.

    ``u`` has shape (n_sets, ndim) or (ndim,). Period: P = ppf(u), coordinate ln P;
    tc: ppf(u) minus the epoch; the pair (sqrt(e) cos omega, sqrt(e) sin omega) from
    two cube coordinates, e = ppf of the eccentricity prior and omega = 2 pi u
    (uniform, as in :meth:`log_prior`); K, jitter and the noise model's own
    parameters: ppf(u). Uniform points give
    draws of the prior that :meth:`log_prior` states.

    Parameters
    ----------
    model : SystemModel
        The model.
    u : ndarray, shape (n_sets, ndim) or (ndim,)
        Points of the unit cube.

    Returns
    -------
    ndarray
        Sampled coordinates, shaped like ``u``.
    """
    u = np.asarray(u, dtype=float)
    single = u.ndim == 1
    u = np.atleast_2d(u)
    if u.shape[1] != model.ndim:
        raise ValueError(f"need {model.ndim} unit-cube coordinates, got {u.shape[1]}")
    theta = np.empty_like(u)
    for j, (kind, i, f) in enumerate(model._slots):
        if kind == "instrument":
            theta[:, j] = model.instruments[i].jitter.ppf(u[:, j])
            continue
        if kind in ("noise", "dynamics"):
            theta[:, j] = model._owned_parameter(kind, i).prior.ppf(u[:, j])
            continue
        c = model.companions[i]
        if f == "ln_period":
            theta[:, j] = np.log(c.period.ppf(u[:, j]))
        elif f == "tc":
            theta[:, j] = c.tc.ppf(u[:, j]) - model.data.epoch
        elif f == "h":  # the k slot follows it (see _build)
            e = np.asarray(c.ecc.ppf(u[:, j]), float)
            w = 2.0 * np.pi * u[:, j + 1]
            radius = _stretch(e) if c.steep else np.sqrt(e)
            theta[:, j] = radius * np.cos(w)
            theta[:, j + 1] = radius * np.sin(w)
        elif f == "K":  # after h and k: a steep companion's e is known
            K = c.K.ppf(u[:, j])
            theta[:, j] = K * np.sqrt(1.0 - e * e) if c.steep and not c.circular else K
    return theta[0] if single else theta


def coordinate_log_jacobian(model: SystemModel, ecc: np.ndarray) -> np.ndarray:
    """What the steep companions' coordinates add to the log prior, (n_sets,),
    from the eccentricities ``ecc`` (n_sets, n_companions): ln(1 - e) for the
    stretched pair (det d(h, k)/d(a, b) = 1 - e exactly) and -ln sqrt(1 - e^2) for
    K sqrt(1 - e^2) (dK/d(K sqrt(1 - e^2)) at fixed e); zeros without steep
    companions. The log posterior of the same point in another model's
    coordinates differs by the difference of the two models' values.

    Parameters
    ----------
    model : SystemModel
        The model.
    ecc : ndarray, shape (n_sets, n_companions)
        Eccentricities.

    Returns
    -------
    ndarray, shape (n_sets,)
        The log Jacobian.
    """
    ecc = np.atleast_2d(np.asarray(ecc, float))
    with np.errstate(invalid="ignore", divide="ignore"):
        out = np.log1p(-ecc[:, model._steep]).sum(axis=1)
        out -= 0.5 * np.log1p(-(ecc[:, model._steep_K] ** 2)).sum(axis=1)
    return out
