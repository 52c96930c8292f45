"""Best fit (maximum a posteriori) with a global start search.

Local optimizers find the nearest optimum; RV posteriors have many (aliases, the
phase of eccentric orbits, the e-omega degeneracy at low e). The start search here
uses the fact that, at fixed period P, eccentricity e and time of periastron tp, the
Keplerian curve is LINEAR in (K cos omega, K sin omega):

    v = K cos omega (cos nu + e) - K sin omega sin nu,

so a grid over (e, tp) at each candidate period is solved by weighted least squares
together with the offsets and trend, exactly and cheaply. The best grid points start a
bounded quasi-Newton (L-BFGS-B) optimization of all parameters jointly, with gradients
by central differences evaluated in one vectorized call.

Companions are added one at a time (:func:`fit_companions`): each new one is searched
on the residuals of the previous best fit, then all are refined together.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace
from functools import partial

import numpy as np

from rvkep import defaults
from rvkep.data import RVData
from rvkep.likelihood import LogPosterior, curvature_scales
from rvkep.model import LABELS, SystemModel, default_companion, orbit_velocity
from rvkep.start_grid import grid_starts

__all__ = [
    "FitResult",
    "fit",
    "fit_orbits",
    "fit_companions",
]

@dataclass
class FitResult:
    """A best fit and its statistics.

    ``params`` holds physical values (``<label>.period``, ``.tc`` and ``.tp`` in the
    data's time system, ``.ecc``, ``.omega`` in radians, ``.K``, ``jitter.<inst>``,
    ``offset.<inst>``, ``trend.slope`` ...). ``log_likelihood`` is the maximum
    (offsets solved), ``n_free`` counts every fitted parameter including offsets and
    trend, and BIC = n_free ln n - 2 ln L, AIC = 2 n_free - 2 ln L.
    """

    model: SystemModel
    theta: np.ndarray
    params: dict[str, float]
    log_likelihood: float
    log_posterior: float
    chi2: float
    n_points: int
    n_free: int
    rms: dict[str, float]
    residuals: np.ndarray
    success: bool = True
    message: str = ""
    extra: dict = field(default_factory=dict)

    @property
    def bic(self) -> float:
        return self.n_free * math.log(self.n_points) - 2.0 * self.log_likelihood

    def sample(self, **options):
        """Sample the posterior from this fit: ``run_sampler(self.model, self.theta,
        SamplerOptions(**options))`` (walkers, max_steps, seed, checkpoint, progress,
        ...). The result remembers this fit (``.fit``)."""
        from rvkep.sampling import SamplerOptions, run_sampler

        result = run_sampler(self.model, self.theta, SamplerOptions(**options))
        result.fit = self
        return result

    @property
    def aic(self) -> float:
        return 2.0 * self.n_free - 2.0 * self.log_likelihood

    @property
    def n_companions(self) -> int:
        return len(self.model.companions)

    def summary(self) -> str:
        lines = [
            f"best fit: {self.n_companions} companion(s), ln L = {self.log_likelihood:.2f}, "
            f"chi2 = {self.chi2:.1f} for {self.n_points} points, BIC = {self.bic:.1f}, "
            f"AIC = {self.aic:.1f}"
        ]
        for c in self.model.companions:
            p = self.params
            L = c.label
            lines.append(
                f"  {L}: P = {p[f'{L}.period']:.5g} d, K = {p[f'{L}.K']:.4g} m/s, "
                f"e = {p[f'{L}.ecc']:.3f}, omega = {math.degrees(p[f'{L}.omega']):.1f} deg, "
                f"tc = {p[f'{L}.tc']:.4f}"
            )
        for name, r in self.rms.items():
            lines.append(
                f"  {name}: offset = {self.params[f'offset.{name}']:.2f} m/s, "
                f"jitter = {self.params[f'jitter.{name}']:.2f} m/s, rms = {r:.2f} m/s"
            )
        return "\n".join(lines)

    __str__ = summary


#: L-BFGS-B's relative tolerance on the objective for a final best fit (ln L to about
#: 1e-9 on the demo star) and for the trial fits that only rank candidate starts
#: (1e-9: ln L to about 1e-7, half the objective evaluations; the winner is then
#: polished at FTOL from where it stopped)
FTOL = 1e-13
SCREEN_FTOL = 1e-9


#: the bowl that turns the optimizer back outside the prior (see :func:`_value_and_grad`)
_PENALTY = 1e6
#: finite-difference step in the rescaled coordinates
_STEP = 1e-6


def _value_and_grad(post, gradient, x0, scale, ulo, uhi, last, u):
    """-ln posterior and its gradient at ``x0 + u * scale``, in the rescaled coordinates
    ``u``: analytic where ``gradient`` is given, else central differences with steps kept
    inside the bounds (one-sided at a bound). Outside the prior the value is a steep
    bowl around the last valid point ``last`` (updated here), so the line search backs
    off instead of stopping."""
    ndim = u.size
    if gradient is not None:
        f, g = gradient(x0 + u * scale)
        if not np.isfinite(f):
            d = u - last[0]
            return last[1] + _PENALTY * (1.0 + d @ d), 2.0 * _PENALTY * d
        last[0], last[1] = u.copy(), -f
        return -f, -g * scale
    pts = np.repeat(u[None, :], 2 * ndim + 1, axis=0)
    for j in range(ndim):
        pts[1 + 2 * j, j] = min(u[j] + _STEP, uhi[j])
        pts[2 + 2 * j, j] = max(u[j] - _STEP, ulo[j])
    vals = -post(x0 + pts * scale)
    f0 = vals[0]
    if not np.isfinite(f0):
        d = u - last[0]
        return last[1] + _PENALTY * (1.0 + d @ d), 2.0 * _PENALTY * d
    last[0], last[1] = u.copy(), f0
    grad = np.zeros(ndim)
    for j in range(ndim):
        fu, fd = vals[1 + 2 * j], vals[2 + 2 * j]
        hu, hd = pts[1 + 2 * j, j] - u[j], u[j] - pts[2 + 2 * j, j]
        if np.isfinite(fu) and np.isfinite(fd) and hu + hd > 0:
            grad[j] = (fu - fd) / (hu + hd)
        elif np.isfinite(fu) and hu > 0:
            grad[j] = (fu - f0) / hu
        elif np.isfinite(fd) and hd > 0:
            grad[j] = (f0 - fd) / hd
    return f0, grad


def _minimize(
    post: LogPosterior, theta0: np.ndarray, bounds, ftol: float = FTOL
) -> tuple[np.ndarray, float, bool, str]:
    """L-BFGS-B in coordinates rescaled by the local curvature, restarted once with
    scales re-measured at the first optimum. Gradients are analytic where the model
    allows (:meth:`LogPosterior.gradient_function`), else central differences."""
    from scipy.optimize import minimize

    ndim = theta0.size
    lo = np.array([b[0] if b[0] is not None else -np.inf for b in bounds])
    hi = np.array([b[1] if b[1] is not None else np.inf for b in bounds])
    gradient = post.gradient_function()  # analytic where the compiled pass applies
    x = theta0.copy()
    res = None
    for _ in range(2):
        scale = curvature_scales(post, x, lo, hi)
        x0 = x.copy()
        ulo, uhi = (lo - x0) / scale, (hi - x0) / scale
        last = [np.zeros(ndim), float(-post(x0[None, :])[0])]

        value_and_grad = partial(_value_and_grad, post, gradient, x0, scale, ulo, uhi, last)
        ubounds = [
            (None if not np.isfinite(a) else a, None if not np.isfinite(b) else b)
            for a, b in zip(ulo, uhi, strict=True)
        ]
        res = minimize(
            value_and_grad, np.zeros(ndim), jac=True, method="L-BFGS-B", bounds=ubounds,
            options={"maxiter": 3000, "ftol": ftol, "gtol": 1e-7},
        )  # fmt: skip
        x = np.clip(x0 + res.x * scale, lo, hi)
    fx = float(-post(x[None, :])[0])
    return x, fx, bool(res.success) and np.isfinite(fx), str(res.message)


def _result(model: SystemModel, theta: np.ndarray, success=True, message="") -> FitResult:
    prof = LogPosterior(model, linear="profile", include_prior=False)
    _, det = prof.evaluate(theta[None, :])
    logL = float(prof(theta[None, :])[0])
    logpost = float(LogPosterior(model, linear="profile")(theta[None, :])[0])
    phys = {k: float(v[0]) for k, v in det["phys"].items()}  # times in the data's system
    lin = prof.linear_parameters(theta[None, :])[0]
    for name, value in zip(model.linear_names, lin, strict=True):
        phys[name] = float(value)
    resid_centred = det["resid"][0] - model.design @ det["beta"][0]
    rms = {}
    for k, inst in enumerate(model.instruments):
        m = model.inst_index == k
        rms[inst.name] = float(np.sqrt(np.mean(resid_centred[m] ** 2)))
    return FitResult(
        model=model,
        theta=theta.copy(),
        params=phys,
        log_likelihood=logL,
        log_posterior=logpost,
        chi2=float(det["chi2"][0]),
        n_points=len(model.data),
        n_free=model.ndim + model.n_linear,
        rms=rms,
        residuals=resid_centred,
        success=success,
        message=message,
    )


def fit(
    model: SystemModel, starts: list[np.ndarray] | None = None, ftol: float = FTOL
) -> FitResult:
    """Best fit of ``model`` from one or several start vectors (default: its starts).

    Returns the best optimum found, by log-posterior (offsets solved). ``ftol`` is
    L-BFGS-B's relative tolerance on the objective (:data:`FTOL`; the trial fits of
    a candidate companion use :data:`SCREEN_FTOL`).

    Parameters
    ----------
    model : SystemModel
        The model.
    starts : list of ndarray, optional
        Start vectors in the sampled coordinates.
    ftol : float, optional
        Relative tolerance.

    Returns
    -------
    FitResult
        The best optimum.
    """
    post = LogPosterior(model, linear="profile")
    bounds = model.coordinate_bounds()
    starts = [model.start_theta()] if starts is None else starts
    best = None
    for theta0 in starts:
        theta0 = np.clip(
            theta0,
            [b[0] if b[0] is not None else -np.inf for b in bounds],
            [b[1] if b[1] is not None else np.inf for b in bounds],
        )
        x, fx, ok, msg = (
            _minimize(post, theta0, bounds, ftol)
            if model.ndim
            else (theta0, float(-post(theta0[None])[0]), True, "")
        )
        if best is None or fx < best[1]:
            best = (x, fx, ok, msg)
    x, fx, ok, msg = best
    return _result(model, x, ok, msg)


def _nearest_tc(tc_rel: float, period: float) -> float:
    """Shift a conjunction time by whole periods to the one nearest the epoch."""
    return tc_rel - period * round(tc_rel / period)


def fit_orbits(
    data: RVData,
    periods: list[list[float]] | list[float],
    *,
    trend: int = 0,
    base: SystemModel | None = None,
    period_range: tuple[float, float] | None = None,
    n_starts: int = 3,
) -> FitResult:
    """Best fit of ``data`` with one companion per entry of ``periods`` (a period, or
    a list of candidate periods); see :func:`fit_companions`. Chain ``.sample()``.

    Parameters
    ----------
    data : RVData
        The velocities.
    periods : list
        For each companion, a period or a list of candidate periods (days).
    trend : int, optional
        Trend degree.
    base : SystemModel, optional
        A model whose instruments, trend and star to keep.
    period_range : (float, float), optional
        Bounds of the period prior.
    n_starts : int, optional
        Grid starts per candidate.

    Returns
    -------
    FitResult
        The best fit.

    Examples
    --------
    >>> import rvkep
    >>> from rvkep.cli import demo_folder
    >>> folder = demo_folder()
    >>> data = rvkep.load_rv([folder / "kestrel.txt", folder / "osprey.csv"])
    >>> best = rvkep.fit(data, [143.0, 11.87])  # rvkep.fit is this function
    >>> print(f"{best.params['b.period']:.1f} d, {best.params['c.period']:.2f} d")
    143.4 d, 11.87 d
    """
    return fit_companions(data, periods, trend=trend, base=base, period_range=period_range,
                          n_starts=n_starts)  # fmt: skip


def fit_companions(
    data: RVData,
    periods: list[list[float]] | list[float],
    trend: int = 0,
    base: SystemModel | None = None,
    period_range: tuple[float, float] | None = None,
    n_starts: int = 3,
    previous: FitResult | None = None,
    specs: list | None = None,
) -> FitResult:
    """Best fit with one companion per entry of ``periods``, added one at a time.

    Parameters
    ----------
    data : RVData
    periods : list
        For each companion, a candidate period or a list of candidate periods (e.g.
        the top periodogram peaks); each candidate is tried with the grid starts.
    trend : int
        Trend degree.
    base : SystemModel, optional
        A model whose instruments, trend and star to keep (its companions are ignored).
    period_range : (float, float), optional
        Bounds of the default log-uniform period prior.
    n_starts : int
        Grid starts tried per candidate period.
    previous : FitResult, optional
        An existing fit whose companions are kept; ``periods`` then adds more.
    specs : list of rvkep.modelfile.CompanionSpec, optional
        Priors (and start values) per companion, from a model file; their start
        values are tried as one more start.

    Returns
    -------
    FitResult
        The best fit found.
    """
    if base is None:
        base = SystemModel(data, [], trend=trend)
    if previous is not None:
        current = previous
    else:
        current = fit(base.with_companions([]))
    for j, cand in enumerate(periods):
        cands = [cand] if np.isscalar(cand) else list(cand)
        spec = specs[j] if specs is not None else None
        current = _add_one(current, data, cands, period_range, n_starts, spec)
    return current


def _new_companion(data, label, P, start, period_range, spec):
    """A companion built from a start (tc in data time), default priors or ``spec``'s."""
    if spec is None:
        short = P < defaults.CIRCULAR_BELOW  # tidally circularized (rvkep.defaults)
        return default_companion(
            data, label, P, start["tc"], max(start["K"], 0.1),
            0.0 if short else start["ecc"], start["omega"], period_range, circular=short,
        )  # fmt: skip
    ecc = 0.0 if spec.ecc is not None and spec.ecc.is_fixed else start["ecc"]
    full = {
        "period": P,
        "tc": start["tc"],
        "K": max(start["K"], 0.1),
        "ecc": ecc,
        "omega": start["omega"],
    }
    return replace(spec, label=label, start=full).build(data, period_range)


