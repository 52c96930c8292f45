"""One N-body likelihood call against the Keplerian sum, side by side in one run.

An invented four-planet M dwarf (0.37 solar masses; P 1.94, 30.1, 61.1 and 124 d, K 6,
88, 214 and 3.4 m/s, the middle pair near 2:1), 160 velocities over 13 years: the
star's velocity for one parameter set by rvkep.nbody (REBOUND, WHFast at P_min/20 with
corrector 5, from the epoch forwards and backwards to each time) and by the Keplerian
sum (rvkep.orbit), timed in alternating blocks; then the same for IAS15, and where the
time goes (building the system, integrating one side in one call, stopping at each
observation time).

Usage: python scripts/bench_nbody.py
"""

import time

import numpy as np

from rvkep import nbody
from rvkep.orbit import radial_velocity

P = np.array([1.94, 30.1, 61.1, 124.0])
TP = np.array([0.3, 5.0, 10.0, 40.0])
E = np.array([0.2, 0.26, 0.03, 0.1])
W = np.array([1.0, 2.0, 3.0, 4.0])
K = np.array([6.0, 88.0, 214.0, 3.4])
M = 0.37


def best_of(fn, repeat=5):
    out = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        out.append(time.perf_counter() - t0)
    return min(out)


def main() -> None:
    rng = np.random.default_rng(1)
    t = np.sort(rng.uniform(-6.5 * 365.25, 6.5 * 365.25, 160))
    nbody.star_velocity(t, P, TP, E, W, K, M)  # load REBOUND once

    def kepler():
        return sum(radial_velocity(t, P[j], TP[j], E[j], W[j], K[j]) for j in range(4))

    rows = []
    for _ in range(3):  # alternating blocks
        rows.append((best_of(lambda: nbody.star_velocity(t, P, TP, E, W, K, M)),
                     best_of(kepler)))  # fmt: skip
    nb = min(r[0] for r in rows)
    kp = min(r[1] for r in rows)
    ias = best_of(lambda: nbody.star_velocity(t, P, TP, E, W, K, M, integrator="ias15"), 2)
    diff = np.max(
        np.abs(
            nbody.star_velocity(t, P, TP, E, W, K, M)
            - nbody.star_velocity(t, P, TP, E, W, K, M, integrator="ias15")
        )
    )
    build = best_of(lambda: nbody.simulation(P, TP, E, W, K, M))

    def one_side():
        sim = nbody.simulation(P, TP, E, W, K, M)
        sim.integrate(float(t.max()), exact_finish_time=0)

    side = best_of(one_side)
    print("4 planets, 160 points over 13 years, one parameter set:")
    print(f"  N-body (WHFast)   {nb * 1e3:8.2f} ms")
    print(f"  Keplerian sum     {kp * 1e3:8.3f} ms   N-body / Keplerian = {nb / kp:.0f}x")
    print(
        f"  N-body (IAS15)    {ias * 1e3:8.2f} ms   IAS15 / WHFast = {ias / nb:.1f}x, "
        f"largest difference {diff:.2e} m/s"
    )
    print(
        f"  of the WHFast call: building {build * 1e3:.2f} ms, one side in one call "
        f"{side * 1e3:.2f} ms (x2 sides), the rest is stopping at the 160 times"
    )
    print("  target: <= 20 ms per call")
    n = 32  # a sampler's walkers: the rows of one call, on threads
    arr = {k: np.tile(v, (n, 1)) for k, v in (("period", P), ("tp_rel", TP), ("ecc", E),
                                              ("omega", W), ("K", K))}  # fmt: skip
    inc = np.full(n, 1.2)
    import os

    cores = nbody.threads()
    os.environ["OMP_NUM_THREADS"] = "1"
    serial = best_of(lambda: nbody.star_velocity_rows(t, arr, M, inc), 2)
    os.environ["OMP_NUM_THREADS"] = str(cores)
    threaded = best_of(lambda: nbody.star_velocity_rows(t, arr, M, inc), 2)
    print(f"{n} rows (walkers): one thread {serial:.3f} s, {cores} threads {threaded:.3f} s: "
          f"{serial / threaded:.2f}x")


if __name__ == "__main__":
    main()
