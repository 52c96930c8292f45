"""Posterior sampling with emcee: automatic convergence, exact resume, progress.

The driver runs emcee's :class:`~emcee.EnsembleSampler` in vectorized mode on the
model's log-posterior (offsets and trend marginalized). Walkers start in a small ball
around the best fit, scaled by the local curvature of the posterior and all inside
the prior.

Convergence (Goodman & Weare 2010; emcee's integrated autocorrelation time): every
``check_every`` steps the integrated autocorrelation time tau of every parameter is
estimated; the run stops when the chain is longer than ``tau_factor`` (50) times the
largest tau and every tau changed by less than ``tau_rtol`` (5%) since the last check,
or at ``max_steps``. A burn-in of ``burn_factor`` (3) x tau is discarded and the chain
thinned by tau / 2. A run stopped by the cap is flagged ``converged = False`` and
warned about loudly.

Checkpoints use emcee's HDF5 file layout (:class:`emcee.backends.HDFBackend`), but
steps are buffered in memory and written in one go at every check (writing each step
costs more than the likelihood): a kill loses at most one chunk. Each flush stores the
random-number state after its last step and the iteration count, so a resumed run
continues exactly where the file ends and, with the same seed, produces the same chain
as an uninterrupted one (checks happen at the same global step numbers).

References
----------
.. [1] Foreman-Mackey, D. et al. (2013), PASP 125, 306 (emcee).
.. [2] Goodman, J. & Weare, J. (2010), CAMCoS 5, 65.
.. [3] ter Braak, C. J. F. & Vrugt, J. A. (2008), Stat. Comput. 18, 435 (differential
   evolution moves).
"""

from __future__ import annotations

import contextlib
import math
import sys
import warnings
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from rvkep.checkpoints import (
    BufferedHDFBackend,
    CheckpointNotice,
    CheckpointWriteError,
    checkpoint_key,
    open_checkpoint,
    store_key,
)
from rvkep.errors import RvkepError
from rvkep.likelihood import LogPosterior
from rvkep.model import SystemModel
from rvkep.moves import MOVES, moves

__all__ = [
    "SamplerOptions",
    "SamplingResult",
    "UnconvergedWarning",
    "BufferedHDFBackend",
    "CheckpointNotice",
    "CheckpointWriteError",
    "checkpoint_key",
    "run_sampler",
    "sample",
    "initial_ball",
    "steep_coordinates",
    "MOVES",
]


class UnconvergedWarning(UserWarning):
    """The chain stopped at the step cap before meeting the convergence criterion."""


@dataclass
class SamplerOptions:
    """Settings of one sampling run (defaults suit a typical RV posterior)."""

    walkers: int | None = None  # default: max(32, 4 ndim), even
    max_steps: int = 30_000
    check_every: int = 500
    tau_factor: float = 50.0
    tau_rtol: float = 0.05
    burn_factor: float = 3.0
    moves: str = "de"
    seed: int | None = 0
    progress: bool | None = None  # None: only on a terminal
    checkpoint: str | Path | None = None
    resume: bool = True
    # a companion whose start eccentricity is at least this is sampled in the steep
    # coordinates (rvkep.model); None: never
    steep_eccentricity: float | None = 0.5

    def n_walkers(self, ndim: int) -> int:
        """The number of walkers for ``ndim`` parameters: ``walkers`` if given, else
        max(32, 4 ndim); always even (emcee's stretch and DE moves split the ensemble
        in two halves)."""
        n = self.walkers or max(32, 4 * ndim)
        return n + n % 2


