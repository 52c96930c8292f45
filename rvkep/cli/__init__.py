"""The ``rvkep`` command (one module per family of subcommands: fitting, forecasting,
surveys; what they share in :mod:`rvkep.cli.common`).

A thin layer over the library: each subcommand parses its options, calls the same
functions a notebook would, and turns every :class:`rvkep.errors.RvkepError` into one
line on standard error with exit status 2. Heavy libraries are imported inside the
subcommands so that ``rvkep --help`` starts fast.
"""

from __future__ import annotations

import argparse
import errno
import sys
from collections.abc import Sequence

from rvkep import __version__
from rvkep.cli import fitting, forecasting, surveys
from rvkep.cli.arguments import Parser
from rvkep.cli.common import BATCH_FAILED_EXIT, demo_files, demo_folder
from rvkep.errors import RvkepError

__all__ = ["main", "build_parser", "BATCH_FAILED_EXIT", "demo_folder", "demo_files"]


def build_parser() -> argparse.ArgumentParser:
    """The argument parser with every subcommand (options from :mod:`rvkep.options`).

    Returns
    -------
    argparse.ArgumentParser
        The ``rvkep`` parser; each subcommand's ``run`` is set as its default.
    """
    parser = Parser(
        prog="rvkep",
        description=(
            "Find, fit and sample Keplerian orbits in stellar radial-velocity data "
            "from one or several spectrographs."
        ),
    )
    parser.add_argument("--version", action="version", version=f"rvkep {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    for add in _SUBCOMMANDS:
        p = add(sub)
        parser.subcommands[p.prog.split()[-1]] = p
    return parser


# the order ``rvkep --help`` lists the subcommands in
_SUBCOMMANDS = [*fitting.SUBCOMMANDS[:5], *surveys.SUBCOMMANDS[:1], *forecasting.SUBCOMMANDS,
                *surveys.SUBCOMMANDS[1:]]  # fmt: skip

#: Failures of the machine rather than of rvkep (a full disk, a quota, a read-only or
#: failing file system): one line and exit status 2, like a bad input.
_MACHINE_ERRORS = {
    getattr(errno, name) for name in ("ENOSPC", "EDQUOT", "EFBIG", "EROFS", "EACCES", "EIO",
                                      "EPERM", "ENAMETOOLONG") if hasattr(errno, name)
}  # fmt: skip


#: Where each subcommand writes: options naming a file, options naming a folder. Both
#: are checked before any work (rvkep.outputs): a file's folder must exist, a folder must
#: be new (its parent existing), empty, or one rvkep wrote.
_FILE_OPTIONS = {"predict": ("out",), "events": ("out",), "plan": ("out", "figure")}
_FOLDER_OPTIONS = {"analyze": "out", "demo": "out", "sample": "out", "batch": "out",
                   "limits": "out", "population": "out"}  # fmt: skip


def _check_outputs(args: argparse.Namespace) -> None:
    from rvkep.outputs import check_output_file, check_output_folder

    for name in _FILE_OPTIONS.get(args.command, ()):
        if getattr(args, name, None):
            check_output_file(getattr(args, name), "--" + name)
    name = _FOLDER_OPTIONS.get(args.command)
    if name and getattr(args, name, None):
        check_output_folder(getattr(args, name), "--" + name)
    if args.command == "periodogram":  # one figure, into a folder made if its parent exists
        from pathlib import Path

        out = Path(args.out)
        check_output_file(out / "periodogram.png" if out.is_dir() else out, "--out")


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point of the ``rvkep`` console script; returns the exit status.

    Parameters
    ----------
    argv : sequence of str, optional
        The arguments after ``rvkep`` (default: the command line's).

    Returns
    -------
    int
        0 on success, 2 for a usage or input error (one line on standard error), 3 when
        targets of a batch failed, 130 when interrupted.
    """
    parser = build_parser()
    argv = list(sys.argv[1:] if argv is None else argv)
    try:
        args, extras = parser.parse_known_args(argv)
        if extras:  # named by the subcommand, with a close match
            sub = parser.subcommands.get(getattr(args, "command", None) or "", parser)
            sub.error(sub.unknown(extras))
    except SystemExit as exc:  # --help, --version (0) or a usage error (2, one line said)
        return int(exc.code or 0)
    args.argv = argv
    if not getattr(args, "run", None):
        parser.print_help(sys.stderr)
        print("rvkep: error: name a command (rvkep demo runs the bundled example)",
              file=sys.stderr)  # fmt: skip
        return 2
    try:
        _check_outputs(args)
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
    except OSError as exc:
        if exc.errno not in _MACHINE_ERRORS:
            raise
        where = f"{exc.filename}: " if exc.filename else ""
        print(f"rvkep {args.command}: error: {where}{exc.strerror or exc}", file=sys.stderr)
        return 2
