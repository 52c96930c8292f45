"""The ``rvkep`` command.

A thin layer over the library: each subcommand parses its options, calls the same
functions a notebook would, and turns every :class:`rvkep.errors.RvkepError` into one
line on standard error with exit status 2. Heavy libraries are imported inside the
subcommands so that ``rvkep --help`` starts fast.
"""

from __future__ import annotations

import argparse
import sys
from collections.abc import Sequence

from rvkep import __version__
from rvkep.errors import RvkepError

__all__ = ["main", "build_parser"]


def build_parser() -> argparse.ArgumentParser:
    """The argument parser with every subcommand."""
    parser = argparse.ArgumentParser(
        prog="rvkep",
        description=(
            "Find, fit and sample Keplerian orbits in stellar radial-velocity data "
            "from one or several spectrographs."
        ),
    )
    parser.add_argument("--version", action="version", version=f"rvkep {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    for add in _SUBCOMMANDS:
        add(sub)
    return parser


def _add_data_args(p: argparse.ArgumentParser) -> None:
    p.add_argument(
        "files",
        nargs="+",
        metavar="FILE",
        help="RV tables (one per instrument, or with an instrument column)",
    )
    p.add_argument("--kms", action="store_true", help="velocities and errors are in km/s")


def _load(args: argparse.Namespace):
    """Read the data files, printing unit warnings as one line each."""
    import warnings

    from rvkep.data import UnitWarning, load_rv

    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", UnitWarning)
        data = load_rv(args.files, kms=args.kms)
    for w in caught:
        if issubclass(w.category, UnitWarning):
            print(f"rvkep {args.command}: warning: {w.message}", file=sys.stderr)
    return data


def _run_check(args: argparse.Namespace) -> int:
    data = _load(args)
    print(data.summary())
    print(f"reference epoch: {data.epoch:.1f} (same time system as the input)")
    if data.extra:
        print("extra columns: " + ", ".join(data.extra))
    return 0


def _add_check(sub) -> None:
    p = sub.add_parser(
        "check",
        help="read and validate RV files, print a summary",
        description="Read and validate RV files; print per instrument the "
        "number of points, time span, median error and RMS.",
    )
    _add_data_args(p)
    p.set_defaults(run=_run_check)


def _run_periodogram(args: argparse.Namespace) -> int:
    from rvkep.errors import OptionError

    data = _load(args)
    from rvkep.outputs import save_figure
    from rvkep.plots import plot_periodograms
    from rvkep.search import search

    try:
        result = search(
            data,
            min_period=args.min_period,
            max_period=args.max_period,
            fap_threshold=args.fap,
            max_signals=args.max_signals,
            trend=args.trend,
        )
    except ValueError as exc:
        raise OptionError(str(exc)) from None
    print(result.table())
    path = save_figure(plot_periodograms(result), f"{args.out}/periodogram.{args.format}")
    print(f"figure: {path}")
    return 0


def _add_periodogram(sub) -> None:
    p = sub.add_parser(
        "periodogram",
        help="search for periodic signals (iterative, with false-alarm levels)",
        description="Generalized Lomb-Scargle periodograms of the velocities and of the "
        "residuals after each signal found, Baluev false-alarm probabilities, the "
        "spectral window and alias flags.",
    )
    _add_data_args(p)
    p.add_argument(
        "--min-period",
        type=float,
        default=None,
        metavar="DAYS",
        help="shortest period searched (default 1.2 d)",
    )
    p.add_argument(
        "--max-period",
        type=float,
        default=None,
        metavar="DAYS",
        help="longest period searched (default: the time span)",
    )
    p.add_argument(
        "--fap",
        type=float,
        default=1e-3,
        help="false-alarm probability below which a peak counts (default 0.001)",
    )
    p.add_argument("--max-signals", type=int, default=5, help="most signals to look for")
    p.add_argument(
        "--trend",
        type=int,
        default=0,
        choices=(0, 1, 2),
        help="polynomial trend degree fitted along (default 0)",
    )
    p.add_argument("--out", default=".", metavar="DIR", help="folder for the figure")
    p.add_argument("--format", default="png", choices=("png", "pdf"), help="figure format")
    p.set_defaults(run=_run_periodogram)


# each entry adds one subcommand: add(subparsers) -> None, setting defaults(run=...)
_SUBCOMMANDS: list = [_add_check, _add_periodogram]


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point of the ``rvkep`` console script; returns the exit status."""
    parser = build_parser()
    args = parser.parse_args(argv)
    if not getattr(args, "run", None):
        parser.print_help()
        return 0
    try:
        return int(args.run(args) or 0)
    except RvkepError as exc:
        print(f"rvkep {args.command}: error: {exc}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print(f"rvkep {args.command}: interrupted", file=sys.stderr)
        return 130
    except BrokenPipeError:  # output piped into a program that stopped reading
        import os

        os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())
        return 0


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
