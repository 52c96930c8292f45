"""The night term's log-posterior against white noise's, side by side in one run.

On the invented seven-night star of tests/stars.py (91 points, one companion), 32
parameter sets per call (a sampler's walkers): the white-noise model (compiled kernel
where numba loaded) and the night model (numpy, the Sherman-Morrison solve per night),
timed in alternating blocks; the ratio is what the night term costs per call.

Usage: python scripts/bench_night.py
"""

import os
import sys
from pathlib import Path

for var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS", "NUMBA_NUM_THREADS"):
    os.environ.setdefault(var, "1")

import numpy as np  # noqa: E402

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tests"))
sys.path.insert(0, str(Path(__file__).resolve().parent))

from bench_likelihood import interleaved  # noqa: E402
from stars import seven_night_hot_jupiter  # noqa: E402

from rvkep.likelihood import LogPosterior  # noqa: E402
from rvkep.model import SystemModel, default_companion  # noqa: E402


def main() -> None:
    data = seven_night_hot_jupiter()
    comp = default_companion(data, "b", 4.2308, 2459001.1, 55.0, 0.01, 1.0)
    rng = np.random.default_rng(1)
    posts = []
    for noise in ("white", "night"):
        model = SystemModel(data, [comp], noise=noise)
        post = LogPosterior(model)
        theta = model.start_theta() + 1e-4 * rng.standard_normal((32, model.ndim))
        assert np.all(np.isfinite(post(theta)))
        posts.append(lambda post=post, theta=theta: post(theta))
    t_white, t_night = interleaved(posts, repeat=100, rounds=10)
    print(f"{len(data)} points, 32 parameter sets per call")
    print(f"  white noise: {t_white * 1e6:8.1f} us per call")
    print(f"  night term:  {t_night * 1e6:8.1f} us per call")
    print(f"  ratio night / white: {t_night / t_white:.2f}")


if __name__ == "__main__":
    main()
