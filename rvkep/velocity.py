"""The star's velocity from a model's companions: the sum of their Keplerian curves,
or an N-body integration for ``dynamics="nbody"`` models (:mod:`rvkep.nbody`).

Both take a :class:`rvkep.model.SystemModel` and physical parameters (named columns,
or the matrices of :meth:`~rvkep.model.SystemModel.orbit_arrays`).
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np

from rvkep.kepler import rv_rows

if TYPE_CHECKING:
    from rvkep.model import SystemModel

__all__ = ["keplerian_velocity", "orbit_velocity"]


def keplerian_velocity(
    model: SystemModel, phys: dict, rows: np.ndarray | None = None, t: np.ndarray | None = None
) -> np.ndarray:
    """Sum of the companions' Keplerian curves, (n_rows, n_times).

    ``phys`` holds physical columns (:meth:`SystemModel.to_physical`); the curves are
    evaluated at the data times by default, or at ``t`` (in the data's time system).

    Parameters
    ----------
    model : SystemModel
        The model.
    phys : dict
        Physical columns.
    rows : ndarray of int, optional
        The rows of ``phys`` used (default all).
    t : ndarray, optional
        Times (days).

    Returns
    -------
    ndarray, shape (n_rows, n_times)
        Velocities (m/s).
    """
    if rows is None:
        rows = np.arange(next(iter(phys.values())).shape[0]) if phys else np.arange(1)
    epoch = model.data.epoch
    t_rel = model.t if t is None else np.asarray(t, float) - epoch
    if not model.companions:
        return np.zeros((rows.size, t_rel.size))
    arr = {f: np.column_stack([np.asarray(phys[f"{c.label}.{f}"], float)[rows]
                               for c in model.companions])
           for f in ("period", "tp", "ecc", "omega", "K")}  # fmt: skip
    arr["tp_rel"] = arr.pop("tp") - epoch
    if model.dynamics != "keplerian":  # a column of phys, or the start value
        start = model.start_physical()
        n = arr["period"].shape[0]
        arr["dynamics"] = np.column_stack([
            np.asarray(phys[key], float)[rows] if key in phys else np.full(n, start[key])
            for key in (f"dynamics.{p.name}" for p in model.dynamics_parameters)
        ])  # fmt: skip
    return orbit_velocity(model, arr, t_rel)


def orbit_velocity(model: SystemModel, arr: dict, t_rel: np.ndarray | None = None) -> np.ndarray:
    """Sum of the companions' Keplerian curves, (n_sets, n_times), from the matrices of
    :meth:`SystemModel.orbit_arrays` (rows already chosen), at the times ``t_rel``
    (minus the epoch; default the data's): the likelihood's path, free of any round
    trip through absolute times.

    Parameters
    ----------
    model : SystemModel
        The model (its star and dynamics).
    arr : dict
        The orbit arrays.
    t_rel : ndarray, optional
        Times minus the epoch (days).

    Returns
    -------
    ndarray, shape (n_sets, n_times)
        Velocities (m/s).
    """
    t = model.t if t_rel is None else np.asarray(t_rel, float)
    if model.dynamics != "keplerian":
        from rvkep.nbody import orientation, star_velocity_rows

        columns = {f"dynamics.{p.name}": arr["dynamics"][:, k]
                   for k, p in enumerate(model.dynamics_parameters)}  # fmt: skip
        inc, node = orientation(columns, model.labels())
        return star_velocity_rows(t, arr, model.star.mass, inc, node)
    out = np.zeros((next(iter(arr.values())).shape[0], t.size))
    for ci in range(len(model.companions)):
        w = arr["omega"][:, ci]
        out += rv_rows(t, arr["tp_rel"][:, ci], 2.0 * np.pi / arr["period"][:, ci],
                       arr["ecc"][:, ci], np.cos(w), np.sin(w), arr["K"][:, ci])  # fmt: skip
    return out
