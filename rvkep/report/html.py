"""The HTML report (report.html): one self-contained page per run.

Everything is inline: the style sheet, the figures (PNG as data URIs, taken from the
run's folder when it has them), no script and no request to any other host or file,
so the page opens offline, mails as one attachment and prints. Order: the verdict
(companions with P, K, e, M sin i, a), the warnings that must not be missed (quick
mode, no convergence, assumed stellar mass, ambiguous periods, activity), figures, the
parameter table with asymmetric errors, instruments, the companion-number and trend
comparisons, the search, the sampler, priors, detection limits when run, and how to
make the run again (version, command, seed, input checksums).

The page is a jinja2 template shipped with the package (``templates/report.html.j2``);
the numbers are formatted by :mod:`rvkep.formatting` from results.json's own values,
and each carries its exact value in a ``data-median`` attribute.
"""

from __future__ import annotations

import base64
from pathlib import Path

from rvkep.formatting import scaled_uncertain, text_estimate
from rvkep.style import companion_colour

__all__ = ["render", "SUFFIX", "FIGURE_ORDER", "figure_files", "environment"]

SUFFIX = ".html"

#: Figures embedded, in this order, when the run's folder has them ({L}: each label).
FIGURE_ORDER = (
    ("timeseries.png", "The velocities and the model"),
    ("phase_{L}.png", "Companion {L}, folded on its period"),
    ("periodogram.png", "The search's periodograms"),
    ("stacked.png", "Each signal's power as the observations accumulate (stacked periodogram)"),
    ("limits.png", "Detection limits"),
    ("trend_companion.png", "What the trend implies: the least mass of its cause"),
    ("corner_{L}.png", "Companion {L}: posterior"),
)

_VERDICT = (("period_d", "P", "d"), ("K_mps", "K", "m/s"), ("ecc", "e", ""),
            ("msini_mjup", "M sin i", "M_Jup"), ("msini_mearth", "M sin i", "M_Earth"),
            ("a_au", "a", "au"))  # fmt: skip
_NAMES = {
    "period_d": "P", "K_mps": "K", "ecc": "e", "omega_deg": "omega", "tp_bjd": "t_p",
    "tc_bjd": "t_c", "msini_mjup": "M sin i", "msini_mearth": "M sin i", "a_au": "a",
    "periastron_au": "periastron", "apastron_au": "apastron",
    "mass_function_msun": "mass function", "transit_probability": "transit probability",
    "teq_k": "T_eq", "insolation_earth": "insolation", "offset_mps": "offset",
    "jitter_mps": "jitter",
}  # fmt: skip


def environment():
    """The jinja2 environment of the package's templates (autoescaped).

    Returns
    -------
    jinja2.Environment
        The environment (made once).
    """
    try:
        import jinja2
    except ImportError:  # pragma: no cover - a dependency
        from rvkep.errors import OptionError

        raise OptionError("the HTML report needs jinja2: pip install jinja2") from None
    env = jinja2.Environment(
        loader=jinja2.PackageLoader("rvkep.report", "templates"),
        autoescape=jinja2.select_autoescape(["html", "j2"]),
        trim_blocks=True, lstrip_blocks=True, keep_trailing_newline=True,
    )  # fmt: skip
    env.filters["shown"] = shown_value
    return env


#: how the sampler table names emcee's moves
_MOVES = {"de": "differential evolution (emcee DEMove, 80%) with snooker (20%)",
          "stretch": "affine-invariant stretch (emcee StretchMove)",
          "de+stretch": "differential evolution (80%) with stretch (20%)"}  # fmt: skip


def shown_value(value, key: str = "") -> str:
    """A results.json value as a reader reads it: yes/no for a switch, a list joined
    (or "none"), numbers to 4 digits, emcee's moves named."""
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, (list, tuple)):
        return ", ".join(map(str, value)) or "none"
    if isinstance(value, float):
        return f"{value:.4g}"
    if key == "moves":
        return _MOVES.get(str(value), str(value))
    return str(value)


def figure_files(results, folder: Path) -> list[tuple[str, Path]]:
    """(caption, path) of the figures in ``folder``, in :data:`FIGURE_ORDER`.

    Parameters
    ----------
    results : Results
        A finished run (its companions name the phase and corner figures).
    folder : Path
        The run folder.

    Returns
    -------
    list of (str, Path)
        The figures found.
    """
    out = []
    for pattern, caption in FIGURE_ORDER:
        labels = results.labels if "{L}" in pattern else [None]
        for L in labels:
            name = pattern.format(L=L)
            if (folder / name).exists():
                out.append((caption.format(L=L), folder / name))
    return out


