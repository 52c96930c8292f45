"""The model choice's rules across trend degrees, companion counts and harmonics.

* *Maxima, not local optima* (:func:`nested_refits`): a higher trend degree with the
  same number of companions contains the lower one (its trend coefficient at zero), so
  its best fit is also started from the lower degree's optimum; ln L never falls
  along the chain.
* *Occam by parameter count* (:func:`occam_choice`): every candidate (trend degree x
  companion count the search found significant) is ordered by its number of free
  parameters, and a candidate with more is chosen over the current choice only if it
  lowers the BIC by more than :data:`BIC_THRESHOLD` (10: "very strong" on the scale of
  Kass & Raftery 1995). A trend degree thus competes with a companion at its own
  price (one parameter against five).
* *Harmonic or eccentricity* (:func:`harmonic_check`): a companion at P/2, P/3 or 2P of
  another (within the frequency resolution 1/T) is kept only if it beats the other
  companion alone, refitted with e free from several (e, omega) starts, by more than
  10 in BIC: an eccentric orbit's first harmonic is not a planet.
* *Ambiguity* (:func:`alternatives`): a candidate with other periods within 10 in BIC
  of the choice, or within 3 in ln L at the same parameter count, is named.
* *Orbits longer than the data* (:func:`long_period_stage`): the periodogram cannot
  rank periods beyond the span, where a partial orbit looks like a trend. For each
  companion count, the fit with one companion fewer is also given a companion on a
  log grid of periods from half the span to :data:`rvkep.defaults.LONG_PERIOD_SPANS`
  spans (several (e, omega, phase) starts each); it replaces the search's fit of that
  count when its likelihood is higher. It then competes with the trend degrees on
  equal terms, by parameter count.

References
----------
.. [1] Kass, R. E. & Raftery, A. E. (1995), JASA 90, 773.
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np

__all__ = ["BIC_THRESHOLD", "LNL_CLOSE", "nested_refits", "occam_choice", "harmonic_check",
           "alternatives", "periods_of", "HARMONICS", "instrument_support",
           "season_support", "season_notes", "stacked_power", "seasons", "SEASON_GAP",
           "support_check",
           "long_period_stage", "LONG_PERIOD_GRID"]  # fmt: skip

BIC_THRESHOLD = 10.0
#: periods of the long-period stage's grid (log-spaced over [span / 2, 10 spans])
LONG_PERIOD_GRID = 16
#: alternatives within this in ln L at equal parameter count are named
LNL_CLOSE = 3.0
#: period ratios (other / adopted) that an eccentric orbit's harmonics take
HARMONICS = ((0.5, "first harmonic (P/2)"), (1.0 / 3.0, "second harmonic (P/3)"),
             (2.0, "double period (2P)"))  # fmt: skip


def periods_of(fit) -> list[float]:
    """The companions' periods of a fit, in its order.

    Parameters
    ----------
    fit : FitResult
        A best fit.

    Returns
    -------
    list of float
        Periods, days.
    """
    return [float(fit.params[f"{c.label}.period"]) for c in fit.model.companions]


def _refit_from(fit, trend: int):
    """``fit``'s model at trend degree ``trend``, optimized from ``fit``'s optimum."""
    from rvkep.optimize import fit as optimize

    model = replace(fit.model, trend=trend)
    return optimize(model, starts=[model.from_physical(fit.params)[0]])


def nested_refits(fits_by_degree: list[list]) -> tuple[list[list], int]:
    """The fits per trend degree (index: degree order, then companion count) with each
    higher degree's fit restarted from the lower degree's optimum where that was
    better. The inputs are unchanged.

    Parameters
    ----------
    fits_by_degree : list of list of FitResult
        Per trend degree (lowest first), the fits by companion count.

    Returns
    -------
    tuple
        The new lists and the number of fits improved.
    """
    out = [list(f) for f in fits_by_degree]
    improved = 0
    for d in range(1, len(out)):
        for k in range(min(len(out[d]), len(out[d - 1]))):
            lower, here = out[d - 1][k], out[d][k]
            if here.log_likelihood >= lower.log_likelihood - 1e-6:
                continue
            again = _refit_from(lower, here.model.trend)
            if again.log_likelihood > here.log_likelihood:
                out[d][k] = again
                improved += 1
    return out, improved


def occam_choice(candidates: list) -> int:
    """The index of the chosen fit among ``candidates`` (FitResults): in order of
    their number of free parameters (then BIC), a candidate replaces the current
    choice only if its BIC is lower by more than BIC_THRESHOLD.

    Parameters
    ----------
    candidates : list of FitResult
        The competing models.

    Returns
    -------
    int
        The index of the chosen one.
    """
    order = sorted(range(len(candidates)), key=lambda i: (candidates[i].n_free,
                                                          candidates[i].bic))  # fmt: skip
    chosen = order[0]
    for i in order[1:]:
        if candidates[i].bic < candidates[chosen].bic - BIC_THRESHOLD:
            chosen = i
    return chosen


def _harmonic_pairs(fit, span: float):
    """(adopted label, other label, ratio name) for companions whose periods stand in a
    harmonic ratio within the frequency resolution 1/span."""
    ps = {c.label: fit.params[f"{c.label}.period"] for c in fit.model.companions}
    pairs = []
    for a, pa in ps.items():
        for b, pb in ps.items():
            if a == b:
                continue
            for ratio, name in HARMONICS:
                if abs(1.0 / pb - 1.0 / (ratio * pa)) < 1.0 / span:
                    pairs.append((a, b, name))
    # the smaller K is the one that may be the other's harmonic: tried first
    return sorted(pairs, key=lambda x: fit.params[f"{x[1]}.K"])


def _without(fit, drop: str, label: str | None = None):
    """Best fit without companion ``drop``, from the fit's own values; with ``label``,
    that companion refitted eccentric from several (e, omega) starts as well."""
    from rvkep.defaults import ecc_prior
    from rvkep.optimize import fit as optimize

    kept = [c for c in fit.model.companions if c.label != drop]
    # the orbit is refitted eccentric even where the search's fit had it circular
    kept = [replace(c, ecc=ecc_prior()) if c.label == label and c.circular else c for c in kept]
    model = fit.model.with_companions(kept)
    base = {k: v for k, v in fit.params.items() if not k.startswith(f"{drop}.")}
    starts = [model.from_physical(base)[0]]
    if label is not None:
        for e in (0.15, 0.3, 0.5):
            for w in np.linspace(0, 2 * math.pi, 4, endpoint=False):
                starts.append(model.from_physical({**base, f"{label}.ecc": e,
                                                   f"{label}.omega": w})[0])  # fmt: skip
    return optimize(model, starts=starts)


def harmonic_check(fit, span: float) -> tuple[object, list[str], list[dict]]:
    """Companions at a harmonic ratio of another: kept only if they beat the other
    refitted eccentric by more than BIC_THRESHOLD. Returns (the fit, dropped
    companions removed; the notes; one record per test: ``companion``, ``of``,
    ``ratio``, ``delta_bic``, ``kept``).

    Parameters
    ----------
    fit : FitResult
        The chosen fit.
    span : float
        The data's span (days), which sets the frequency resolution.

    Returns
    -------
    tuple
        The fit, the notes and the records.
    """
    notes, records = [], []
    tested = set()
    while True:
        pairs = [p for p in _harmonic_pairs(fit, span) if (p[0], p[1]) not in tested]
        if not pairs:
            return fit, notes, records
        a, b, name = pairs[0]
        tested.add((a, b))
        reduced = _without(fit, b, a)
        delta = reduced.bic - fit.bic  # > 0: the extra companion helps
        Pa, Pb = fit.params[f"{a}.period"], fit.params[f"{b}.period"]
        kept = delta > BIC_THRESHOLD
        records.append({"companion": b, "period_d": Pb, "of": a, "ratio": name,
                        "delta_bic": delta, "kept": kept,
                        "ecc_without": reduced.params[f"{a}.ecc"]})  # fmt: skip
        if kept and delta < 30:  # kept by a narrow margin: worth a look
            notes.append(f"{b} ({Pb:.5g} d) lies at the {name} of {a} ({Pa:.5g} d) and is kept: "
                         f"it beats {a} refitted eccentric by {delta:.1f} in BIC")  # fmt: skip
        elif not kept:
            notes.append(f"a companion at {Pb:.5g} d, the {name} of {a} ({Pa:.5g} d), was "
                         f"dropped: {a} refitted eccentric (e = "
                         f"{reduced.params[f'{a}.ecc']:.2f}) fits as well (BIC "
                         f"{'lower' if delta < 0 else 'higher'} by {abs(delta):.1f})")  # fmt: skip
            fit = reduced


def _same_periods(p: list[float], q: list[float], tol: float = 0.01) -> bool:
    if len(p) != len(q):
        return False
    return all(any(abs(x / y - 1.0) < tol for y in q) for x in p)


def alternatives(candidates: list, chosen) -> list[str]:
    """Notes naming candidates with other periods that fit nearly as well as
    ``chosen``: within BIC_THRESHOLD in BIC, or within LNL_CLOSE in ln L at the same
    number of free parameters (at most three, closest first).

    Parameters
    ----------
    candidates : list of FitResult
        Every model compared.
    chosen : FitResult
        The one chosen.

    Returns
    -------
    list of str
        The notes.
    """
    mine = periods_of(chosen)
    close = []
    for c in candidates:
        if c is chosen or _same_periods(periods_of(c), mine):
            continue
        dbic = c.bic - chosen.bic
        dlnl = c.log_likelihood - chosen.log_likelihood
        if abs(dbic) < BIC_THRESHOLD or (c.n_free == chosen.n_free and abs(dlnl) < LNL_CLOSE):
            close.append((abs(dbic), c, dbic, dlnl))
    notes = []
    for _, c, dbic, dlnl in sorted(close, key=lambda x: x[0])[:3]:
        periods = ", ".join(f"{p:.5g}" for p in periods_of(c)) or "none"
        notes.append(f"AMBIGUOUS model: trend degree {c.model.trend} with "
                     f"{len(c.model.companions)} companion(s) (periods {periods} d; "
                     f"{c.n_free} free parameters) fits nearly as well as the chosen one "
                     f"(BIC {'+' if dbic >= 0 else ''}{dbic:.1f}, ln L "
                     f"{'+' if dlnl >= 0 else ''}{dlnl:.1f})")  # fmt: skip
    return notes


#: a companion is "seen by one instrument only" when the semi-amplitudes fitted per
#: instrument disagree beyond this p-value (3 sigma) and only one finds it at 3 sigma
SUPPORT_P = 0.0027


#: the data are split into observing seasons where they pause for longer than this
#: (days; a star's conjunction with the Sun stops a season for months; common practice,
#: no source)
SEASON_GAP = 60.0


def seasons(time: np.ndarray) -> np.ndarray:
    """The observing season of every point: 0, 1, ... in time order, a new season after
    each pause longer than :data:`SEASON_GAP`.

    Parameters
    ----------
    time : ndarray
        Times (days), in any order.

    Returns
    -------
    ndarray of int
        The season of each point, in the given order.
    """
    time = np.asarray(time, float)
    order = np.argsort(time, kind="stable")
    starts = np.concatenate([[0], np.diff(time[order]) > SEASON_GAP]).cumsum()
    out = np.empty(time.size, dtype=int)
    out[order] = starts
    return out


def _own_signal(fit, label: str) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Companion ``label``'s unit-K curve at the data times, what the fit leaves plus
    its own curve (offsets, trend and the other companions removed), and each point's
    variance err^2 + jitter^2."""
    from rvkep.orbit import radial_velocity

    model, p = fit.model, fit.params
    t = model.data.time
    shape = radial_velocity(t, p[f"{label}.period"], p[f"{label}.tp"], p[f"{label}.ecc"],
                            p[f"{label}.omega"], 1.0)  # fmt: skip
    r = fit.residuals + p[f"{label}.K"] * shape
    jit = np.array([p[f"jitter.{inst.name}"] for inst in model.instruments])
    return shape, r, model.data.err**2 + jit[model.inst_index] ** 2


