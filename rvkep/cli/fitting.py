"""``rvkep check``, ``periodogram``, ``analyze``, ``demo`` and ``sample``: reading the
data, searching it, and the whole job on one star (the bundled demo star included).
"""

from __future__ import annotations

import argparse
import json

from rvkep.cli.arguments import add_arguments
from rvkep.cli.common import (
    add_files,
    analyze_options,
    demo_files,
    demo_folder,
    load,
    subcommand,
)
from rvkep.option_checks import check


def _run_check(args: argparse.Namespace) -> int:
    data = load(args)
    print(data.summary())
    print(f"reference epoch: {data.epoch:.1f} (same time system as the input)")
    if data.extra:
        print("extra columns: " + ", ".join(data.extra))
    return 0


def _add_check(sub) -> argparse.ArgumentParser:
    p = subcommand(sub, "check", "read and validate RV files, print a summary",
                    "Read and validate RV files; print per instrument the number of points, "
                    "time span, median error and RMS.", _run_check)  # fmt: skip
    add_files(p)
    add_arguments(p, "check")
    return p


def _run_periodogram(args: argparse.Namespace) -> int:
    from rvkep.errors import OptionError

    check({k: getattr(args, k) for k in ("min_period", "max_period")}, "periodogram")
    data = load(args)
    from rvkep.data import check_size
    from rvkep.outputs import save_figure
    from rvkep.period_search import search
    from rvkep.plots import plot_periodograms

    check_size(data)
    try:
        result = search(
            data,
            min_period=args.min_period,
            max_period=args.max_period,
            fap_threshold=args.fap,
            max_signals=args.max_signals,
            trend=args.trend,
            kind=args.search,
            n_bootstrap=args.bootstrap,
            rng=args.seed,
        )
    except ValueError as exc:
        raise OptionError(str(exc)) from None
    print(result.table())
    path = save_figure(plot_periodograms(result), f"{args.out}/periodogram.{args.format}")
    print(f"figure: {path}")
    return 0


def _add_periodogram(sub) -> argparse.ArgumentParser:
    p = subcommand(sub, "periodogram",
                    "search for periodic signals (iterative, with false-alarm levels)",
                    "Generalized Lomb-Scargle periodograms of the velocities and of the "
                    "residuals after each signal found, Baluev false-alarm probabilities, the "
                    "spectral window and alias flags.", _run_periodogram)  # fmt: skip
    add_files(p)
    add_arguments(p, "periodogram")
    return p


def _run_analyze(args: argparse.Namespace) -> int:
    from rvkep.pipeline import analyze

    analyze(args.files, analyze_options(args, "analyze"))
    return 0


def _add_analyze(sub) -> argparse.ArgumentParser:
    p = subcommand(sub, "analyze",
                    "the whole job: search, fit, sample, derive masses; tables and figures",
                    "Read and validate the data, search for signals, decide the number of "
                    "companions, fit, sample the posterior to convergence, derive minimum "
                    "masses and orbit sizes, and write results.json, summary.md, LaTeX/CSV "
                    "tables, samples and figures.", _run_analyze)  # fmt: skip
    add_files(p, required=False)
    add_arguments(p, "analyze")
    return p


def _run_demo(args: argparse.Namespace) -> int:
    from rvkep.errors import DataError
    from rvkep.pipeline import analyze

    folder = demo_folder()
    if not (folder / "truth.json").exists():
        raise DataError(f"{folder}: demo data missing from this installation of rvkep")
    files = demo_files()
    truth = json.loads((folder / "truth.json").read_text())
    if args.star_mass is None:
        args.star_mass = truth["star"]["mass_msun"]
        args.star_mass_err = truth["star"]["mass_err_msun"]
    args.star_name = args.star_name or truth["star"].get("name", "Veyla")
    if not args.quiet:
        print(
            "demo: the invented star Veyla, seen by two invented spectrographs "
            f"(kestrel, osprey); truth in {folder / 'truth.json'}"
        )
    analyze(files, analyze_options(args, "demo"))
    if not args.quiet:
        print(f"open {args.out}/report.html in a browser (or summary.md and the figures)")
    return 0


def _demo_star_text() -> str:
    try:
        star = json.loads((demo_folder() / "truth.json").read_text())["star"]
        return f"the demo star's, {star['mass_msun']:g} +- {star['mass_err_msun']:g}"
    except (OSError, ValueError, KeyError):
        return "the demo star's"


def _add_demo(sub) -> argparse.ArgumentParser:
    p = subcommand(
        sub,
        "demo",
        "run analyze on the bundled demo star",
        "Run the whole job on the bundled invented demo star.",
        _run_demo,
    )
    add_arguments(p, "demo", shown_defaults={"star_mass": _demo_star_text(),
                                                     "seed": "0"})  # fmt: skip
    return p


def _run_sample(args: argparse.Namespace) -> int:
    from rvkep.errors import OptionError
    from rvkep.modelfile import read_model_file
    from rvkep.pipeline import analyze

    spec = read_model_file(args.model)
    if not spec.companions:
        raise OptionError(f"{args.model}: no [[companion]] table; rvkep sample fits the "
                          "companions a model file describes (rvkep analyze --model "
                          f"{args.model} searches for them)")  # fmt: skip
    analyze(args.files, analyze_options(args, "sample", model=args.model, trend=0))
    return 0


def _add_sample(sub) -> argparse.ArgumentParser:
    p = subcommand(sub, "sample", "sample the posterior of a hand-written model file",
                    "Best fit and posterior sampling of the companions a model file "
                    "describes (no search decides their number); same outputs as analyze.",
                    _run_sample)  # fmt: skip
    p.add_argument("model", metavar="MODEL.toml")
    p.add_argument("files", nargs="*", metavar="DATA", help="RV tables (default: the model's)")
    add_arguments(p, "sample")
    return p


#: this family's subcommands, each ``add(subparsers)`` returning its parser
SUBCOMMANDS = [_add_check, _add_periodogram, _add_analyze, _add_demo, _add_sample]
