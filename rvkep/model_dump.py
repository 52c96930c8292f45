"""A system model as plain values: the canonical dump checkpoints are keyed on, and
the model.json record (everything but the data and the star) it is rebuilt from.

:meth:`rvkep.model.SystemModel.canonical`, ``to_dict`` and ``from_dict`` are these.
"""

from __future__ import annotations

import hashlib
import math
from dataclasses import replace
from typing import TYPE_CHECKING

import numpy as np

from rvkep.components import Companion, Instrument, dynamics_parameters
from rvkep.data import RVData
from rvkep.physics import StarProperties
from rvkep.priors import Prior

if TYPE_CHECKING:
    from rvkep.model import SystemModel

__all__ = ["canonical", "to_dict", "from_dict"]


def canonical(model: SystemModel) -> dict:
    """A canonical description of everything that shapes the posterior: every
    companion's priors (fixed values included), every instrument's jitter prior,
    the trend degree, the noise model and a digest of the data. Equal dumps mean
    the same posterior; checkpoints are keyed on it.

    Parameters
    ----------
    model : SystemModel
        The model.

    Returns
    -------
    dict
        JSON-able; sorted keys make equal models dump equal text.
    """
    h = hashlib.sha256()
    d = model.data
    for arr in (d.time, d.rv, d.err):
        h.update(np.ascontiguousarray(arr, dtype=float).tobytes())
    h.update("\x1f".join(map(str, d.instrument)).encode())
    h.update(repr(float(d.epoch)).encode())
    return {
        "companions": [c.canonical() for c in model.companions],
        "instruments": [i.canonical() for i in model.instruments],
        "trend": model.trend,
        "noise": model.noise,
        **({"decorrelate": list(model.decorrelate)} if model.decorrelate else {}),
        **(
            {"noise_parameters": [p.canonical() for p in model.noise_parameters]}
            if model.noise_parameters
            else {}
        ),
        **(
            {"dynamics": model.dynamics,
             "dynamics_parameters": [p.canonical() for p in model.dynamics_parameters]}
            if model.dynamics != "keplerian"
            else {}
        ),  # fmt: skip
        "linear": "marginalized, flat",
        "data_sha256": h.hexdigest(),
    }

def to_dict(model: SystemModel) -> dict:
    """Everything but the data and the star, as plain JSON-able values (priors,
    start values, trend, noise model, decorrelation): :func:`from_dict` rebuilds
    the same model on the same data.

    Parameters
    ----------
    model : SystemModel
        The model.

    Returns
    -------
    dict
        JSON-able description.
    """

    def start(values: dict) -> dict:
        return {k: float(v) for k, v in values.items()}

    return {
        "companions": [{**c.canonical(), "start": start(c.start)} for c in model.companions],
        "instruments": [
            {**i.canonical(), "start_jitter": float(i.start_jitter)} for i in model.instruments
        ],  # fmt: skip
        "trend": model.trend,
        "noise": model.noise,
        "noise_parameters": [
            {**p.canonical(), "start": float(p.start)} for p in model.noise_parameters
        ],  # fmt: skip
        "decorrelate": list(model.decorrelate),
        "dynamics": model.dynamics,
        "dynamics_parameters": [
            {**p.canonical(), "start": float(p.start)} for p in model.dynamics_parameters
        ],  # fmt: skip
    }

def from_dict(
    cls: type[SystemModel], d: dict, data: RVData, star: StarProperties | None = None
) -> SystemModel:
    """The model :func:`to_dict` described, bound to ``data``.

    Parameters
    ----------
    cls : type
        :class:`SystemModel` (or a subclass).
    d : dict
        What :func:`to_dict` wrote.
    data : RVData
        The velocities to bind it to.
    star : StarProperties, optional
        The star.

    Returns
    -------
    SystemModel
        The model.
    """
    from rvkep.noise import get_noise_model
    from rvkep.priors import prior_from_dict

    def prior(spec: dict, where: str) -> Prior:  # JSON keeps infinite bounds as such
        finite = {k: v for k, v in spec.items()
                  if not (isinstance(v, float) and not math.isfinite(v))}  # fmt: skip
        return prior_from_dict(finite, where)

    comps = [Companion(c["label"], *(prior(c[k], f"{c['label']}.{k}")
                                     for k in ("period", "tc", "K", "ecc")),
                       start=dict(c["start"]), steep=c.get("coordinates") == "steep")
             for c in d["companions"]]  # fmt: skip
    insts = [Instrument(i["name"], prior(i["jitter"], f"jitter.{i['name']}"),
                        float(i["start_jitter"])) for i in d["instruments"]]  # fmt: skip
    own = {p.name: p for p in get_noise_model(d["noise"]).parameters(data)}
    noise = [replace(own[p["name"]], prior=prior(p["prior"], f"noise.{p['name']}"),
                     start=float(p["start"])) for p in d["noise_parameters"]]  # fmt: skip
    kind = d.get("dynamics", "keplerian")
    mine = {p.name: p for p in dynamics_parameters(kind)}
    dyn = [replace(mine[p["name"]], prior=prior(p["prior"], f"dynamics.{p['name']}"),
                   start=float(p["start"]))
           for p in d.get("dynamics_parameters", [])]  # fmt: skip
    return cls(data, comps, insts, int(d["trend"]), star, noise=d["noise"],
               noise_parameters=noise, decorrelate=tuple(d["decorrelate"]),
               dynamics=kind,
               dynamics_parameters=dyn if kind != "keplerian" else None)  # fmt: skip