def _k_by_group(fit, label: str, groups: np.ndarray) -> tuple[dict, float]:
    """K of ``label`` solved in each group of points (integer labels ``groups``) by
    weighted least squares with the other elements fixed and one offset per instrument
    present in the group (weights 1 / (err^2 + jitter^2)); groups with fewer than three
    points, or where K is not determined, are left out. Also returns the fit's K."""
    model = fit.model
    shape, r, var = _own_signal(fit, label)
    w_all = 1.0 / var
    rows = {}
    for g in np.unique(groups):
        m = groups == g
        if m.sum() < 3:
            continue
        present = np.unique(model.inst_index[m])
        X = np.column_stack([shape[m], *(model.inst_index[m] == k for k in present)])
        w = w_all[m]
        try:
            cov = np.linalg.inv(X.T @ (w[:, None] * X))
        except np.linalg.LinAlgError:
            continue
        if not np.isfinite(cov[0, 0]) or cov[0, 0] <= 0:
            continue
        beta = cov @ (X.T @ (w * r[m]))
        rows[int(g)] = {"K": float(beta[0]), "sd": float(np.sqrt(cov[0, 0])),
                        "n": int(m.sum())}  # fmt: skip
    return rows, float(fit.params[f"{label}.K"])


def _consistency(values: list[dict], fallback_K: float) -> dict:
    """The weighted mean of per-group K and the chi-square of the groups about it."""
    from scipy.stats import chi2 as chi2_dist

    if len(values) < 2:
        return {"K": fallback_K, "chi2": 0.0, "p": 1.0}
    K = np.array([v["K"] for v in values])
    sd = np.array([v["sd"] for v in values])
    joint = float(np.sum(K / sd**2) / np.sum(1 / sd**2))
    chi2 = float(np.sum(((K - joint) / sd) ** 2))
    return {"K": joint, "chi2": chi2, "p": float(chi2_dist.sf(chi2, len(values) - 1))}


