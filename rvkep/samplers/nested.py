"""Nested sampling (dynesty) as an rvkep sampler: weighted posterior samples and the
Bayesian evidence ln Z with its error.

The prior is drawn through the model's unit-cube transform
(:meth:`rvkep.model.SystemModel.prior_transform`: each prior's inverse CDF), the
likelihood is the model's with the offsets, trend and decorrelation terms marginalized
analytically under flat priors of unit density (m/s, m/s per year, ...). The evidence
is therefore defined up to a constant shared by every model with the same linear
parameters: differences of ln Z between numbers of companions (same instruments, same
trend) are proper Bayes factors; an absolute ln Z is not (common practice, no source).

Static nested sampling (Skilling 2004) with multi-ellipsoid bounds and random slice
proposals (dynesty; Speagle 2020), stopped when the remaining evidence is below
``dlogz`` (default 0.1 in ln Z). The samples come with their importance weights; every
output uses them (resampled to equal weights where a method needs that). With a
checkpoint file, dynesty's state is saved every 30 s and a rerun of the same model and
settings (keyed like the MCMC checkpoints) resumes it; any other run sets it aside.

RV posteriors are narrow islands in wide period priors, with alias and harmonic modes
around them; a nested run can miss the island and still return a confident-looking
ln Z. The driver checks: the highest likelihood it met must come within
``max(3, ndim / 2)`` of the likelihood at ``start`` (the best fit, found by the
optimizer); otherwise the run is flagged (``missed_mode``, not converged) and its
evidence is not to be trusted (more live points help). On the demo star, random-walk
proposals with 300 live points missed the two-companion mode by 240 in ln L and came
out 180 lower in ln Z; slice proposals found it.

References
----------
.. [1] Skilling, J. (2004), AIP Conf. Proc. 735, 395 (nested sampling).
.. [2] Speagle, J. S. (2020), MNRAS 493, 3132 (dynesty).
"""

from __future__ import annotations

import hashlib
import json
import time
import warnings
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from rvkep.samplers.base import Sampler, SampleSet

__all__ = ["NestedSampler", "NestedOptions"]

#: stand-in for ln L = -inf (dynesty wants finite values)
_FLOOR = -1e300


@dataclass
class NestedOptions:
    """Settings of a nested-sampling run."""

    live_points: int | None = None  # default: max(250, 25 x parameters)
    dlogz: float = 0.1  # stop when the evidence left in the live points is below this
    seed: int | None = 0
    progress: bool | None = None  # None: only on a terminal
    max_calls: int | None = None  # a cap on likelihood calls (None: none)
    checkpoint: str | Path | None = None  # dynesty's state, saved every 30 s; resumed

    def n_live(self, ndim: int) -> int:
        return self.live_points or max(250, 25 * ndim)


def _nested_options(options) -> NestedOptions:
    """NestedOptions from NestedOptions, from the emcee options (seed, progress), or
    defaults."""
    if isinstance(options, NestedOptions):
        return options
    if options is None:
        return NestedOptions()
    return NestedOptions(
        seed=getattr(options, "seed", 0), progress=getattr(options, "progress", None)
    )


class _LogLike:
    """The likelihood as dynesty calls it, one point at a time (picklable, so that
    dynesty's checkpoint can hold it)."""

    def __init__(self, like):
        self.like = like

    def __call__(self, x):
        value = float(self.like(x[None, :])[0])
        return value if np.isfinite(value) else _FLOOR


class _Transform:
    def __init__(self, model):
        self.model = model

    def __call__(self, u):
        return self.model.prior_transform(u)


def _key(model, opts: NestedOptions, linear: str) -> str:
    """Everything that changes a nested run's answer."""
    settings = {
        "model": model.canonical(),
        "linear": linear,
        "live": opts.n_live(model.ndim),
        "dlogz": opts.dlogz,
        "seed": opts.seed,
        "sample": "rslice",
        "bound": "multi",
    }
    text = json.dumps(settings, sort_keys=True, default=str)
    return hashlib.sha256(text.encode()).hexdigest()


def _restore(dynesty, path: Path, key: str):
    """The saved sampler at ``path`` when its key file says it ran this model, else
    None (a stale or damaged state is set aside, and said)."""
    key_path = path.with_name(path.name + ".key")
    if not path.exists():
        return None
    try:
        if not key_path.exists() or key_path.read_text().strip() != key:
            raise ValueError("it belongs to another model or other settings")
        return dynesty.NestedSampler.restore(str(path))
    except Exception as exc:  # noqa: BLE001 - anything a stale or damaged file raises
        from rvkep.sampling import CheckpointNotice

        kept = path.with_name(f"{path.name}.old-{time.strftime('%Y%m%d-%H%M%S')}")
        path.replace(kept)
        warnings.warn(f"{path}: not resumed ({exc}); kept as {kept.name}, starting afresh",
                      CheckpointNotice, stacklevel=3)  # fmt: skip
        return None