@dataclass
class SamplingResult:
    """The chain and its diagnostics.

    ``chain`` is the full chain (steps, walkers, ndim); ``flat`` the samples kept after
    burn-in and thinning, with their log-posterior in ``flat_log_prob``.
    """

    model: SystemModel
    chain: np.ndarray
    log_prob: np.ndarray
    tau: np.ndarray
    acceptance: np.ndarray
    converged: bool
    burn: int
    thin: int
    seconds: float
    moves: str
    history: list[tuple[int, float]] = field(default_factory=list)  # (step, max tau)
    fit: object | None = None  # the best fit it started from (FitResult.sample sets it)
    # the model whose coordinates the walkers moved in, one per column of tau (None:
    # ``model`` itself; another when a steep orbit had its own: steep_coordinates)
    sampled_model: SystemModel | None = None

    def posterior(self, rng: np.random.Generator | int | None = 0):
        """The kept samples in physical parameters, offsets and trend drawn back
        (:meth:`rvkep.posterior.PosteriorSamples.from_chain`)."""
        from rvkep.posterior import PosteriorSamples

        return PosteriorSamples.from_chain(self.model, self.flat, self.flat_log_prob, rng=rng)

    @property
    def steps(self) -> int:
        return int(self.chain.shape[0])

    @property
    def walkers(self) -> int:
        return int(self.chain.shape[1])

    @property
    def flat(self) -> np.ndarray:
        return self.chain[self.burn :: self.thin].reshape(-1, self.chain.shape[2])

    @property
    def flat_log_prob(self) -> np.ndarray:
        return self.log_prob[self.burn :: self.thin].reshape(-1)

    @property
    def effective_samples(self) -> float:
        """Post-burn-in steps x walkers / max tau."""
        return float((self.steps - self.burn) * self.walkers / max(np.max(self.tau), 1.0))

    def diagnostics(self) -> dict:
        moved = self.sampled_model or self.model
        return {
            "walkers": self.walkers,
            "steps": self.steps,
            "autocorr_steps": float(np.max(self.tau)),
            "autocorr_by_parameter": dict(zip(moved.names, map(float, self.tau), strict=True)),
            "steep_coordinates": [c.label for c in moved.companions if c.steep],
            "converged": bool(self.converged),
            "burn_in": self.burn,
            "thin": self.thin,
            "acceptance_mean": float(np.mean(self.acceptance)),
            "acceptance_min": float(np.min(self.acceptance)),
            "effective_samples": self.effective_samples,
            "seconds": self.seconds,
            "moves": self.moves,
            "criterion": "steps > 50 tau_max and tau stable to 5% between checks",
        }


def initial_ball(
    post: LogPosterior, center: np.ndarray, n: int, rng: np.random.Generator, scale=None
) -> np.ndarray:
    """n starting points near ``center``, all with finite log-posterior.

    Offsets along each coordinate are 0.1 x its curvature scale (the local posterior
    width), reflected into the coordinate's bounds (a best fit on a bound, such as a
    noise amplitude of zero, starts its walkers on the inside), redrawn until every
    walker is inside the prior.

    Parameters
    ----------
    post : LogPosterior
        The posterior.
    center : ndarray, shape (ndim,)
        The best fit.
    n : int
        Number of points.
    rng : numpy.random.Generator
        Random numbers.
    scale : ndarray, optional
        Width per coordinate (default: the curvature scales).

    Returns
    -------
    ndarray, shape (n, ndim)
        The starting points.
    """
    from rvkep.likelihood import curvature_scales

    b = post.model.coordinate_bounds()
    lo = np.array([x[0] if x[0] is not None else -np.inf for x in b])
    hi = np.array([x[1] if x[1] is not None else np.inf for x in b])
    if scale is None:
        scale = curvature_scales(post, center, lo, hi)
    if not np.isfinite(post(center[None, :])[0]):
        raise RvkepError("the sampler's starting point is outside the prior")

    def draw(k: int) -> np.ndarray:
        x = center + 0.1 * scale * rng.standard_normal((k, center.size))
        x = np.where(x < lo, 2 * lo - x, x)
        return np.where(x > hi, 2 * hi - x, x)

    out = draw(n)
    for _ in range(100):
        bad = ~np.isfinite(post(out))
        if not bad.any():
            return out
        out[bad] = draw(int(bad.sum()))
    raise RvkepError("could not place the walkers inside the prior around the best fit")


@contextlib.contextmanager
def _interrupt_between_steps():
    """Turn Ctrl-C into a KeyboardInterrupt at the next step boundary of the loop.

    emcee prints a traceback for any exception raised inside the log-posterior (and a
    signal arriving during an HDF5 write would leave a half-written step), so while the
    sampler runs a SIGINT only sets a flag; the loop calls the yielded function after
    each step, which raises KeyboardInterrupt once the flag is set. Only the main
    thread can install signal handlers; elsewhere (a Dask worker thread) and where
    SIGINT is ignored this does nothing.
    """
    import signal
    import threading

    hit = []
    previous = None
    if threading.current_thread() is threading.main_thread():
        previous = signal.getsignal(signal.SIGINT)
        if previous in (signal.SIG_IGN, None):
            previous = None
        else:
            signal.signal(signal.SIGINT, lambda signum, frame: hit.append(signum))

    def check():
        if hit:
            raise KeyboardInterrupt

    try:
        yield check
    finally:
        if previous is not None:
            signal.signal(signal.SIGINT, previous)


