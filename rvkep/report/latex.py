"""The parameter table as LaTeX (two significant digits on the uncertainty, the value
rounded to match, asymmetric errors as superscript/subscript)."""

from __future__ import annotations

from rvkep import __version__
from rvkep.formatting import latex_value
from rvkep.names import latex_escape
from rvkep.report.rows import TEQ_ASSUMPTIONS, parameter_rows

__all__ = ["render", "latex_escape"]

SUFFIX = ".tex"


def render(results) -> str:
    """The parameter table of ``results`` as a LaTeX ``table`` (values with asymmetric
    errors, text cells escaped), after a comment line saying what kind of run made it.

    Parameters
    ----------
    results : Results
        A finished run.

    Returns
    -------
    str
        The LaTeX text.
    """
    lines = [f"% rvkep {__version__}: {results.run_label()}"]
    lines += [
        r"\begin{table}",
        r"\centering",
        r"\caption{Orbital and derived parameters (posterior median and 68\% interval)"
        + ("" if not results.run_marks() else f" [{latex_escape(results.run_label())}]")
        + ".}",
        r"\begin{tabular}{llll}",
        r"\hline",
        r"Object & Parameter & Value & Unit \\",
        r"\hline",
    ]
    for row in parameter_rows(results):
        e = row.estimate
        value = latex_value(e["median"], e["minus"], e["plus"])
        lines.append(f"{latex_escape(row.object)} & {row.symbol} & {value} & {row.unit} \\\\")
    lines += [r"\hline", r"\end{tabular}"]
    if any(r.key == "teq_k" for r in parameter_rows(results)):
        lines.append(r"\par\smallskip{\footnotesize " + latex_escape(TEQ_ASSUMPTIONS) + ".}")
    lines.append(r"\end{table}")
    return "\n".join(lines) + "\n"