def instrument_support(fit, label: str) -> dict:
    """Companion ``label``'s semi-amplitude fitted per instrument with every other
    element fixed at the fit (its offset re-solved): ``K`` and ``sd`` per instrument
    (weights 1 / (err^2 + jitter^2), diagonal), the joint K, and the chi-square of the
    per-instrument values about it with its p-value (common practice, no source; the
    idea of a signal's support across data sets as in Mortier & Collier Cameron 2017,
    A&A 601, A110).

    Parameters
    ----------
    fit : FitResult
        The fit holding the companion.
    label : str
        The companion.

    Returns
    -------
    dict
        ``instruments`` (each one's ``K``, ``sd`` and ``n``), the joint ``K``, and
        ``chi2`` and ``p`` of the consistency test.
    """
    rows, K = _k_by_group(fit, label, fit.model.inst_index)
    names = [inst.name for inst in fit.model.instruments]
    by_name = {names[k]: v for k, v in rows.items()}
    return {"instruments": by_name, **_consistency(list(by_name.values()), K)}


def season_support(fit, label: str) -> dict:
    """Companion ``label``'s semi-amplitude fitted per observing season (:func:`seasons`)
    as :func:`instrument_support` fits it per instrument (each instrument's offset
    re-solved within the season): a real companion's K agrees from season to season,
    a passing activity signal's does not.

    Parameters
    ----------
    fit : FitResult
        The fit holding the companion.
    label : str
        The companion.

    Returns
    -------
    dict
        ``seasons`` (``start`` and ``end`` in the data's time, ``n``, ``K``, ``sd``), the
        joint ``K``, and ``chi2`` and ``p`` of the consistency test.
    """
    t = fit.model.data.time
    groups = seasons(t)
    rows, K = _k_by_group(fit, label, groups)
    out = [{"start": float(t[groups == g].min()), "end": float(t[groups == g].max()), **v}
           for g, v in sorted(rows.items())]  # fmt: skip
    return {"seasons": out, **_consistency(out, K)}


