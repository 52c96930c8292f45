"""Invented stars and runs that several test modules share (no test module imports
another). Synthetic data only, each with its seed; see also ``stars.py`` for the
documented generators of the real-data failure cases."""

import csv
import math
from pathlib import Path

import numpy as np

from rvkep.data import RVData
from rvkep.orbit import radial_velocity

#: this folder, for the scripts tests run in a subprocess (``sys.path.insert``)
HERE = str(Path(__file__).resolve().parent)


def one_planet(seed=4, n=40):
    """Invented star, seed given: P = 9.4 d, K = 12 m/s, e = 0.2."""
    rng = np.random.default_rng(seed)
    t = np.sort(rng.uniform(2459000, 2459150, n))
    err = np.full(n, 2.0)
    v = radial_velocity(t, 9.4, 2459001.0, 0.2, 1.0, 12.0)
    return RVData(t, v + rng.normal(0, 2.0, n), err, np.full(n, "a"))


def write_table(data, path):
    """``data`` as a plain three-column RV file (time, rv, err); returns the path."""
    rows = zip(data.time, data.rv, data.err, strict=True)
    path.write_text("".join(f"{t} {v} {e}\n" for t, v, e in rows))
    return path


def planet_model(data):
    from rvkep.optimize import fit_companions

    return fit_companions(data, [[9.4]])


def finished_run(folder, n=40):
    """A short sampled run of one_planet(n) written to ``folder`` (a run folder for the
    commands that read one back); returns the folder."""
    import warnings

    from rvkep.results import Results
    from rvkep.sampling import UnconvergedWarning

    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UnconvergedWarning)
        sampled = planet_model(one_planet(n=n)).sample(seed=4, max_steps=2000,
                                                       check_every=500, progress=False)  # fmt: skip
    Results.from_sampling(sampled).write(folder)
    return folder


def make_targets(folder: Path, n: int, n_points: int = 25) -> Path:
    """Invented sparse stars (seeds 0..n-1): one companion each, plus one bad file."""
    folder.mkdir(parents=True, exist_ok=True)
    rows = ["name,data,star_mass,star_mass_err,max_companions"]
    for k in range(n):
        rng = np.random.default_rng(k)
        t = 2459000 + np.sort(rng.choice(np.arange(400), n_points, replace=False)) * 0.99727
        P = float(np.exp(rng.uniform(np.log(3), np.log(60))))
        v = radial_velocity(t, P, 2459000.0 + rng.uniform(0, P), 0.2, 1.0, rng.uniform(20, 40))
        v += rng.normal(0, 3, n_points)
        rows_txt = "\n".join(f"{a:.6f} {b:.3f} 3.0" for a, b in zip(t, v, strict=True))
        (folder / f"star{k}.txt").write_text(rows_txt + "\n")
        rows.append(f"star{k},star{k}.txt,1.0,0.05,1")
    (folder / "broken.txt").write_text("2459000 1 1\n2459001 oops 1\n")
    rows.append("broken,broken.txt,1.0,0.05,1")
    path = folder / "targets.csv"
    path.write_text("\n".join(rows) + "\n")
    return path


def read_summary(out: Path):
    with open(out / "summary.csv") as fh:
        return list(csv.DictReader(fh))


def slow_rv(t, period, tp, e, omega, K):
    """Plain reference RV: bisection for E, then nu, one point at a time.

    v = K [cos(nu + omega) + e cos omega]  (common practice, no source; the usual RV
    convention with omega the star's argument of periastron).
    """
    out = []
    for ti in np.atleast_1d(t):
        M = 2 * math.pi * ((ti - tp) / period % 1.0)
        lo, hi = 0.0, 2 * math.pi
        for _ in range(100):
            mid = 0.5 * (lo + hi)
            if mid - e * math.sin(mid) - M > 0:
                hi = mid
            else:
                lo = mid
        E = 0.5 * (lo + hi)
        nu = 2 * math.atan2(math.sqrt(1 + e) * math.sin(E / 2), math.sqrt(1 - e) * math.cos(E / 2))
        out.append(K * (math.cos(nu + omega) + e * math.cos(omega)))
    return np.array(out)
