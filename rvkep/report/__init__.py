"""Report renderers: each format is one module with ``render(results) -> str`` (and
its file suffix), registered in :data:`RENDERERS`; the tables all draw from
:func:`rvkep.report.rows.parameter_rows`.

Adding a format is one new file plus one line here.
"""

from __future__ import annotations

import importlib

__all__ = ["RENDERERS", "render", "available_formats"]

#: format name -> module
RENDERERS = {
    "markdown": "rvkep.report.markdown",
    "latex": "rvkep.report.latex",
    "csv": "rvkep.report.csv",
    "html": "rvkep.report.html",
}


def available_formats() -> list[str]:
    """The report formats :func:`render` writes.

    Returns
    -------
    list of str
        Their names (``markdown``, ``latex``, ``csv``, ...).
    """
    return list(RENDERERS)


def render(results, fmt: str) -> str:
    """``results`` rendered in format ``fmt``.

    Parameters
    ----------
    results : Results
        A finished run.
    fmt : str
        One of :func:`available_formats`.

    Returns
    -------
    str
        The document.
    """
    try:
        module = RENDERERS[fmt]
    except KeyError:
        raise ValueError(
            f"unknown report format {fmt!r}; available: {', '.join(RENDERERS)}"
        ) from None
    return importlib.import_module(module).render(results)
