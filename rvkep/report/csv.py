"""The parameter table as CSV: one row per estimate (median, minus, plus, unit), under
a first line that says what kind of run made it."""

from __future__ import annotations

import csv
import io

from rvkep import __version__
from rvkep.names import csv_cell
from rvkep.report.rows import parameter_rows

__all__ = ["render"]

SUFFIX = ".csv"


def render(results) -> str:
    """The parameter table of ``results`` as CSV: one row per parameter (object,
    parameter, median, minus, plus, unit), after a comment line saying what kind of run
    made it.

    Parameters
    ----------
    results : Results
        A finished run.

    Returns
    -------
    str
        The CSV text.
    """
    buf = io.StringIO()
    buf.write(f"# rvkep {__version__}: {results.run_label()}\n")
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(["object", "parameter", "median", "minus", "plus", "unit"])
    for row in parameter_rows(results):
        e = row.estimate
        # names of the user's (instruments, companions) quoted as CSV needs and never
        # read as a spreadsheet formula
        w.writerow([csv_cell(row.object), csv_cell(row.key), f"{e['median']:.10g}",
                    f"{e['minus']:.6g}", f"{e['plus']:.6g}", row.unit_plain])  # fmt: skip
    return buf.getvalue()
