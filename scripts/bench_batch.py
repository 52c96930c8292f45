"""Batch throughput: seconds per target with 1 and 2 workers, locally and on Dask.

Sparse targets (25 points, one companion, invented with seeds 0..n-1) and demo-like
targets (the demo star's two files), full sampling to convergence unless --quick.
Prints the time per target and the projection for 10^4 targets on 100 workers.

Usage: python scripts/bench_batch.py [--quick] [N_SPARSE] [N_DEMO]
"""

import shutil
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tests"))

from test_batch import make_targets  # noqa: E402

from rvkep.batch import run_batch  # noqa: E402

DEMO = Path(__file__).resolve().parents[1] / "demo_data"


def demo_targets(folder: Path, n: int) -> Path:
    folder.mkdir(parents=True, exist_ok=True)
    for f in ("kestrel.txt", "osprey.csv"):
        shutil.copy(DEMO / f, folder / f)
    rows = ["name,data,star_mass,star_mass_err"]
    rows += [f"demo{k},kestrel.txt;osprey.csv,0.92,0.04" for k in range(n)]
    (folder / "targets.csv").write_text("\n".join(rows) + "\n")
    return folder / "targets.csv"


def timed(targets, workers=None, scheduler=None, quick=False):
    out = Path(tempfile.mkdtemp(prefix="rvkep-bench-"))
    t0 = time.perf_counter()
    infos = run_batch(targets, out, workers=workers, scheduler=scheduler, quiet=True, quick=quick)
    wall = time.perf_counter() - t0
    shutil.rmtree(out, ignore_errors=True)
    n = sum(1 for i in infos.values() if i["status"] != "failed")
    return wall, n


def main():
    args = [a for a in sys.argv[1:] if not a.startswith("--")]
    quick = "--quick" in sys.argv
    n_sparse = int(args[0]) if args else 8
    n_demo = int(args[1]) if len(args) > 1 else 4
    root = Path(tempfile.mkdtemp(prefix="rvkep-targets-"))
    sparse = make_targets(root / "sparse", n_sparse)
    demo = demo_targets(root / "demo", n_demo)
    from distributed import LocalCluster

    print(f"{'targets':<22} {'where':<14} {'workers':>7} {'wall [s]':>9} {'s/target':>9}")
    for label, targets in (("sparse (25 pts, 1 comp)", sparse), ("demo-like (150 pts)", demo)):
        for workers in (1, 2):
            wall, n = timed(targets, workers=workers, quick=quick)
            print(f"{label:<22} {'local':<14} {workers:>7} {wall:>9.1f} {wall / n:>9.2f}")
            with LocalCluster(n_workers=workers, threads_per_worker=1, processes=True,
                              host="127.0.0.1", dashboard_address="127.0.0.1:0",
                              local_directory=str(root / "dask")) as cluster:  # fmt: skip
                wall, n = timed(targets, scheduler=cluster.scheduler_address, quick=quick)
            per = wall / n
            print(f"{label:<22} {'dask (local)':<14} {workers:>7} {wall:>9.1f} {per:>9.2f}")
        print(
            f"  -> 10^4 such targets on 100 workers: about {1e4 * per * workers / 100 / 3600:.2f} h"
        )
    shutil.rmtree(root, ignore_errors=True)


if __name__ == "__main__":
    main()
