"""Whether the data constrain a companion's period and semi-amplitude, or the prior
does: two checks on the posterior samples against the sampling prior.

* *Data-blind*: the posterior's central 68% interval is at least :data:`BLIND_RATIO`
  of the prior's (log scale for a log-uniform prior); the estimate is then mostly the
  prior's, and a note says so (a 4000-6000 d uniform prior on 320 days of data gave
  P = 5000 +660 -670 d, the prior's own spread).
* *Piled at an end*: more than :data:`PILE_SHARE` of the samples lie in the prior's
  last 5% (by prior mass) at either end, where 5% would fall by chance: the prior cuts
  the posterior, as a period range that ends before the orbit does.

Common practice, no source: comparing posterior and prior widths is the usual quick
look at prior sensitivity.
"""

from __future__ import annotations

import numpy as np

__all__ = ["prior_notes", "BLIND_RATIO", "PILE_SHARE"]

BLIND_RATIO = 0.7
PILE_SHARE = 0.3

_WHAT = {"period": ("period", "d"), "K": ("semi-amplitude K", "m/s")}


def _width(x: np.ndarray, log: bool) -> float:
    lo, hi = np.percentile(np.log(x) if log else x, [15.865, 84.135])
    return float(hi - lo)


def prior_notes(model, columns: dict) -> list[str]:
    """Notes on each companion's period and K whose posterior (``columns``, physical
    samples by name) is mostly its prior, or piles up at one of its ends.

    Parameters
    ----------
    model : SystemModel
        The sampled model (its priors).
    columns : dict
        Physical posterior samples by name.

    Returns
    -------
    list of str
        One note per parameter the data barely constrain (empty when none).
    """
    notes = []
    for c in model.companions:
        for key, (what, unit) in _WHAT.items():
            prior = getattr(c, key)
            x = np.asarray(columns.get(f"{c.label}.{key}", ()), float)
            if prior.is_fixed or x.size < 20 or not np.all(np.isfinite(x)):
                continue
            log = prior.kind == "loguniform"
            if log and np.any(x <= 0):
                continue
            p16, p84 = (float(v) for v in prior.ppf(np.array([0.15865, 0.84135])))
            prior_width = (np.log(p84) - np.log(p16)) if log else (p84 - p16)
            ratio = _width(x, log) / prior_width if prior_width > 0 else 0.0
            name = f"{c.label}.{key}"
            if ratio >= BLIND_RATIO:
                notes.append(f"the data barely constrain {name}: its posterior is "
                             f"{100 * ratio:.0f}% as wide as its prior {prior.describe()}, so "
                             f"the estimate is mostly the prior's; widen the prior or treat "
                             f"the {what} as unknown")  # fmt: skip
                continue
            lo5, hi95 = (float(v) for v in prior.ppf(np.array([0.05, 0.95])))
            for share, end, edge in ((np.mean(x >= hi95), "upper", prior.bounds[1]),
                                     (np.mean(x <= lo5), "lower", prior.bounds[0])):  # fmt: skip
                if share > PILE_SHARE:
                    hint = (" (the orbit may be longer than the range searched: raise "
                            "--max-period)" if key == "period" and end == "upper" else "")
                    notes.append(f"the posterior of {name} piles up at the {end} end of its "
                                 f"prior ({100 * share:.0f}% of the samples in the prior's "
                                 f"last 5% before {edge:.6g} {unit}){hint}")  # fmt: skip
    return notes
