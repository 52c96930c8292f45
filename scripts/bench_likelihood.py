"""Log-posterior speed for a two-planet, two-instrument model on 150 points.

Evaluates 64 parameter sets per call (emcee's vectorized mode) and reports the rate as
a fraction of the floor rate: the time of 150 x 64 numpy sin+cos pairs, timed in the
same run. Uses the demo star's data.

Usage: python scripts/bench_likelihood.py
"""

import os

for var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS", "NUMBA_NUM_THREADS"):
    os.environ.setdefault(var, "1")

import time  # noqa: E402
from pathlib import Path  # noqa: E402

import numpy as np  # noqa: E402

from rvkep.likelihood import LogPosterior  # noqa: E402
from rvkep.model import SystemModel, default_companion  # noqa: E402
from rvkep.reading import load_rv  # noqa: E402

DEMO = Path(__file__).resolve().parents[1] / "demo_data"


def interleaved(fns, repeat=300, rounds=15):
    """Best time per call of each function, timed in alternating blocks so that a
    change of machine speed affects all of them alike."""
    for fn in fns:
        fn()
    best = [np.inf] * len(fns)
    for _ in range(rounds):
        for k, fn in enumerate(fns):
            t0 = time.perf_counter()
            for _ in range(repeat):
                fn()
            best[k] = min(best[k], (time.perf_counter() - t0) / repeat)
    return best


def main():
    data = load_rv([DEMO / "kestrel.txt", DEMO / "osprey.csv"])
    comps = [
        default_companion(data, "b", 11.873, 2459405.0, 18.0, 0.1, 1.0),
        default_companion(data, "c", 143.2, 2459520.0, 27.0, 0.35, 4.0),
    ]
    for trend in (0, 1):
        model = SystemModel(data, comps, trend=trend)
        post = LogPosterior(model)
        rng = np.random.default_rng(1)
        theta = model.start_theta() + 1e-4 * rng.standard_normal((64, model.ndim))
        assert np.all(np.isfinite(post(theta)))
        x = rng.uniform(-np.pi, np.pi, (64, len(data)))
        t_floor, t_post = interleaved(
            [lambda x=x: (np.sin(x), np.cos(x)), lambda theta=theta, post=post: post(theta)]
        )
        print(
            f"trend degree {trend}: {len(data)} points, {model.ndim} sampled parameters, "
            f"64 sets per call"
        )
        print(f"  floor (150 x 64 sin+cos):   {t_floor * 1e6:8.1f} us per call")
        print(
            f"  log-posterior:              {t_post * 1e6:8.1f} us per call "
            f"= {64 / t_post:,.0f} evaluations/s"
        )
        print(f"  fraction of the floor rate: {t_floor / t_post:.2f}")


if __name__ == "__main__":
    main()
