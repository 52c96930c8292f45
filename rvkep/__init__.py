"""rvkep: Keplerian orbit fitting of stellar radial-velocity time series.

The main steps are importable from here; each is loaded on first use, so that
``import rvkep`` (and ``rvkep --help``) stays fast:

>>> import rvkep
>>> sorted(set(rvkep.__all__) - {"__version__"})  # doctest: +NORMALIZE_WHITESPACE
['Results', 'StarProperties', 'analyze', 'demo_files', 'fit', 'load_rv', 'population',
 'predict', 'sample', 'search']

A notebook chains them: ``rvkep.search(data).best_fit.sample(seed=1)`` gives a
:class:`~rvkep.sampling.SamplingResult`, ``.posterior()`` its samples, and
``rvkep.Results.from_sampling(run, star=...)`` the summaries and derived masses.
"""

from __future__ import annotations

__version__ = "0.1.0"
__all__ = [
    "__version__", "load_rv", "search", "fit", "sample", "analyze", "Results", "predict",
    "StarProperties", "demo_files", "population",
]  # fmt: skip

# name -> (module, attribute)
_LAZY = {
    "load_rv": ("rvkep.reading", "load_rv"),
    "search": ("rvkep.period_search", "search"),
    "fit": ("rvkep.optimize", "fit_orbits"),
    "sample": ("rvkep.sampling", "sample"),
    "analyze": ("rvkep.pipeline", "analyze"),
    "Results": ("rvkep.results", "Results"),
    "predict": ("rvkep.prediction", "predict"),
    "StarProperties": ("rvkep.physics", "StarProperties"),
    "demo_files": ("rvkep.cli", "demo_files"),
    "population": ("rvkep.hierarchy", "run_population"),
}


def __getattr__(name: str):
    try:
        module, attr = _LAZY[name]
    except KeyError:
        raise AttributeError(f"module 'rvkep' has no attribute {name!r}") from None
    import importlib

    value = getattr(importlib.import_module(module), attr)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    # the public names only (not the submodules loaded so far, nor this file's imports)
    return sorted(__all__)


del annotations  # the __future__ import's name is not part of the package
