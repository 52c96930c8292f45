"""Speed of the Kepler kernel, measured side by side in one run.

Prints, on N = 1e6 points with one thread:
  * the time of rvkep.orbit.radial_velocity divided by the time of one numpy sin plus
    one numpy cos over the same array (the floor: every method needs one trig pair);
  * the same ratio for rvkep.kepler.eccentric_anomaly with eccentricities spread over
    [0, 0.95], and for the pure-numpy path;
  * the speed-up over scipy.optimize.newton applied to the same arrays, started at
    E = M with its analytic derivative (what a user writes by hand).

Usage: python scripts/bench_kepler.py [N]
"""

import os

for var in ("OMP_NUM_THREADS", "NUMBA_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(var, "1")

import sys  # noqa: E402
import time  # noqa: E402

import numpy as np  # noqa: E402
from scipy.optimize import newton  # noqa: E402

from rvkep import kepler, orbit  # noqa: E402


def best_time(fn, repeat=7):
    fn()
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return min(times)


def main(n=1_000_000):
    rng = np.random.default_rng(42)
    t = rng.uniform(2_459_000.0, 2_461_000.0, n)
    M = rng.uniform(-np.pi, np.pi, n)
    e_many = rng.uniform(0.0, 0.95, n)  # eccentricities as a posterior run visits them
    e = 0.3
    period, tp, omega, K = 17.3, 2_460_001.2, 1.1, 42.0

    floor = best_time(lambda: (np.sin(M), np.cos(M)))
    t_rv = best_time(lambda: orbit.radial_velocity(t, period, tp, e, omega, K))
    t_E = best_time(lambda: kepler.eccentric_anomaly(M, e_many))
    ee = np.full(n, e)
    t_np = best_time(
        lambda: kepler._rv_np(t, tp, 2 * np.pi / period, ee, np.cos(omega), np.sin(omega), K)
    )
    t_E_np = best_time(lambda: kepler._ecc_anom_np(M, e_many))
    # what a user writes by hand: scipy's vectorized Newton, started at E = M
    t_scipy = best_time(
        lambda: newton(
            lambda E: E - e_many * np.sin(E) - M,
            M.copy(),
            fprime=lambda E: 1 - e_many * np.cos(E),
            tol=1e-12,
            maxiter=100,
        ),
        repeat=2,
    )
    t_secant = best_time(
        lambda: newton(lambda E: E - e_many * np.sin(E) - M, M.copy(), maxiter=100), repeat=2
    )
    m_few, e_few = M[:2000], e_many[:2000]
    t_loop = (n / m_few.size) * best_time(
        lambda: [
            newton(lambda E, m=m, ee=ee: E - ee * np.sin(E) - m, m)
            for m, ee in zip(m_few, e_few, strict=True)
        ],
        repeat=2,
    )
    rows = [
        ("floor (np.sin + np.cos)", floor),
        ("radial_velocity (one orbit, e = 0.3)", t_rv),
        ("eccentric_anomaly (e in [0, 0.95])", t_E),
        ("radial_velocity, pure-numpy path", t_np),
        ("eccentric_anomaly, pure-numpy path", t_E_np),
        ("scipy newton with derivative (same M, e)", t_scipy),
        ("scipy newton, no derivative (secant)", t_secant),
        ("scipy newton, scalar loop (scaled)", t_loop),
    ]
    print(f"backend: {kepler.BACKEND}; N = {n:,} points, one thread")
    for label, sec in rows:
        print(f"{label:42s} {sec * 1e3:10.2f} ms = {sec / floor:8.2f} x floor")
    for label, sec in rows[5:]:
        print(f"speed-up of eccentric_anomaly over {label}: {sec / t_E:8.1f} x")


if __name__ == "__main__":
    main(int(float(sys.argv[1])) if len(sys.argv) > 1 else 1_000_000)
