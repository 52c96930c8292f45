"""A run's folder read back: the data exactly as the run used them (``data.csv``), the
best fit rebuilt from ``model.json``, and the JSON-safe copy every file is written from.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np

from rvkep.posterior import PosteriorSamples

__all__ = ["load_fit", "data_csv", "read_data_csv", "clean"]


def load_fit(folder: Path, data, star, saved: dict, posterior: PosteriorSamples):
    """The best fit of a saved run rebuilt from ``model.json`` on its data (None when
    the folder has no model.json); the posterior's sampler coordinates restored.

    Parameters
    ----------
    folder : Path
        The run folder.
    data : RVData
        The run's data.
    star : StarProperties or None
        The run's star.
    saved : dict
        results.json's content.
    posterior : PosteriorSamples
        The saved posterior (its sampler coordinates are set here).

    Returns
    -------
    FitResult or None
        The best fit.
    """
    from rvkep.errors import DataError
    from rvkep.model import Elements, SystemModel
    from rvkep.optimize import _result

    path = folder / "model.json"
    if not path.exists():
        return None
    try:
        stored = json.loads(path.read_text(encoding="utf-8"))
        model = SystemModel.from_dict(stored["model"], data, star)
        fit = _result(model, np.array(stored["best_fit_theta"], float))
    except (OSError, ValueError, KeyError, TypeError) as exc:
        raise DataError(f"{path}: damaged ({exc})") from None
    want = float(saved["best_fit"]["log_likelihood"])
    if not abs(fit.log_likelihood - want) <= 1e-6 * max(1.0, abs(want)):
        raise DataError(f"{folder}: model.json and results.json disagree (best-fit ln L "
                        f"{fit.log_likelihood:.6f}, saved {want:.6f})")  # fmt: skip
    cols = {k: v for k, v in posterior.columns.items()
            if k.startswith(("jitter.", "noise.", "dynamics."))}  # fmt: skip
    for c in model.companions:
        cols.update(Elements.from_columns(c.label, posterior.columns).columns())
    posterior.theta = model.from_physical(cols)
    posterior.model = model
    return fit


def data_csv(data) -> str:
    """The data a run used, exactly (shortest round-trip reprs), for Results.load.

    Parameters
    ----------
    data : RVData
        The data.

    Returns
    -------
    str
        The CSV text.
    """
    import csv
    import io

    extra = list(data.extra)
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(["time", "rv", "err", "instrument", *extra])
    for i in range(len(data)):
        numbers = [data.time[i], data.rv[i], data.err[i]]
        w.writerow([*(repr(float(x)) for x in numbers), str(data.instrument[i]),
                    *(repr(float(data.extra[k][i])) for k in extra)])  # fmt: skip
    return buf.getvalue()


def read_data_csv(path: Path, epoch: float):
    """The RVData written by :func:`data_csv` (extras may hold NaN where a file had
    no such column).

    Parameters
    ----------
    path : Path
        The data.csv of a run folder.
    epoch : float
        The run's reference epoch (days).

    Returns
    -------
    RVData
        The data.
    """
    import csv

    from rvkep.data import RVData

    with open(path, newline="", encoding="utf-8") as fh:
        rows = list(csv.reader(fh))
    header, body = rows[0], rows[1:]
    cols = list(zip(*body, strict=True)) if body else [[] for _ in header]
    num = {name: np.array(cols[j], float) for j, name in enumerate(header) if name != "instrument"}
    extra = {k: v for k, v in num.items() if k not in ("time", "rv", "err")}
    return RVData(num["time"], num["rv"], num["err"], np.array(cols[header.index("instrument")]),
                  extra, [str(path)], epoch)  # fmt: skip


def clean(x):
    """JSON-safe copy: numpy scalars to floats, NaN/inf to None.

    Parameters
    ----------
    x : object
        Any nesting of dicts, lists, tuples, numpy arrays and scalars.

    Returns
    -------
    object
        The copy.
    """
    if isinstance(x, dict):
        return {str(k): clean(v) for k, v in x.items()}
    if isinstance(x, (list, tuple)):
        return [clean(v) for v in x]
    if isinstance(x, (np.floating, float)):
        return float(x) if np.isfinite(x) else None
    if isinstance(x, np.integer):
        return int(x)
    if isinstance(x, np.bool_):
        return bool(x)
    return x