def _autocorr(chain: np.ndarray, c: float = 5.0) -> np.ndarray:
    """Integrated autocorrelation time of each parameter of ``chain`` (steps, walkers,
    ndim): emcee's estimator (``emcee.autocorr.integrated_time(chain, tol=0)``: each
    walker's normalized autocorrelation function by FFT, averaged over the walkers and
    summed up to Sokal's automatic window of ``c`` tau), with one real FFT over all the
    walkers of a parameter instead of a complex one per walker: the same values to
    rounding, 1.7-4x faster (the checks of the stopping rule rerun it on the whole chain).

    References
    ----------
    .. [1] Sokal, A. (1997), in Functional Integration: Basics and Applications, NATO
       ASI Series B 361, p. 131 (the automatic window).
    .. [2] Foreman-Mackey, D. et al. (2013), PASP 125, 306 (emcee).
    """
    n_t, _, n_d = chain.shape
    n = 1 << max(int(n_t - 1).bit_length(), 0)  # emcee's next_pow_two(n_t)
    out = np.empty(n_d)
    with np.errstate(invalid="ignore", divide="ignore"):
        for d in range(n_d):
            x = np.array(chain[:, :, d].T, dtype=float)  # (walkers, steps), contiguous
            x -= x.mean(axis=1, keepdims=True)
            f = np.fft.rfft(x, n=2 * n, axis=1)
            acf = np.fft.irfft(f.real**2 + f.imag**2, n=2 * n, axis=1)[:, :n_t]
            taus = 2.0 * np.cumsum((acf / acf[:, :1]).mean(axis=0)) - 1.0
            window = np.arange(n_t) < c * taus
            out[d] = taus[np.argmin(window) if window.any() else n_t - 1]
    return out


def _progress(total: int, initial: int, enabled: bool | None):
    if enabled is None:
        enabled = sys.stderr.isatty()
    if not enabled:
        return None
    from tqdm.auto import tqdm

    return tqdm(total=total, initial=initial, desc="sampling", unit="step", leave=False)


def run_sampler(model: SystemModel, start: np.ndarray, options: SamplerOptions | None = None,
                *, posterior: LogPosterior | None = None) -> SamplingResult:  # fmt: skip
    """Sample the posterior of ``model`` from a best-fit vector ``start``.

    With ``options.checkpoint`` set, steps go to that HDF5 file; if the file holds a
    chain of the same model and settings (:func:`checkpoint_key`: priors, fixed values,
    trend, noise model, instruments, data, walkers, seed, moves, stopping rule) and
    ``options.resume`` is true, the run continues from it; any other chain there is
    replaced by a new one (a :class:`CheckpointNotice` says so).
    KeyboardInterrupt flushes the completed steps to the file and is re-raised.

    Parameters
    ----------
    model : SystemModel
        The model to sample.
    start : ndarray
        A best-fit parameter vector of ``model`` (the walkers start in a ball about it).
    options : SamplerOptions, optional
        Walkers, steps, stopping rule, seed, moves, checkpoint (default: the defaults).
    posterior : LogPosterior, optional
        The log-posterior of ``model`` when the caller built it already (the samplers'
        interface, :mod:`rvkep.samplers`).

    Returns
    -------
    SamplingResult
        The chain in ``model``'s coordinates, its autocorrelation times, acceptance,
        burn-in, thinning and whether it converged.
    """
    import time

    import emcee

    opts = options or SamplerOptions()
    post = posterior if posterior is not None else LogPosterior(model)
    if post.model is not model:
        raise ValueError("the posterior belongs to another model")
    caller = model
    model, start, post = steep_coordinates(post, start, opts.steep_eccentricity)
    ndim = model.ndim
    if ndim == 0:
        raise RvkepError("nothing to sample: every parameter is fixed")
    nwalkers = opts.n_walkers(ndim)
    rng = np.random.default_rng(opts.seed)
    backend, stored = _checkpoint(model, post, opts, nwalkers)
    sampler = emcee.EnsembleSampler(
        nwalkers, ndim, post, vectorize=True, moves=moves(opts.moves), backend=backend
    )
    state, chains, logps = _start(sampler, post, start, nwalkers, rng, stored)
    steps = chains[0].shape[0] if chains else 0
    history: list = []
    bar = _progress(opts.max_steps, steps, opts.progress)
    t0 = time.perf_counter()
    with _interrupt_between_steps() as interrupted:
        state, steps, converged = _steps(
            sampler, state, steps, False, None, chains, logps, history, backend,
            bar, opts, nwalkers, ndim, interrupted,
        )  # fmt: skip
    return _result(caller, model, sampler, backend, chains, logps, converged, opts,
                   time.perf_counter() - t0, history)  # fmt: skip


