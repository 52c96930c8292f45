"""The batch index (index.html): one row per target of a target list, sortable and
filterable by a few lines of inline script (no library), thumbnails of each star's
time series linking to its report.html, failed targets with their one-line error.

Links and thumbnails are relative (``<name>/report.html``, ``<name>/timeseries.png``),
so the output folder can be moved or archived whole.
"""

from __future__ import annotations

import json
from pathlib import Path

__all__ = ["render_index"]


def render_index(out: str | Path, targets: list[dict], title: str | None = None) -> str:
    """The index page of a batch folder ``out``; ``targets`` are the summary's target
    rows (``name``, ``status``, ``n_planets``, ``seconds``, ``error``, ``converged``)."""
    from rvkep import __version__
    from rvkep.report.html import environment

    out = Path(out)
    rows = []
    for t in targets:
        folder = out / t["name"]
        periods, msini = [], []
        if t.get("status") == "done":
            try:
                res = json.loads((folder / "results.json").read_text())
            except (OSError, ValueError):
                res = {}
            periods = [p["period_d"]["median"] for p in res.get("planets", [])]
            msini = [p["msini_mjup"]["median"] for p in res.get("planets", [])]
        rows.append({
            "name": t["name"], "status": t.get("status", ""), "n_planets": t.get("n_planets", ""),
            "seconds": t.get("seconds", ""), "error": t.get("error", ""),
            "converged": t.get("converged", ""), "periods": periods, "msini": msini,
            "report": f"{t['name']}/report.html" if (folder / "report.html").exists() else "",
            "thumb": f"{t['name']}/timeseries.png" if (folder / "timeseries.png").exists() else "",
        })  # fmt: skip
    n_done = sum(r["status"] == "done" for r in rows)
    n_failed = sum(r["status"] == "failed" for r in rows)
    return environment().get_template("index.html.j2").render(
        title=title or out.resolve().name, rows=rows, version=__version__, n_done=n_done,
        n_failed=n_failed,
    )  # fmt: skip
