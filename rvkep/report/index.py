"""The batch index (index.html): one row per target of a target list, sortable and
filterable by a few lines of inline script (no library), thumbnails of each star's
time series linking to its report.html, failed targets with their one-line error.

Links and thumbnails are relative (``./<name>/report.html``, ``./<name>/timeseries.png``,
the name percent-encoded: no target name can become a scheme such as ``javascript:``),
so the output folder can be moved or archived whole.
"""

from __future__ import annotations

from pathlib import Path

from rvkep.names import relative_link

__all__ = ["render_index"]


def render_index(out: str | Path, rows: list[dict], title: str | None = None) -> str:
    """The index page of a batch folder ``out`` from the summary's rows
    (:func:`rvkep.batch.write_summary`): each ``target`` row (``name``, ``status``,
    ``n_planets``, ``seconds``, ``error``, ``converged``) with the periods and M sin i of
    its ``companion`` rows.

    Parameters
    ----------
    out : str or Path
        The batch folder.
    rows : list of dict
        The summary's rows.
    title : str, optional
        The page's title (default: the folder's name).

    Returns
    -------
    str
        The HTML page.
    """
    from rvkep import __version__
    from rvkep.report.html import environment

    out = Path(out)
    companions: dict[str, list[dict]] = {}
    for r in rows:
        if r["row"] == "companion":
            companions.setdefault(r["name"], []).append(r)
    shown = []
    for t in (r for r in rows if r["row"] == "target"):
        folder = out / t["name"]
        own = companions.get(t["name"], [])
        shown.append({
            "name": t["name"], "status": t.get("status", ""), "n_planets": t.get("n_planets", ""),
            "seconds": t.get("seconds", ""), "error": t.get("error", ""),
            "converged": t.get("converged", ""),
            "periods": [float(c["period_d"]) for c in own],
            "msini": [float(c["msini_mjup"]) for c in own],
            "report": relative_link(t["name"], "report.html")
            if (folder / "report.html").exists() else "",
            "thumb": relative_link(t["name"], "timeseries.png")
            if (folder / "timeseries.png").exists() else "",
        })  # fmt: skip
    n_done = sum(r["status"] == "done" for r in shown)
    n_failed = sum(r["status"] == "failed" for r in shown)
    return environment().get_template("index.html.j2").render(
        title=title or out.resolve().name, rows=shown, version=__version__, n_done=n_done,
        n_failed=n_failed, population=population_summary(out),
    )  # fmt: skip


def population_summary(out: Path) -> dict | None:
    """The newest ``rvkep population`` result written into a subfolder of the batch
    folder ``out`` (its population.json), as the index shows it; None without one."""
    import json

    found = sorted(out.glob("*/population.json"), key=lambda p: p.stat().st_mtime)
    if not found:
        return None
    try:
        doc = json.loads(found[-1].read_text())
    except (OSError, ValueError):
        return None
    folder = found[-1].parent.name
    ecc = doc.get("eccentricity", {})
    occ = doc.get("occurrence", {})
    figures = [relative_link(folder, n) for n in ("eccentricity.png", "occurrence.png")
               if (found[-1].parent / n).exists()]  # fmt: skip
    return {"n_stars": doc.get("n_stars"), "n_companions": doc.get("n_companions"),
            "ecc_mean": ecc.get("mean"), "ecc_a": ecc.get("a"), "ecc_b": ecc.get("b"),
            "fraction": occ.get("fraction"), "period_range": occ.get("period_range_d"),
            "mass_range": occ.get("msini_range_mjup"), "n_skipped": len(doc.get("skipped", [])),
            "summary": relative_link(folder, "population.md"), "figures": figures}  # fmt: skip
