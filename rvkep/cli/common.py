"""What the subcommands share: making a subcommand's parser, the data-file argument,
reading the data with its warnings, the analysis options from the parsed arguments,
writing a CSV to a file or standard output, and where the bundled demo star lies.
"""

from __future__ import annotations

import argparse
import shlex
import sys
from pathlib import Path

from rvkep import options

#: Exit status of ``rvkep batch`` when one or more targets failed (the others ran and
#: the summary was written). 2 stays "a usage or input error", 130 "interrupted".
BATCH_FAILED_EXIT = 3


def subcommand(sub, name: str, help: str, description: str, run) -> argparse.ArgumentParser:
    """A subcommand's parser, its options from the table.

    Parameters
    ----------
    sub : argparse._SubParsersAction
        The parent's subparsers.
    name, help, description : str
        The subcommand's name, its line in the overview and its own ``--help`` text.
    run : callable
        ``run(args) -> int | None``, what the subcommand does.

    Returns
    -------
    argparse.ArgumentParser
        The subcommand's parser.
    """
    p = sub.add_parser(name, help=help, description=description)
    p.set_defaults(run=run)
    return p


def add_files(p: argparse.ArgumentParser, required: bool = True) -> None:
    """Add the positional data files to a subcommand's parser.

    Parameters
    ----------
    p : argparse.ArgumentParser
        The subcommand's parser.
    required : bool, optional
        At least one file (else a model file may name them).
    """
    p.add_argument("files", nargs="+" if required else "*", metavar="FILE",
                   help="RV tables (one per instrument, or with an instrument column)"
                   + ("" if required else "; default: the model file's"))  # fmt: skip


def load(args: argparse.Namespace):
    """Read the data files, printing unit warnings as one line each.

    Parameters
    ----------
    args : argparse.Namespace
        Parsed arguments with ``files`` (and the reading options).

    Returns
    -------
    RVData
        The velocities of every file.
    """
    import warnings

    from rvkep.data import DataWarning
    from rvkep.reading import load_rv

    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", DataWarning)
        data = load_rv(args.files, kms=args.kms)
    for w in caught:
        if issubclass(w.category, DataWarning):
            print(f"rvkep {args.command}: warning: {w.message}", file=sys.stderr)
    if getattr(args, "bin", None) is not None:
        from rvkep.pipeline import bin_data

        data, note = bin_data(data, args.bin)
        print(f"rvkep {args.command}: {note}", file=sys.stderr)
    return data


def analyze_options(args: argparse.Namespace, command: str, **fixed):
    """AnalyzeOptions from the parsed arguments of ``command`` (``fixed`` sets the
    options the command does not take).

    Parameters
    ----------
    args : argparse.Namespace
        The parsed arguments.
    command : str
        The subcommand they belong to.
    **fixed
        Options set by the subcommand itself.

    Returns
    -------
    AnalyzeOptions
        The run's options, with the command line kept for "how this was run".
    """
    from rvkep.pipeline import AnalyzeOptions

    given = {o.name: getattr(args, o.name) for o in options.python_options(command)}
    line = " ".join(["rvkep", *map(shlex.quote, getattr(args, "argv", []))])
    return AnalyzeOptions(**{**given, **fixed}, command=line)


def demo_folder():
    """The bundled demo star's folder (package data, present in any install).

    Returns
    -------
    Path
        The folder holding kestrel.txt, osprey.csv and truth.json.
    """
    return Path(__file__).resolve().parents[1] / "demo_data"


def demo_files() -> list[str]:
    """The bundled demo star's two velocity files (kestrel.txt, osprey.csv), as paths
    that exist in any installation: ``rvkep.analyze(rvkep.demo_files(), ...)``.

    Returns
    -------
    list of str
        The two paths.
    """
    folder = demo_folder()
    return [str(folder / "kestrel.txt"), str(folder / "osprey.csv")]


def write_table(out: str | None, comment: str, fields: list[str], rows: list[dict]) -> None:
    """The CSV of :func:`rvkep.outputs.write_csv` to ``out``, or to standard output.

    Parameters
    ----------
    out : str or None
        The file to write (atomically), or None for standard output.
    comment : str
        The header comment (what made the table).
    fields : list of str
        The columns, in order.
    rows : list of dict
        One dict per row.
    """
    from rvkep.outputs import check_output_file, write_csv

    if out:
        check_output_file(out)

    write_csv(out, comment, fields, rows, stream=sys.stdout)