def support_check(fit) -> tuple[object, list[str]]:
    """Companions seen by one instrument only, where the others could test them and
    disagree (SUPPORT_P), are not adopted.

    Parameters
    ----------
    fit : FitResult
        The chosen fit.

    Returns
    -------
    tuple
        The fit without such companions, and the notes.
    """
    notes = []
    if len(fit.model.instruments) < 2:
        return fit, notes
    for c in list(fit.model.companions):
        s = instrument_support(fit, c.label)
        rows = s["instruments"]
        seen = [n for n, v in rows.items() if v["K"] > 3 * v["sd"]]
        testers = [n for n, v in rows.items() if n not in seen and v["sd"] < abs(s["K"]) / 2]
        if s["p"] >= SUPPORT_P or len(seen) != 1 or not testers:
            continue
        P = fit.params[f"{c.label}.period"]
        text = ", ".join(f"{n} {v['K']:.3g} +- {v['sd']:.2g}" for n, v in rows.items())
        notes.append(f"a companion at {P:.5g} d was not adopted: it is seen by {seen[0]} only "
                     f"(K per instrument: {text} m/s; chi2 {s['chi2']:.1f}, p = "
                     f"{s['p']:.2g}); {', '.join(testers)} could see it and do not")  # fmt: skip
        fit = _without(fit, c.label)
    return fit, notes