#: candidate periods fitted in full per new companion; the rest are ranked out by the
#: exact linear (e, tp) grid, which costs a few milliseconds per period
MAX_FULL_FITS = 5
#: two periods whose best joint fits differ by less than this in ln L are ambiguous
#: (a likelihood ratio below e^3 = 20; common practice, no source)
AMBIGUOUS_DLNL = 3.0


#: a candidate period whose best linear-grid chi-square is worse than the best
#: period's by more than this is not fitted in full: the grid's chi-square bounds its
#: fit from above, and closing a gap of 50 (a likelihood ratio of e^25) would need the
#: full fit to gain more there than the grid's coarseness in e and phase allows (the
#: demo star's model choice: 138 -> 75 full fits over its three trend degrees, every
#: comparison's ln L the same to 1e-4)
GRID_SCREEN_DCHI2 = 50.0


def _grid_by_period(data, resid, weights, design, periods, n_starts, keep):
    """Grid starts of the ``keep`` periods whose best linear-grid chi2 is lowest (and
    within :data:`GRID_SCREEN_DCHI2` of the lowest), as (period, starts) in the given
    order (each period's grid is solved once)."""
    grids = [(P, grid_starts(data, resid, weights, design, float(P), n_best=n_starts))
             for P in periods]  # fmt: skip
    chi2 = np.array([g[0]["chi2"] for _, g in grids])
    order = [int(i) for i in np.argsort(chi2)[:keep] if chi2[i] <= chi2.min() + GRID_SCREEN_DCHI2]
    return [grids[i] for i in sorted(order)]


