"""Samplers as plug-ins: each is one file with a :class:`~rvkep.samplers.base.Sampler`
subclass, registered in :data:`SAMPLERS` by name (loaded on first use).

Adding a sampler is one new file plus one line here.
"""

from __future__ import annotations

import importlib

from rvkep.samplers.base import Sampler, SampleSet

__all__ = ["Sampler", "SampleSet", "SAMPLERS", "get_sampler", "available_samplers"]

#: name -> "module:class"
SAMPLERS = {
    "emcee": "rvkep.samplers.ensemble:EnsembleSampler",
    "nested": "rvkep.samplers.nested:NestedSampler",
}


def available_samplers() -> list[str]:
    """The registered samplers' names."""
    return list(SAMPLERS)


def get_sampler(name: str) -> Sampler:
    """A new instance of the sampler registered as ``name``."""
    try:
        module, cls = SAMPLERS[name].split(":")
    except KeyError:
        raise ValueError(f"unknown sampler {name!r}; available: {', '.join(SAMPLERS)}") from None
    return getattr(importlib.import_module(module), cls)()