#: the stacked periodogram is evaluated at this many numbers of observations
STACKED_STEPS = 15


def stacked_power(fit, label: str, n_steps: int = STACKED_STEPS) -> list[dict]:
    """The stacked periodogram of companion ``label`` (Mortier & Collier Cameron 2017):
    the generalized Lomb-Scargle power at its period of the first N observations in
    time order, as N grows. The series is what the fit leaves plus this companion's own
    curve (offsets, trend and the other companions removed), weighted by
    1 / (err^2 + jitter^2). A coherent orbit's power grows with N (or holds, once the
    signal dominates the scatter); a signal that lives in part of the data falls when
    it fades.

    Parameters
    ----------
    fit : FitResult
        The fit holding the companion.
    label : str
        The companion.
    n_steps : int, optional
        How many values of N, spaced evenly in log N from 8 (or fewer, in a small data
        set) to all the points.

    Returns
    -------
    list of dict
        ``n`` and ``power`` (astropy's ``LombScargle``, standard normalization, floating
        mean) for each N.

    References
    ----------
    .. [1] Mortier, A. & Collier Cameron, A. (2017), A&A 601, A110.
    .. [2] Zechmeister, M. & Kuerster, M. (2009), A&A 496, 577.
    """
    from astropy.timeseries import LombScargle

    t = fit.model.data.time
    _, r, var = _own_signal(fit, label)
    dy = np.sqrt(var)
    order = np.argsort(t, kind="stable")
    t, r, dy = t[order], r[order], dy[order]
    first = min(8, t.size)
    counts = np.unique(np.geomspace(first, t.size, n_steps).round().astype(int))
    frequency = 1.0 / fit.params[f"{label}.period"]
    out = []
    for n in counts:
        power = LombScargle(t[:n], r[:n], dy[:n]).power(frequency) if n >= 4 else 0.0
        out.append({"n": int(n), "power": float(power)})
    return out


