"""Sampling speed on the demo star: wall time, steps, effective samples per second.

Runs the best fit of the demo star (two companions, two instruments, 150 points) to
convergence with each move mixture, side by side in one run, same seed.

Usage: python scripts/bench_sampling.py [seed]
"""

import os

for var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS", "NUMBA_NUM_THREADS"):
    os.environ.setdefault(var, "1")

import sys  # noqa: E402
import time  # noqa: E402
from pathlib import Path  # noqa: E402

from rvkep.moves import MOVES  # noqa: E402
from rvkep.period_search import search  # noqa: E402
from rvkep.reading import load_rv  # noqa: E402
from rvkep.sampling import SamplerOptions, run_sampler  # noqa: E402

DEMO = Path(__file__).resolve().parents[1] / "demo_data"


def main(seed=1):
    data = load_rv([DEMO / "kestrel.txt", DEMO / "osprey.csv"])
    t0 = time.perf_counter()
    fit = search(data).best_fit
    print(
        f"search + best fit: {time.perf_counter() - t0:.1f} s; {fit.model.ndim} sampled parameters"
    )
    print(f"{'moves':<12} {'wall [s]':>9} {'steps':>6} {'walkers':>7} {'tau':>6} {'conv.':>6}"
          f" {'accept':>7} {'ESS':>6} {'ESS/s':>7}")  # fmt: skip
    for moves in MOVES:
        r = run_sampler(
            fit.model, fit.theta, SamplerOptions(seed=seed, moves=moves, progress=False)
        )
        d = r.diagnostics()
        print(
            f"{moves:<12} {d['seconds']:>9.1f} {d['steps']:>6} {d['walkers']:>7}"
            f" {d['autocorr_steps']:>6.1f} {str(d['converged']):>6} {d['acceptance_mean']:>7.2f}"
            f" {d['effective_samples']:>6.0f} {d['effective_samples'] / d['seconds']:>7.0f}"
        )


if __name__ == "__main__":
    main(*(int(a) for a in sys.argv[1:]))
