"""Noise models as plug-ins: each is one file with a
:class:`~rvkep.noise.base.NoiseModel` subclass, registered in :data:`NOISE_MODELS` by
name (loaded on first use). A :class:`~rvkep.model.SystemModel` names its noise model
(``noise="white"``); the likelihood, the search's weights and the start grids all ask
it for the effective variances and the log-likelihood.

Adding a noise model is one new file plus one line here.
"""

from __future__ import annotations

import importlib
from typing import TYPE_CHECKING

if TYPE_CHECKING:
    from rvkep.noise.base import NoiseModel, NoiseParameter


__all__ = [
    "NoiseModel",
    "NoiseParameter",
    "NOISE_MODELS",
    "get_noise_model",
    "default_noise_model",
    "available_noise_models",
]

#: name -> "module:class"
NOISE_MODELS = {
    "white": "rvkep.noise.white:WhiteNoise",
    "gp": "rvkep.noise.gp:QuasiPeriodicGP",
    "night": "rvkep.noise.night:NightNoise",
}

_INSTANCES: dict[str, NoiseModel] = {}


def default_noise_model(data) -> str:
    """The noise model a run uses when none is asked for: ``night`` when an instrument
    has dense nights (:func:`rvkep.noise.night.dense_instruments`), else ``white``.

    Parameters
    ----------
    data : RVData
        The velocities.

    Returns
    -------
    str
        The noise model's name.
    """
    from rvkep.noise.night import dense_instruments

    return "night" if dense_instruments(data) else "white"


def available_noise_models() -> list[str]:
    """The registered noise models' names.

    Returns
    -------
    list of str
        In registration order.
    """
    return list(NOISE_MODELS)


def get_noise_model(name: str) -> NoiseModel:
    """The noise model registered as ``name`` (one shared, stateless instance).

    Parameters
    ----------
    name : str
        A registered name.

    Returns
    -------
    NoiseModel
        The model.
    """
    if name not in _INSTANCES:
        try:
            module, cls = NOISE_MODELS[name].split(":")
        except KeyError:
            raise ValueError(
                f"unknown noise model {name!r}; available: {', '.join(NOISE_MODELS)}"
            ) from None
        _INSTANCES[name] = getattr(importlib.import_module(module), cls)()
    return _INSTANCES[name]


def __getattr__(name: str):
    # the base classes load on first use: the registry's names alone (the command
    # line's choices) need no numpy
    if name in ('NoiseModel', 'NoiseParameter'):
        return getattr(importlib.import_module("rvkep.noise.base"), name)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