def _add_one(current, data, periods, period_range, n_starts, spec=None,
             keep: int = MAX_FULL_FITS) -> FitResult:  # fmt: skip
    model = current.model
    # a noise model's own parameters (a Gaussian process's timescales) are held at the
    # current fit's values while the candidates are screened, then freed for the winner
    screen = _hold_noise(model, current.params)
    label = LABELS[len(model.companions)]
    # residuals of the current fit (linear part free again), weights from its jitters
    arr = model.orbit_arrays(current.theta[None, :])
    phys = model.as_dict(arr)
    resid = model.y - orbit_velocity(model, arr)[0]
    weights = 1.0 / model.noise_model.effective_variance(model, phys, np.array([0]))[0]
    best = None
    trials = []  # (fitted period, ln L) of every full fit
    if spec is not None:
        label = spec.label
    grids = _grid_by_period(data, resid, weights, model.design, list(periods), n_starts,
                            keep)  # fmt: skip
    for P, grid in grids:
        starts = []
        # conjunction nearest the epoch, or nearest the centre of a given tc prior
        centre = data.epoch
        if spec is not None and spec.tc is not None:
            lo, hi = spec.tc.bounds
            centre = getattr(spec.tc, "mean", 0.5 * (lo + hi))
        for g in grid:
            tc = g["tc"] + data.epoch - centre
            starts.append(dict(g, tc=_nearest_tc(tc, P) + centre))
        if spec is not None and {"tc", "K"} <= set(spec.start):
            user = {"ecc": 0.0, "omega": 0.5 * np.pi, **spec.start}
            starts.append(user)
        for s in starts:
            new = _new_companion(data, label, P, s, period_range, spec)
            trial = screen.with_companions([*model.companions, new])
            start = current.params  # previous companions: their best values
            vals = {
                **{k: v for k, v in start.items() if k in _phys_keys(trial)},
                **_start_of(new, data),
            }
            theta0 = trial.from_physical(vals)[0]
            result = fit(trial, [theta0], SCREEN_FTOL)
            trials.append((result.params[f"{label}.period"], result.log_likelihood))
            # the best joint LIKELIHOOD wins: posterior densities would favour short
            # periods through the one-period-wide tc prior (a factor 1/P)
            if best is None or result.log_likelihood > best.log_likelihood:
                best = result
    # the winner polished to the final tolerance (with a noise model's parameters
    # freed again when they were held)
    free = replace(best.model, noise_parameters=model.noise_parameters)
    best = fit(free, [free.from_physical(best.params)[0]])
    # re-centre a default tc prior on the result (one phase mode around the best fit)
    out = _recentre(best, label if spec is None else None)
    out.extra["period_trials"] = trials
    out.extra["ambiguous_with"] = _rivals(out.params[f"{label}.period"], out.log_likelihood,
                                          trials)  # fmt: skip
    return out


