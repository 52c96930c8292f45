"""``rvkep batch``, ``limits``, ``page``, ``stability`` and ``population``: many targets,
injection and recovery, the report page, the dynamics of the draws, and the population.
"""

from __future__ import annotations

import argparse
import sys

from rvkep import options
from rvkep.cli.arguments import add_arguments
from rvkep.cli.common import (
    BATCH_FAILED_EXIT,
    subcommand,
)


def _run_batch(args: argparse.Namespace) -> int:
    from rvkep.batch import run_batch

    try:
        infos = run_batch(args.targets, args.out, workers=args.workers,
                          scheduler=args.scheduler, seed=args.seed, quiet=args.quiet,
                          quick=args.quick)  # fmt: skip
    except KeyboardInterrupt:
        print(f"rvkep batch: interrupted; what finished is in {args.out}/summary.csv "
              "(run the same command again to go on)", file=sys.stderr)  # fmt: skip
        return 130
    failed = [n for n, i in infos.items() if i["status"] == "failed"]
    if not args.quiet:
        done = sum(i["status"] in ("done", "skipped") for i in infos.values())
        print(f"{done} of {len(infos)} target(s) complete, {len(failed)} failed; "
              f"summary: {args.out}/summary.csv")  # fmt: skip
    if failed:
        print(f"rvkep batch: {len(failed)} target(s) failed: {', '.join(failed[:5])}"
              + (" ..." if len(failed) > 5 else ""), file=sys.stderr)  # fmt: skip
        return BATCH_FAILED_EXIT
    return 0


def _add_batch(sub) -> argparse.ArgumentParser:
    optional = ", ".join(o.name for o in options.columns()
                         if o.name not in options.TARGET_REQUIRED)  # fmt: skip
    p = subcommand(sub, "batch",
                    "run the whole job over a target list (local processes or a Dask cluster)",
                    "Run analyze for every target of a CSV list into DIR/<name>/, skipping "
                    "complete targets, and write DIR/summary.csv. Columns: "
                    f"{', '.join(options.TARGET_REQUIRED)} (required); optional, one per "
                    f"analyze option (an empty cell keeps the default): {optional}.",
                    _run_batch)  # fmt: skip
    p.add_argument("targets", metavar="TARGETS.csv")
    add_arguments(p, "batch")
    return p


def _run_limits(args: argparse.Namespace) -> int:
    from pathlib import Path

    from rvkep.limits import run_limits, setup_from_results, write_limits
    from rvkep.results import Results

    periods, masses = args.periods, args.masses
    res = Results.load(args.run_dir)
    setup = setup_from_results(res, n_injections=args.injections, periods=periods,
                               masses=masses, n_periods=args.grid, n_masses=args.grid,
                               seed=args.seed, fap=args.fap)  # fmt: skip
    out = Path(args.out or args.run_dir)
    if out.resolve() != Path(args.run_dir).resolve():
        import shutil

        from rvkep.outputs import make_output_folder

        make_output_folder(out)
        for name in ("results.json", "summary.md"):
            shutil.copyfile(Path(args.run_dir) / name, out / name)
    limits = run_limits(setup, out, workers=args.workers, scheduler=args.scheduler,
                        quiet=args.quiet)  # fmt: skip
    paths = write_limits(limits, res, out)
    if not args.quiet:
        cells = setup.shape[0] * setup.shape[1]
        print(f"limits: {cells} cells x {setup.n_injections} injections in "
              f"{limits.seconds:.1f} s; wrote {', '.join(str(p) for p in paths)}")  # fmt: skip
    return 0


