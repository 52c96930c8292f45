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


# each entry adds one subcommand: add(subparsers) -> None, setting defaults(run=...)
_SUBCOMMANDS: list = [_add_check]


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


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
