"""The parameter table as CSV: one row per estimate (median, minus, plus, unit), under
a first line that says what kind of run made it."""

from __future__ import annotations

from rvkep import __version__
from rvkep.report.rows import parameter_rows

__all__ = ["render"]

SUFFIX = ".csv"


def render(results) -> str:
    out = [
        f"# rvkep {__version__}: {results.run_label()}",
        "object,parameter,median,minus,plus,unit",
    ]
    for row in parameter_rows(results):
        e = row.estimate
        out.append(f"{row.object},{row.key},{e['median']:.10g},{e['minus']:.6g},{e['plus']:.6g},"
                   f"{row.unit_plain}")  # fmt: skip
    return "\n".join(out) + "\n"