def season_notes(fit) -> list[str]:
    """Notes on signals that come and go, as stellar activity does, rather than orbits:
    each companion whose semi-amplitude differs between observing seasons beyond
    :data:`SUPPORT_P` (3 sigma; :func:`season_support`), and each pair of companions
    closer in frequency than 1 / span (the data cannot resolve them; a fading signal
    is fitted as two such beating sinusoids, each of constant K).

    Parameters
    ----------
    fit : FitResult
        The chosen fit.

    Returns
    -------
    list of str
        The notes (empty when none applies).
    """
    notes = []
    span = float(np.ptp(fit.model.data.time))
    comps = [(c.label, fit.params[f"{c.label}.period"]) for c in fit.model.companions]
    for i, (a, Pa) in enumerate(comps):
        for b, Pb in comps[i + 1:]:
            if span > 0 and abs(1.0 / Pa - 1.0 / Pb) < 1.0 / span:
                notes.append(f"{a} ({Pa:.5g} d) and {b} ({Pb:.5g} d) are closer in frequency "
                             f"than the data resolve (1 / span = {1.0 / span:.3g} per day): "
                             "together they describe one signal whose amplitude changes "
                             "over the data, as stellar activity does, not two orbits")  # fmt: skip
    for c in fit.model.companions:
        s = season_support(fit, c.label)
        if s["p"] >= SUPPORT_P:
            continue
        text = ", ".join(f"{v['K']:.3g} +- {v['sd']:.2g}" for v in s["seasons"])
        P = fit.params[f"{c.label}.period"]
        notes.append(f"the semi-amplitude of {c.label} ({P:.5g} d) differs between "
                     f"observing seasons (K per season {text} m/s; chi2 {s['chi2']:.1f}, "
                     f"p = {s['p']:.2g}): a signal that comes and goes may be stellar "
                     "activity")  # fmt: skip
    return notes


#: the long-period stage fits this many grid periods in full, from this many starts each
#: (the demo's model choice: 2.9 s without the stage, 4.4 s with it)
LONG_PERIOD_FULL_FITS, LONG_PERIOD_STARTS = 3, 3


def long_period_stage(fits: list, data, period_range,
                      n_starts: int = LONG_PERIOD_STARTS) -> tuple[list, list[str]]:  # fmt: skip
    """The fits by companion count (0 .. N), each count k >= 1 also tried as the fit
    with k - 1 companions plus one on the long-period grid (see the module text).

    Parameters
    ----------
    fits : list of FitResult
        The fits by companion count.
    data : RVData
        The velocities.
    period_range : tuple of float
        The search range (the grid starts at half the span).
    n_starts : int
        Starts per grid period.

    Returns
    -------
    tuple
        A copy of the list with the better fit of each count, and a note for each
        count where the long-period companion won.
    """
    from rvkep.defaults import LONG_PERIOD_SPANS, baseline
    from rvkep.errors import RvkepError
    from rvkep.optimize import _add_one

    span = baseline(data)
    out, notes = list(fits), []
    if span <= 0:
        return out, notes
    grid = np.geomspace(0.5 * span, LONG_PERIOD_SPANS * span, LONG_PERIOD_GRID)
    for k in range(1, len(out)):
        prev = out[k - 1]
        tries = []
        if prev is not fits[k - 1]:  # the count below changed: rebuild this one on it
            tries.append(("rebuilt", periods_of(fits[k])))
        if not any(p > 0.5 * span for p in periods_of(prev)):
            tries.append(("long", grid))  # one open orbit at a time: two are degenerate
        for kind, periods in tries:
            try:
                alt = _add_one(prev, data, periods, period_range, n_starts,
                               keep=LONG_PERIOD_FULL_FITS)  # fmt: skip
            except (RvkepError, ValueError, np.linalg.LinAlgError):
                continue
            if alt.log_likelihood <= out[k].log_likelihood + 1e-6:
                continue
            if kind == "long":
                P = periods_of(alt)[-1]
                notes.append(f"{k} companion(s), degree {alt.model.trend}: an orbit longer "
                             f"than half the data ({P:.5g} d, {P / span:.2g} x the span) "
                             f"fits better than the periodogram's choice (ln L "
                             f"{alt.log_likelihood:.2f} against "
                             f"{out[k].log_likelihood:.2f})")  # fmt: skip
            out[k] = alt
    return out, notes
