"""Samplers as plug-ins: each is one file with a :class:`~rvkep.samplers.base.Sampler`
subclass, registered in :data:`SAMPLERS` by name (loaded on first use).

Adding a sampler is one new file plus one line here.
"""

from __future__ import annotations

import importlib
from typing import TYPE_CHECKING

if TYPE_CHECKING:
    from rvkep.samplers.base import Sampler, SampleSet


__all__ = ["Sampler", "SampleSet", "SAMPLERS", "get_sampler", "available_samplers"]

#: name -> "module:class"
SAMPLERS = {
    "emcee": "rvkep.samplers.ensemble:EnsembleSampler",
    "nested": "rvkep.samplers.nested:NestedSampler",
}


def available_samplers() -> list[str]:
    """The registered samplers' names.

    Returns
    -------
    list of str
        In registration order.
    """
    return list(SAMPLERS)


def get_sampler(name: str) -> Sampler:
    """A new instance of the sampler registered as ``name``.

    Parameters
    ----------
    name : str
        A registered name.

    Returns
    -------
    Sampler
        The sampler.
    """
    try:
        module, cls = SAMPLERS[name].split(":")
    except KeyError:
        raise ValueError(f"unknown sampler {name!r}; available: {', '.join(SAMPLERS)}") from None
    return getattr(importlib.import_module(module), cls)()


def __getattr__(name: str):
    # the base classes load on first use: the registry's names alone (the command
    # line's choices) need no numpy
    if name in ('Sampler', 'SampleSet'):
        return getattr(importlib.import_module("rvkep.samplers.base"), name)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
