"""``rvkep stability``: posterior draws of a finished run integrated with REBOUND, and
the MEGNO chaos indicator of each.

MEGNO (the Mean Exponential Growth factor of Nearby Orbits, Cincotta & Simo 2000,
A&AS 147, 205) follows a variational orbit beside each draw: its time average <Y>
tends to 2 for a quasi-periodic (regular) system and grows without bound (about
lambda t / 2, lambda the largest Lyapunov exponent) for a chaotic one. A draw counts
as *regular* when <Y> <= :data:`REGULAR_MEGNO` after the integration (common
practice, no source); a draw whose companions escape or collide counts as chaotic.

Each draw is integrated from the run's epoch for ``orbits`` periods of its outermost
companion, with the integrator :mod:`rvkep.nbody` chooses (WHFast, or IAS15 for
eccentric or crossing orbits), the inclination of an N-body run (edge-on, m sin i, for
a Keplerian one). Draws run as independent tasks on local processes or a Dask cluster
(:mod:`rvkep.workers`: progress, Ctrl-C). The results go to RUN_DIR/stability.json
and stability.csv (one row per draw), written atomically, and into the run's
report.html (its Stability section) when the run has one.
"""

from __future__ import annotations

import json
import math
import sys
import time
from pathlib import Path

import numpy as np

__all__ = ["megno", "run_stability", "REGULAR_MEGNO"]

#: the largest <Y> counted as regular
REGULAR_MEGNO = 2.5
#: an escape: a body farther than this multiple of the outermost semi-major axis
ESCAPE_FACTOR = 20.0


def megno(period, tp_rel, ecc, omega, K, star_mass: float, inclination=0.5 * math.pi,
          orbits: float = 5000.0, node=0.0, seed: int = 0) -> float:  # fmt: skip
    """<Y> after ``orbits`` periods of the outermost companion (inf if a companion
    escapes or the integration fails). Arguments as :func:`rvkep.nbody.simulation`;
    ``seed`` sets the variational orbit's random start (REBOUND draws one from the clock
    otherwise), so a draw's value is the same wherever it runs.

    Parameters
    ----------
    period, tp_rel, ecc, omega, K : sequence of float
        Per companion: period (days), periastron time minus the epoch (days), eccentricity,
        the star's argument of periastron (radians) and semi-amplitude (m/s).
    star_mass : float
        Stellar mass (solar masses).
    inclination, node : float, optional
        Orbital inclination and ascending node (radians; default edge-on, 0).
    orbits : float, optional
        Length of the integration in periods of the outermost companion.
    seed : int, optional
        Seed of the variational orbit's start.

    Returns
    -------
    float
        The mean exponential growth factor of nearby orbits; about 2 for a regular system,
        inf when the integration fails.

    References
    ----------
    .. [1] Cincotta, P. M. & Simo, C. (2000), A&AS 147, 205.
    """
    from rvkep import nbody

    rebound = nbody.require_rebound()
    sim = nbody.simulation(period, tp_rel, ecc, omega, K, star_mass, inclination, node=node)
    P = np.atleast_1d(np.asarray(period, float))
    a_max = max(p.a for p in sim.particles[1:])
    sim.exit_max_distance = ESCAPE_FACTOR * a_max
    if sim.integrator == "whfast":
        sim.integrator.safe_mode = 1  # the variational equations need synchronized steps
    sim.init_megno(seed=seed)
    try:
        with nbody.keep_sigint():
            sim.integrate(float(orbits * P.max()), exact_finish_time=0)
    except (rebound.Escape, rebound.Encounter, RuntimeError):
        return math.inf
    value = float(sim.megno())
    return value if math.isfinite(value) else math.inf


def _draw_task(row: dict, orbits: float, seed: int) -> float:
    """One draw's MEGNO (a module-level function: it is pickled to workers)."""
    return megno(row["period"], row["tp_rel"], row["ecc"], row["omega"], row["K"],
                 row["star_mass"], row["inclination"], orbits, row["node"],
                 seed=seed + row["index"])  # fmt: skip


def _draws(results, n: int, seed: int) -> list[dict]:
    """``n`` posterior draws of ``results`` as element arrays (seeded choice)."""
    post = results.posterior
    labels = results.labels
    total = len(post)
    rng = np.random.default_rng(seed)
    index = rng.choice(total, size=min(n, total), replace=False)
    epoch = results.data.epoch
    from rvkep.nbody import orientation

    inc, node = orientation(post.columns, labels)  # edge-on for a Keplerian run
    rows = []
    for i in index:
        rows.append({
            "index": int(i),
            "period": np.array([post[f"{L}.period"][i] for L in labels]),
            "tp_rel": np.array([post[f"{L}.tp"][i] - epoch for L in labels]),
            "ecc": np.array([post[f"{L}.ecc"][i] for L in labels]),
            "omega": np.radians([post[f"{L}.omega_deg"][i] for L in labels]),
            "K": np.array([post[f"{L}.K"][i] for L in labels]),
            "star_mass": float(post["star.mass_msun"][i]),
            "inclination": inc[i],
            "node": node[i],
        })  # fmt: skip
    return rows