def _add_limits(sub) -> argparse.ArgumentParser:
    p = subcommand(sub, "limits", "detection limits of a finished run by injection and recovery",
                    "Inject companions into the residuals of a finished run's chosen model on a "
                    "log-spaced grid of period and M sin i (random phases, eccentricities from "
                    "Beta(0.867, 3.03)), put each through the search's acceptance rule "
                    "(highest periodogram peak above the false-alarm level, within 1% of the "
                    "injected period) and write limits.csv, limits_curves.csv (50% and 95% "
                    "completeness) and limits.png. Period rows run on local processes or a "
                    "Dask cluster; a killed run resumes.", _run_limits)  # fmt: skip
    p.add_argument("run_dir", metavar="RUN_DIR")
    add_arguments(p, "limits")
    return p


def _run_report(args: argparse.Namespace) -> int:
    from rvkep.results import Results

    res = Results.load(args.run_dir)
    path = res.write_report(args.run_dir)
    if not args.quiet:
        print(f"page: {path}")
    return 0


def _add_report(sub) -> argparse.ArgumentParser:
    p = subcommand(sub, "page", "write report.html for a finished run (one self-contained page)",
                    "Read a finished run and write RUN_DIR/report.html: the verdict, the "
                    "warnings, the figures found in the folder (embedded), the parameter table, "
                    "instruments, comparisons, search, sampler, priors, detection limits and "
                    "how to make the run again, in one file with no outside requests.",
                    _run_report)  # fmt: skip
    p.add_argument("run_dir", metavar="RUN_DIR")
    add_arguments(p, "page")
    return p


def _run_stability(args: argparse.Namespace) -> int:
    from rvkep.chaos import run_stability

    out = run_stability(args.run_dir, draws=args.draws, orbits=args.orbits,
                        workers=args.workers, scheduler=args.scheduler, seed=args.seed,
                        quiet=args.quiet)  # fmt: skip
    if not args.quiet:
        frac = out["fraction_regular"]
        print(f"{out['draws']} draws over {out['orbits_of_outermost']:g} outer orbits: "
              f"{frac:.0%} regular (MEGNO <= {out['regular_if_megno_at_most']}), median MEGNO "
              f"{out['megno_median']:.3g}; wrote {args.run_dir}/stability.json and "
              "stability.csv")  # fmt: skip
    return 0


def _add_stability(sub) -> argparse.ArgumentParser:
    p = subcommand(sub, "stability", "integrate posterior draws of a finished run and measure "
                    "their chaos (MEGNO)", "Integrate posterior draws of a finished "
                    "multi-companion run with REBOUND (the dynamics extra) for a number of "
                    "outer orbits, with the MEGNO chaos indicator (Cincotta & Simo 2000): "
                    "about 2 for a regular system, growing for a chaotic one. Writes "
                    "stability.json and stability.csv into RUN_DIR; draws run on local "
                    "processes or a Dask cluster.", _run_stability)  # fmt: skip
    p.add_argument("run_dir", metavar="RUN_DIR")
    add_arguments(p, "stability")
    return p


def _run_population(args: argparse.Namespace) -> int:
    from rvkep.hierarchy import run_population

    run_population(args.batch_dir, args.out, period_range=args.period_range,
                   mass_range=args.mass_range, seed=args.seed,
                   include_quick=args.include_quick, quiet=args.quiet)  # fmt: skip
    return 0


def _add_population(sub) -> argparse.ArgumentParser:
    p = subcommand(sub, "population", "from a batch's stars to a population: eccentricities "
                    "and occurrence", "Read every finished target of a batch folder and infer "
                    "the eccentricity distribution (importance reweighting of each star's "
                    "samples with its prior divided out, Hogg, Myers & Bovy 2010: a Beta "
                    "population and a histogram) and the fraction of stars with a companion "
                    "in a period x m sin i box, each star's completeness from its rvkep "
                    "limits output; write population.json, population.md and figures.",
                    _run_population)  # fmt: skip
    p.add_argument("batch_dir", metavar="BATCH_DIR")
    add_arguments(p, "population")
    return p


#: this family's subcommands, each ``add(subparsers)`` returning its parser
SUBCOMMANDS = [_add_batch, _add_limits, _add_report, _add_population, _add_stability]