class NestedSampler(Sampler):
    """Static nested sampling with dynesty; adds ``ln_z`` and ``ln_z_err``."""

    name = "nested"

    def run(self, posterior, start: np.ndarray, options=None) -> SampleSet:
        """Sample ``posterior``'s model (``start`` is not needed: nested sampling draws
        from the prior). ``options``: :class:`NestedOptions` (or the emcee options,
        whose seed and progress are used)."""
        try:
            import dynesty
        except ImportError:
            from rvkep.errors import OptionError

            raise OptionError("nested sampling needs dynesty: pip install dynesty") from None
        import sys

        from rvkep.likelihood import LogPosterior

        opts = _nested_options(options)
        model = posterior.model
        ndim = model.ndim
        linear = getattr(posterior, "linear", "marginalize")
        like = LogPosterior(model, linear, include_prior=False)
        rng = np.random.default_rng(opts.seed)
        progress = sys.stderr.isatty() if opts.progress is None else bool(opts.progress)
        reference = float(like(np.atleast_2d(start))[0]) if start is not None else -np.inf
        t0 = time.perf_counter()
        path = Path(opts.checkpoint) if opts.checkpoint is not None else None
        key = _key(model, opts, linear)
        sampler = _restore(dynesty, path, key) if path is not None else None
        resumed = sampler is not None
        if sampler is None:
            sampler = dynesty.NestedSampler(_LogLike(like), _Transform(model), ndim,
                                            nlive=opts.n_live(ndim), bound="multi",
                                            sample="rslice", rstate=rng)  # fmt: skip
        if path is not None:
            path.with_name(path.name + ".key").write_text(key + "\n")
        with warnings.catch_warnings():  # resuming a finished run: nothing left to do
            warnings.filterwarnings("ignore", message="You are resuming a finished")
            sampler.run_nested(dlogz=opts.dlogz, print_progress=progress,
                               maxcall=opts.max_calls, resume=resumed,
                               checkpoint_file=None if path is None else str(path),
                               checkpoint_every=30)  # fmt: skip
        return _sample_set(model, sampler.results, opts, reference,
                           time.perf_counter() - t0, resumed)  # fmt: skip


def _sample_set(model, res, opts, reference: float, seconds: float, resumed: bool) -> SampleSet:
    """dynesty's results as weighted samples (weights summing to one, empty ones left
    out), ln Z, and the diagnostics: converged when the remaining evidence is below
    ``dlogz`` within the call cap and the best fit's likelihood was reached."""
    ndim = model.ndim
    theta = np.asarray(res.samples, float)
    logw = np.asarray(res.logwt, float) - float(res.logz[-1])
    weights = np.exp(logw - logw.max())
    weights /= weights.sum()
    with np.errstate(all="ignore"):
        log_prob = np.asarray(res.logl, float) + model.log_prior(theta)
    keep = weights > 0
    theta, log_prob, weights = theta[keep], log_prob[keep], weights[keep] / weights[keep].sum()
    ln_z, ln_z_err = float(res.logz[-1]), float(res.logzerr[-1])
    calls = int(np.sum(res.ncall))
    done = opts.max_calls is None or calls < opts.max_calls
    best_seen = float(np.max(res.logl))
    missed = bool(np.isfinite(reference) and best_seen < reference - max(3.0, ndim / 2))
    info = {
        "sampler": "nested (dynesty, static, multi-ellipsoid bounds, random slices)",
        "live_points": opts.n_live(ndim),
        "iterations": int(res.niter),
        "likelihood_calls": calls,
        "ln_z": ln_z,
        "ln_z_err": ln_z_err,
        "dlogz": opts.dlogz,
        "effective_samples": float(1.0 / np.sum(weights**2)),
        "seconds": seconds,
        "max_ln_l": best_seen,
        "start_ln_l": reference,
        "missed_mode": missed,
        "converged": bool(done and not missed),
        "criterion": f"remaining evidence below dlogz = {opts.dlogz:g}, and the best "
        "fit's likelihood reached",
        "resumed": resumed,
    }
    return SampleSet(model, theta, log_prob, weights, bool(done and not missed), info,
                     {"ln_z": ln_z, "ln_z_err": ln_z_err, "results": res})  # fmt: skip