def _estimate(e: dict | None, key: str) -> dict | None:
    if e is None:
        return None
    v, m, p, k = scaled_uncertain(e["median"], e["minus"], e["plus"])
    return {"key": key, "median": repr(float(e["median"])), "value": v, "minus": m, "plus": p,
            "same": m == p, "text": text_estimate(e), "exp": k}  # fmt: skip


def _context(results, folder: Path | None, name: str | None) -> dict:
    from rvkep import __version__
    from rvkep.report.rows import TEQ_ASSUMPTIONS, parameter_rows, support_lines

    d = results.to_dict()
    planets = []
    for k, p in enumerate(d["planets"]):
        cells = [_estimate(p.get(key), f"{p['label']}.{key}") for key, _, _ in _VERDICT]
        planets.append({"label": p["label"], "colour": companion_colour(k), "cells": cells})
    warnings = list(results.run_marks())
    for note in d.get("notes", []):  # the run's own notes, less what the marks said
        if not (results.quick and note.lower().startswith("quick mode")):
            warnings.append(note)
    for k, c in enumerate(d.get("search", []), 1):
        if c.get("significant") and c.get("aliases_flagged"):
            warnings.append(f"signal {k} ({c['period_d']:.5g} d): alias candidates "
                            f"{', '.join(c['aliases_flagged'])} are possible")  # fmt: skip
        if c.get("significant") and c.get("activity"):
            warnings.append(f"signal {k} ({c['period_d']:.5g} d) also peaks in the activity "
                            f"indicator(s) {', '.join(c['activity'])}")  # fmt: skip
    rows = []
    for r in parameter_rows(results):
        label = _NAMES.get(r.key, r.key.replace("_", " "))
        rows.append({"object": r.object, "name": label, "unit": r.unit_plain,
                     "est": _estimate(r.estimate, f"{r.object}.{r.key}")})  # fmt: skip
    figures = []
    if folder is not None:
        for caption, path in figure_files(results, folder):
            data = base64.b64encode(path.read_bytes()).decode("ascii")
            figures.append({"caption": caption, "uri": f"data:image/png;base64,{data}",
                            "name": path.name})  # fmt: skip
    instruments = [{**i, "offset": _estimate(i["offset_mps"], f"offset.{i['name']}"),
                    "jitter": _estimate(i["jitter_mps"], f"jitter.{i['name']}")}
                   for i in d["instruments"]]  # fmt: skip
    star = d["star"]
    megno = None  # rvkep stability's integrations of this run, when made
    if folder is not None and (folder / "stability.json").is_file():
        import json

        try:
            megno = json.loads((folder / "stability.json").read_text(encoding="utf-8"))
        except (OSError, ValueError):
            megno = None
    return {
        "megno": megno,
        "title": name or "rvkep run", "d": d, "planets": planets, "warnings": warnings,
        "figures": figures, "rows": rows, "instruments": instruments, "star": star,
        "version": __version__, "run_label": results.run_label(),
        "provenance": d.get("provenance") or {"command": "not recorded", "seed": d.get("seed"),
                                              "inputs": []},
        "verdict_heads": [(h, u) for _, h, u in _VERDICT], "n_points": len(results.data),
        "epoch": f"{results.data.epoch:.1f}", "teq_note": TEQ_ASSUMPTIONS,
        "support": [line for line in support_lines(d["planets"]) if line],
    }  # fmt: skip


def render(results, folder: str | Path | None = None, name: str | None = None) -> str:
    """The report of ``results`` as one HTML page; the figures are those found in
    ``folder`` (none without it); ``name`` titles the page (default: the star's name,
    else the folder's).

    Parameters
    ----------
    results : Results
        A finished run.
    folder : str or Path, optional
        The run folder.
    name : str, optional
        The page's title.

    Returns
    -------
    str
        The HTML page.
    """
    folder = Path(folder) if folder is not None else None
    if name is None:
        name = results.star_name or results.to_dict()["star"].get("name")
    if name is None and folder is not None:
        name = folder.resolve().name
    return environment().get_template("report.html.j2").render(**_context(results, folder, name))
