"""Cost of the Gaussian-process noise model: its log-likelihood against N, beside the
white model's and a dense Cholesky evaluation of the same covariance, all timed in one
run; then sampling a 200-point star with each noise model for the same number of steps.

Usage: python scripts/bench_gp.py [--quick]

Prints microseconds per parameter set and ratios (measured side by side, so they
survive a busy machine better than the absolute times).
"""

import argparse
import time
import warnings
from dataclasses import replace

import numpy as np

from rvkep.data import RVData
from rvkep.likelihood import LogPosterior
from rvkep.model import SystemModel, default_companion
from rvkep.noise.gp import covariance
from rvkep.orbit import radial_velocity


def star(n: int, seed: int = 1) -> RVData:
    """An invented one-planet star with n points over about four years."""
    rng = np.random.default_rng(seed)
    t = np.sort(2459000 + rng.uniform(0, 1500, n))
    v = radial_velocity(t, 12.3, 2459001.0, 0.1, 1.0, 8.0) + 5 * np.sin(2 * np.pi * t / 27.0)
    return RVData(t, v + rng.normal(0, 1.5, n), np.full(n, 1.5), np.full(n, "a"))


def models(data: RVData):
    comp = default_companion(data, "b", 12.3, 2459001.0, 8.0, 0.1, 1.0)
    white = SystemModel(data, [comp])
    gp = replace(white, noise="gp", noise_parameters=None)
    return white, gp


def per_set(fn, arg, reps: int) -> float:
    """Seconds per call of fn(arg): the best of three rounds of ``reps`` calls."""
    fn(arg)
    best = np.inf
    for _ in range(3):
        t0 = time.perf_counter()
        for _ in range(reps):
            fn(arg)
        best = min(best, (time.perf_counter() - t0) / reps)
    return best


def dense_loglike(args) -> float:
    """The same covariance built densely, Cholesky-factored, solved (numpy)."""
    gp, hyper, white_var = args
    C = covariance(gp.t[:, None] - gp.t[None, :], **hyper) + np.diag(white_var)
    L = np.linalg.cholesky(C)
    z = np.linalg.solve(L, np.column_stack([gp.y, gp.design]))
    return float(np.sum(z * z) + 2 * np.sum(np.log(np.diag(L))))


def scaling(sizes, sets: int = 16) -> None:
    print(f"log-likelihood per parameter set ({sets} sets per call), microseconds")
    print(f"{'N':>7} {'white':>9} {'gp (celerite2)':>15} {'gp/white':>9} {'dense gp':>11} "
          f"{'dense/gp':>9}")  # fmt: skip
    prev = None
    for n in sizes:
        white, gp = models(star(n))
        tw = white.start_theta()
        tg = gp.start_theta()
        rng = np.random.default_rng(0)
        thw = tw + 1e-6 * rng.standard_normal((sets, tw.size))
        thg = tg + 1e-6 * rng.standard_normal((sets, tg.size))
        pw, pg = LogPosterior(white), LogPosterior(gp)
        reps = max(2, int(2e5 / n))
        w = per_set(pw, thw, reps) / sets
        g = per_set(pg, thg, max(1, reps // 20)) / sets
        dense = float("nan")
        if n <= 3000:
            phys = gp.to_physical(tg[None, :])
            hyper = {k: float(phys[f"noise.{k}"][0]) for k in gp.noise_model.parameter_keys}
            white_var = gp.err2 + phys["jitter.a"][0] ** 2
            dense = per_set(dense_loglike, (gp, hyper, white_var), 2 if n > 1000 else 5)
        slope = "" if prev is None else f"  (x{g / prev[1]:.1f} for x{n / prev[0]:.0f} points)"
        print(f"{n:>7} {w * 1e6:>9.1f} {g * 1e6:>15.1f} {g / w:>9.1f} {dense * 1e6:>11.0f} "
              f"{dense / g:>9.1f}{slope}")  # fmt: skip
        prev = (n, g)


def sampling(n: int = 200, steps: int = 1000) -> None:
    from rvkep.optimize import fit
    from rvkep.sampling import SamplerOptions, UnconvergedWarning, run_sampler

    print(f"\nsampling a {n}-point star, {steps} steps, walkers = 4 x parameters")
    times = {}
    for model in models(star(n)):
        model = model.noise_model.initial(model)
        best = fit(model)
        opts = SamplerOptions(seed=1, max_steps=steps, check_every=steps, progress=False)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", UnconvergedWarning)
            t0 = time.perf_counter()
            run_sampler(best.model, best.theta, opts)
            times[model.noise] = time.perf_counter() - t0
        print(f"  {model.noise:>5}: {model.ndim:>2} parameters, {times[model.noise]:6.2f} s")
    print(f"  gp / white wall time: {times['gp'] / times['white']:.1f}")


if __name__ == "__main__":
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="fewer sizes and steps")
    args = ap.parse_args()
    sizes = [100, 1000, 10000] if args.quick else [100, 300, 1000, 3000, 10000]
    scaling(sizes)
    sampling(steps=300 if args.quick else 1000)