def _hold_noise(model: SystemModel, params: dict) -> SystemModel:
    """``model`` with its noise model's own parameters fixed at ``params`` (the same
    object when it owns none)."""
    from rvkep.priors import Fixed

    if not any(not p.prior.is_fixed for p in model.noise_parameters):
        return model
    held = [replace(p, prior=Fixed(float(params[f"noise.{p.name}"])))
            for p in model.noise_parameters]  # fmt: skip
    return replace(model, noise_parameters=held)


def _rivals(period: float, logl: float, trials) -> list[dict]:
    """Other periods whose best fit comes within AMBIGUOUS_DLNL of the best ln L."""
    groups: dict[float, float] = {}
    for P, lnl in trials:
        if abs(P / period - 1.0) < 0.01:
            continue
        key = next((q for q in groups if abs(P / q - 1.0) < 0.01), P)
        groups[key] = max(groups.get(key, -np.inf), lnl)
    return [
        {"period_d": float(P), "delta_ln_l": float(logl - lnl)}
        for P, lnl in sorted(groups.items(), key=lambda kv: -kv[1])
        if logl - lnl < AMBIGUOUS_DLNL
    ]


def _phys_keys(model: SystemModel) -> set[str]:
    keys = {f"jitter.{i.name}" for i in model.instruments}
    keys |= {f"noise.{p.name}" for p in model.noise_parameters}
    for c in model.companions:
        keys |= {f"{c.label}.{f}" for f in ("period", "tc", "ecc", "omega", "K")}
    return keys