def _summary(rows: list, y: np.ndarray, orbits: float, seed: int, seconds: float,
             nbody_run: bool) -> dict:
    """stability.json's content: the fraction of integrated draws with a regular MEGNO,
    its median, and each draw's value (None and ``escaped`` for a companion lost)."""
    done = ~np.isnan(y)  # finite, or inf for an escape
    return {
        "draws": int(done.sum()),
        "orbits_of_outermost": float(orbits),
        "fraction_regular": float(np.mean(y[done] <= REGULAR_MEGNO)) if done.any() else None,
        "megno_median": float(np.median(y[done])) if done.any() else None,
        "regular_if_megno_at_most": REGULAR_MEGNO,
        "inclination": "the N-body run's" if nbody_run else "edge-on, coplanar (m sin i)",
        "seed": seed,
        "seconds": seconds,
        "reference": "Cincotta & Simo (2000), A&AS 147, 205",
        "per_draw": [{"sample": r["index"], "megno": (float(v) if np.isfinite(v) else None),
                      "escaped": bool(np.isinf(v))} for r, v in zip(rows, y, strict=True)],
    }  # fmt: skip


def run_stability(run_dir: str | Path, draws: int = 100, orbits: float = 5000.0,
                  workers: int = 1, scheduler: str | None = None, seed: int = 0,
                  quiet: bool = False) -> dict:  # fmt: skip
    """MEGNO of ``draws`` posterior draws of the run in ``run_dir``; writes
    stability.json and stability.csv there and returns the summary (``fraction_regular``,
    ``megno_median``, per-draw values).

    Parameters
    ----------
    run_dir : str or Path
        A finished run's folder (it must hold the posterior samples and a stellar mass).
    draws : int, optional
        Posterior draws integrated.
    orbits : float, optional
        Integration length in periods of the outermost companion.
    workers : int, optional
        Local worker processes.
    scheduler : str, optional
        A Dask scheduler address to run the draws on.
    seed : int, optional
        Seed of the draws and of each integration.
    quiet : bool, optional
        No progress bar.

    Returns
    -------
    dict
        The summary written to stability.json.
    """
    from rvkep import nbody
    from rvkep.errors import DataError
    from rvkep.outputs import folder_lock, write_text
    from rvkep.results import Results
    from rvkep.workers import INTERRUPTED, run_tasks

    nbody.require_rebound()
    run_dir = Path(run_dir)
    results = Results.load(run_dir)
    if len(results.labels) < 2:
        raise DataError(f"{run_dir}: one companion: nothing can perturb it (rvkep stability "
                        "needs two or more)")  # fmt: skip
    rows = _draws(results, draws, seed)
    values: dict[int, float] = {}
    interrupted = []
    t0 = time.perf_counter()

    def on_result(key, value):
        if value is INTERRUPTED:
            interrupted.append(key)
        values[key] = value if isinstance(value, float) else math.nan
        if not quiet:
            print(f"\rstability: {len(values)}/{len(rows)} draws integrated", end="",
                  file=sys.stderr, flush=True)  # fmt: skip

    with folder_lock(run_dir):
        try:
            tasks = [(k, (row, orbits, seed)) for k, row in enumerate(rows)]
            run_tasks(_draw_task, tasks, on_result, workers=workers, scheduler=scheduler)
        finally:
            if not quiet:
                print(file=sys.stderr)
        y = np.array([values.get(k, math.nan) for k in range(len(rows))])
        if interrupted:
            raise KeyboardInterrupt
        summary = _summary(rows, y, orbits, seed, time.perf_counter() - t0,
                           bool(results.saved.get("dynamics")))  # fmt: skip
        write_text(run_dir / "stability.json", json.dumps(summary, indent=2) + "\n")
        csv = ["sample,megno,regular"] + [
            f"{r['index']},{'' if not np.isfinite(v) else f'{v:.4f}'},"
            f"{'yes' if v <= REGULAR_MEGNO else 'no'}" for r, v in zip(rows, y, strict=True)
        ]  # fmt: skip
        write_text(run_dir / "stability.csv", "\n".join(csv) + "\n")
        if (run_dir / "report.html").exists():  # the report shows the integrations too
            results.write_report(run_dir)
    return summary