def _result(caller, model, sampler, backend, chains, logps, converged, opts, seconds, history):
    """The sampling result from the chain's pieces, in the caller's coordinates, with the
    burn-in and thinning from the autocorrelation times; warns when not converged."""
    chain = np.concatenate(chains)
    log_prob = np.concatenate(logps)
    tau = _autocorr(chain)
    if backend is not None:
        acceptance = backend.accepted / max(backend.iteration, 1)
    else:
        acceptance = sampler.acceptance_fraction
    burn = min(int(math.ceil(opts.burn_factor * np.max(tau))), chain.shape[0] // 2)
    thin = max(1, int(0.5 * np.min(tau)))
    if not converged:
        _warn_unconverged(chain.shape[0], opts.tau_factor * np.max(tau), opts.tau_factor)
    if model is not caller:  # back to the caller's coordinates, density and all
        chain, log_prob = _recoordinate(model, caller, chain, log_prob)
    return SamplingResult(
        caller, chain, log_prob, tau, np.asarray(acceptance, float), converged, burn, thin,
        seconds, opts.moves, history, sampled_model=model,
    )  # fmt: skip


def _start(sampler, post, start, nwalkers, rng, stored):
    """The walkers' first state and the steps so far: a ball about ``start`` (and the
    sampler's random state from ``rng``), or the checkpoint's steps, last state and
    random state, read once while checked."""
    if stored is None:
        state = initial_ball(post, start, nwalkers, rng)
        sampler.random_state = np.random.RandomState(rng.integers(2**31)).get_state()
        return state, [], []
    chain, logp, state = stored
    return state, [chain], [logp]


def _checkpoint(model: SystemModel, post: LogPosterior, opts: SamplerOptions, nwalkers: int):
    """The buffered HDF5 backend of ``opts.checkpoint`` and the chain it already holds
    (None without a checkpoint, or when it holds none of this run: see
    :func:`rvkep.checkpoints.open_checkpoint`)."""
    if opts.checkpoint is None:
        return None, None
    path = Path(opts.checkpoint)
    path.parent.mkdir(parents=True, exist_ok=True)
    if path.exists() and not opts.resume:
        path.unlink()
    key, key_text = checkpoint_key(model, opts, nwalkers)
    backend, stored = open_checkpoint(path, key, post, nwalkers, model.ndim)
    if not backend.initialized:
        backend.reset(nwalkers, model.ndim)
        store_key(backend, key, key_text)
    return backend, stored


def _warn_unconverged(steps: int, needed: float, tau_factor: float) -> None:
    warnings.warn(
        f"the chain did NOT converge in {steps} steps: it needs more than "
        f"{tau_factor:g} x tau = {needed:.0f} steps with a "
        "stable tau. Treat the results as preliminary; raise max_steps.",
        UnconvergedWarning,
        stacklevel=4,
    )


def _recoordinate(src: SystemModel, dst: SystemModel, chain, log_prob):
    """A chain of ``src``'s coordinates as ``dst``'s (the same physical points) and
    its log posterior as a density in ``dst``'s coordinates."""
    flat = chain.reshape(-1, chain.shape[-1])
    arr = src.orbit_arrays(flat)
    out = dst.from_physical(src.as_dict(arr)).reshape(chain.shape)
    ecc = arr["ecc"]
    shift = dst.coordinate_log_jacobian(ecc) - src.coordinate_log_jacobian(ecc)
    return out, log_prob + shift.reshape(log_prob.shape)


def steep_coordinates(post, start: np.ndarray, threshold: float | None):
    """(model, start, posterior) to sample: with every eccentric companion whose
    eccentricity at ``start`` is at least ``threshold`` in the steep-orbit coordinates
    (:mod:`rvkep.model`: the same posterior, sampled where it is close to Gaussian),
    the start mapped to them and the posterior rebuilt alike; unchanged when none
    qualifies, ``threshold`` is None, or ``post`` is not a :class:`LogPosterior` with
    its prior (a likelihood alone, flat in whatever coordinates are sampled, would
    be another distribution in others).

    Parameters
    ----------
    post : LogPosterior
        The posterior.
    start : ndarray
        The start in ``post``'s coordinates.
    threshold : float or None
        The eccentricity from which the steep coordinates are used.

    Returns
    -------
    model : SystemModel
        The model sampled.
    start : ndarray
        The start in its coordinates.
    post : LogPosterior
        Its posterior.
    """
    from dataclasses import replace

    model = post.model
    if threshold is None or not isinstance(post, LogPosterior) or not post.include_prior:
        return model, start, post
    phys = model.to_physical(np.asarray(start, float)[None, :])
    turn = [not c.circular and not c.steep and phys[f"{c.label}.ecc"][0] >= threshold
            for c in model.companions]  # fmt: skip
    if not any(turn):
        return model, start, post
    comps = [replace(c, steep=True) if t else c
             for c, t in zip(model.companions, turn, strict=True)]  # fmt: skip
    steep = replace(model, companions=comps)
    new = LogPosterior(steep, linear=post.linear, noise=post.noise,
                       include_prior=post.include_prior)  # fmt: skip
    return steep, steep.from_physical(phys)[0], new


def _steps(sampler, state, steps, converged, tau_prev, chains, logps, history, backend, bar,
           opts, nwalkers, ndim, interrupted):  # fmt: skip
    """The sampling loop of :func:`run_sampler`: blocks of steps up to each check,
    flushed to the checkpoint, until converged or at the cap. Appends to ``chains``,
    ``logps`` and ``history``; returns (state, steps, converged)."""
    try:
        # replay the checks of the part already done so the stopping rule matches
        if steps:
            full = np.concatenate(chains)
            for s in range(opts.check_every, steps + 1, opts.check_every):
                tau = _autocorr(full[:s])
                history.append((s, float(np.max(tau))))
                converged = _converged(tau, tau_prev, s, opts)
                tau_prev = tau
            if converged:
                steps = opts.max_steps  # already done
        while steps < opts.max_steps and not converged:
            n = min(opts.check_every - steps % opts.check_every, opts.max_steps - steps)
            block_c = np.empty((n, nwalkers, ndim))
            block_l = np.empty((n, nwalkers))
            for i, st in enumerate(sampler.sample(state, iterations=n)):
                block_c[i] = st.coords
                block_l[i] = st.log_prob
                if bar is not None and (i % 25 == 24 or i == n - 1):
                    bar.update(25 if i % 25 == 24 else (i % 25) + 1)
                interrupted()
            state = st
            if backend is not None:
                backend.flush()
            chains.append(block_c)
            logps.append(block_l)
            steps += n
            if steps % opts.check_every == 0 or steps >= opts.max_steps:
                full = np.concatenate(chains)
                tau = _autocorr(full)
                history.append((steps, float(np.max(tau))))
                converged = _converged(tau, tau_prev, steps, opts)
                tau_prev = tau
                if bar is not None:
                    bar.set_postfix(
                        tau=f"{np.max(tau):.0f}", need=f"{opts.tau_factor * np.max(tau):.0f}"
                    )
    except KeyboardInterrupt:
        if backend is not None:
            backend.flush()  # every completed step is kept
        raise
    finally:
        if bar is not None:
            bar.close()
    return state, steps, converged


def _converged(tau, tau_prev, steps, opts) -> bool:
    if tau_prev is None or not np.all(np.isfinite(tau)):
        return False
    long_enough = steps > opts.tau_factor * np.max(tau)
    stable = np.all(np.abs(tau - tau_prev) / tau < opts.tau_rtol)
    return bool(long_enough and stable)


def sample(fit, **options) -> SamplingResult:
    """Sample the posterior from a best fit (``fit.sample(**options)``); the options
    are those of :class:`SamplerOptions`.

    Parameters
    ----------
    fit : FitResult
        The best fit.
    **options
        :class:`SamplerOptions` fields.

    Returns
    -------
    SamplingResult
        The chains and the posterior.
    """
    return fit.sample(**options)