def _start_of(c, data: RVData) -> dict[str, float]:
    s = c.start
    return {
        f"{c.label}.period": s["period"],
        f"{c.label}.tc": s["tc"],
        f"{c.label}.ecc": s["ecc"],
        f"{c.label}.omega": s["omega"],
        f"{c.label}.K": s["K"],
    }


def _recentre(result: FitResult, label: str | None) -> FitResult:
    """Move companion ``label``'s default tc prior (one period wide) so the best tc sits
    at its centre, and store the best values as every companion's start."""
    from rvkep.priors import Uniform

    model = result.model
    p = result.params
    comps = []
    for c in model.companions:
        L = c.label
        P, tc = p[f"{L}.period"], p[f"{L}.tc"]
        tc_prior = c.tc
        if L == label and isinstance(c.tc, Uniform):
            width = c.tc.high - c.tc.low
            tc_prior = Uniform(tc - 0.5 * width, tc + 0.5 * width)
        start = {
            "period": P,
            "tc": tc,
            "K": p[f"{L}.K"],
            "ecc": p[f"{L}.ecc"],
            "omega": p[f"{L}.omega"],
        }
        comps.append(replace(c, tc=tc_prior, start=start))
    instruments = [
        replace(i, start_jitter=max(p[f"jitter.{i.name}"], 1e-3)) for i in model.instruments
    ]
    noise = [replace(q, start=p[f"noise.{q.name}"]) for q in model.noise_parameters]
    new_model = replace(
        model.with_companions(comps), instruments=instruments, noise_parameters=noise
    )
    theta = new_model.from_physical(p)[0]
    return _result(new_model, theta, result.success, result.message)
