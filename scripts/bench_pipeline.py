"""The whole job, stage by stage, on five stars, in work units.

One work unit is one numpy sin + cos over 1e7 doubles, timed in the same run (best of
five), so the figures survive a busy or a faster machine. The stars: the bundled demo
star (150 points, two companions, two instruments), a sparse 25-point one-companion
star and a steep e = 0.9 one-companion star (both invented here, seeded), and two
orbits longer than the data from tests/stars.py: the brown dwarf (P 1.8 spans, two
zero points) and the giant with an outer companion at 1.5 spans. Each runs `analyze`
to convergence (not quick) with the trend chosen automatically, and the stage times
come from results.json's `timings`.

Usage: python scripts/bench_pipeline.py [--quick] [--only NAME]
"""

import argparse
import json
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tests"))

from stars import brown_dwarf_open_orbit, giant_and_outer_companion  # noqa: E402

from rvkep.cli import demo_folder
from rvkep.orbit import radial_velocity
from rvkep.pipeline import analyze


def work_unit() -> float:
    x = np.linspace(0.0, 100.0, 10_000_000)
    best = np.inf
    for _ in range(5):
        t0 = time.perf_counter()
        np.sin(x)
        np.cos(x)
        best = min(best, time.perf_counter() - t0)
    return best


def write_star(folder: Path, name: str, n: int, ecc: float, seed: int) -> list[str]:
    rng = np.random.default_rng(seed)
    t = 2459000 + np.sort(rng.choice(np.arange(400), n, replace=False)) * 0.99727
    v = radial_velocity(t, 23.4, 2459003.0, ecc, 1.2, 25.0) + rng.normal(0, 3, n)
    path = folder / f"{name}.txt"
    path.write_text("".join(f"{a:.6f} {b:.3f} 3.0\n" for a, b in zip(t, v, strict=True)))
    return [str(path)]


def write_data(folder: Path, name: str, data) -> list[str]:
    path = folder / f"{name}.csv"
    path.write_text("time,rv,err,instrument\n" + "".join(
        f"{t:.6f},{v:.4f},{e:.3f},{i}\n"
        for t, v, e, i in zip(data.time, data.rv, data.err, data.instrument, strict=True)))
    return [str(path)]


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="quick (preview) runs")
    ap.add_argument("--only", choices=("demo", "sparse", "steep", "brown_dwarf", "giant_outer"))
    args = ap.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        demo = demo_folder()
        stars = {
            "demo": [str(demo / "kestrel.txt"), str(demo / "osprey.csv")],
            "sparse": write_star(tmp, "sparse", 25, 0.1, 1),
            "steep": write_star(tmp, "steep", 60, 0.9, 2),
            "brown_dwarf": write_data(tmp, "brown_dwarf", brown_dwarf_open_orbit()),
            "giant_outer": write_data(tmp, "giant_outer", giant_and_outer_companion()),
        }
        unit = work_unit()
        print(f"work unit (numpy sin + cos over 1e7 doubles): {unit * 1e3:.0f} ms")
        for name, files in stars.items():
            if args.only and name != args.only:
                continue
            out = tmp / f"out-{name}"
            t0 = time.perf_counter()
            analyze(files, out=str(out), quiet=True, quick=args.quick, seed=1, star_mass=1.0)
            total = time.perf_counter() - t0
            t = json.loads((out / "results.json").read_text())["timings"]
            stages = ", ".join(f"{k} {v / unit:.1f}" for k, v in t.items())
            print(f"{name:>11}: {total / unit:6.1f} units ({total:5.1f} s) in all: {stages}")


if __name__ == "__main__":
    main()
