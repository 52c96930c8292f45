"""Stage 3 of the job: the model choice. How many companions, which periods, which trend
degree, which dynamics, and (with --evidence) the evidence of each companion count.

How many companions: the iterative search proposes signals while the highest residual
peak has a Baluev false-alarm probability below the threshold (0.1% by default); a
proposed companion is kept only if adding it also lowers the BIC of the joint best fit
by more than 10 ("very strong" evidence on the scale of Kass & Raftery 1995). The BIC
of every candidate number, including one more than chosen, is reported. A model file
with companions, or ``companions=N``, fixes the number instead. The rules across trend
degrees, counts and harmonics are in :mod:`rvkep.choice`.

References
----------
.. [1] Kass, R. E. & Raftery, A. E. (1995), JASA 90, 773.
"""

from __future__ import annotations

import time
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

from rvkep.data import RVData
from rvkep.errors import OptionError, RvkepError
from rvkep.evidence import compute_evidence, run_seed
from rvkep.messages import say as _say
from rvkep.options import TREND_DEGREES, parse_trend
from rvkep.rotation import near_rotation, rotation_notes, rotation_prior, star_rotation

if TYPE_CHECKING:
    from rvkep.pipeline import AnalyzeOptions

__all__ = [
    "BIC_THRESHOLD",
    "choose_companions",
    "select_companions",
    "choose_across",
    "star_rotation",
    "ModelChoice",
    "choose_model",
]


BIC_THRESHOLD = 10.0


def choose_companions(search_result, data, base, period_range, max_companions: int,
                      notes: list | None = None):  # fmt: skip
    """Fits with 0 .. N+1 companions and the chosen N (FAP and BIC, see module text),
    each count also tried with an orbit longer than the data
    (:func:`rvkep.choice.long_period_stage`, its notes appended to ``notes``).

    Returns (fits, n_chosen, comparison rows).

    Parameters
    ----------
    search_result : SearchResult
        The iterative search at one trend degree.
    data : RVData
        The velocities.
    base : SystemModel
        The model without companions.
    period_range : (float, float)
        The searched periods (days).
    max_companions : int
        The most companions tried.
    notes : list of str, optional
        Appended to.

    Returns
    -------
    fits : list of FitResult
        By number of companions.
    n_chosen : int
        The chosen number.
    rows : list of dict
        The comparison table.
    """
    from rvkep.choice import long_period_stage
    from rvkep.optimize import fit_companions

    fits = list(search_result.fits)
    n_fap = len(search_result.significant)
    # one more than the search accepted, from the best remaining peaks, for the table
    if n_fap < max_companions:
        from rvkep.period_search import candidate_periods

        pg = search_result.periodograms[n_fap]
        peaks = candidate_periods(pg, data.time, period_range)
        try:
            extra = fit_companions(
                data, [peaks], base=base, period_range=period_range, previous=fits[n_fap]
            )
            fits = fits[: n_fap + 1] + [extra]
        except (RvkepError, ValueError, np.linalg.LinAlgError):
            fits = fits[: n_fap + 1]
    fits, stage_notes = long_period_stage(fits, data, period_range)
    if notes is not None:
        notes.extend(stage_notes)
    n = n_fap
    while n > 0 and fits[n].bic > fits[n - 1].bic - BIC_THRESHOLD:
        n -= 1
    rows = _comparison_rows(fits, n, search_result)
    return fits, n, rows


def select_companions(data, base, opts: AnalyzeOptions, spec=None):
    """Search and choose the companions for one trend degree (``base.trend``).

    Returns (search result, chosen fit, companion-number comparison rows, message,
    the fits by number of companions, notes).

    Parameters
    ----------
    data : RVData
        The velocities.
    base : SystemModel
        The model without companions (its trend degree is the one tried).
    opts : AnalyzeOptions
        The run's options.
    spec : ModelSpec, optional
        The model file.

    Returns
    -------
    tuple
        The six values above.
    """
    from rvkep.choice import long_period_stage
    from rvkep.optimize import fit_companions
    from rvkep.period_search import search

    try:
        search_result = search(
            data, opts.min_period, opts.max_period, opts.fap,
            max_signals=opts.companions if opts.companions is not None else opts.max_companions,
            trend=base.trend, base=base, kind=opts.search, rng=run_seed(opts, spec),
            n_bootstrap=opts.bootstrap,
        )  # fmt: skip
    except ValueError as exc:
        raise OptionError(str(exc)) from None
    period_range = (1.0 / search_result.frequency[-1], 1.0 / search_result.frequency[0])
    if spec and spec.companions:
        fit = fit_companions(data, [[c.start["period"]] for c in spec.companions], base=base,
                             specs=spec.companions, period_range=period_range)  # fmt: skip
        fits = [search_result.fits[0], fit]
        comparison = _comparison_rows(fits, 1, search_result)
        comparison[1]["n_companions"] = len(spec.companions)
        return (search_result, fit, comparison,
                f"model file: {len(spec.companions)} companion(s)", fits, [])  # fmt: skip
    if opts.companions is not None:
        fits = list(search_result.fits)
        from rvkep.period_search import candidate_periods, residual_periodogram

        while len(fits) <= opts.companions:  # the search stopped early: add the best peaks
            pg = residual_periodogram(fits[-1], search_result.frequency, "residuals")
            fits.append(fit_companions(data, [candidate_periods(pg, data.time, period_range)],
                                       base=base, period_range=period_range,
                                       previous=fits[-1]))  # fmt: skip
        fits, notes = long_period_stage(fits[: opts.companions + 1], data, period_range)
        comparison = _comparison_rows(fits, opts.companions, search_result)
        return (search_result, fits[opts.companions], comparison,
                f"{opts.companions} companion(s) fitted as asked (--companions)", fits,
                notes)  # fmt: skip
    notes: list[str] = []
    fits, n, comparison = choose_companions(
        search_result, data, base, period_range, opts.max_companions, notes
    )
    message = (f"search: {len(search_result.significant)} significant signal(s); "
               f"{n} companion(s) kept after the BIC comparison")  # fmt: skip
    return search_result, fits[n], comparison, message, fits, notes


def choose_across(outcomes: list, data, fixed: bool, spec=None):
    """The choice over every trend degree and companion count (:mod:`rvkep.choice`):
    nested refits so that ln L never falls with the degree, Occam by parameter count
    over all candidates, the harmonic check of the chosen companions and the
    alternatives that fit nearly as well.

    ``outcomes`` are :func:`select_companions`' results per degree; ``fixed``: the
    number of companions is given (model file or ``--companions``). Returns (search
    result, fit, companion-number rows, message, fits by count, model rows, notes, the
    harmonic tests' records).

    Parameters
    ----------
    outcomes : list of tuple
        :func:`select_companions` per trend degree.
    data : RVData
        The velocities.
    fixed : bool
        The number of companions is given.
    spec : ModelSpec, optional
        The model file.

    Returns
    -------
    tuple
        The eight values above.
    """
    from rvkep import choice as rules

    per_degree = [list(o[4]) for o in outcomes]
    notes: list[str] = []
    chosen_notes = [n for o in outcomes for n in (o[5] if len(o) > 5 else [])]
    if len(outcomes) > 1:
        per_degree, _ = rules.nested_refits(per_degree)
    cands = _candidates(outcomes, per_degree, fixed)
    chosen = cands[rules.occam_choice([per_degree[d][k] for d, k in cands])]
    d, k = chosen
    fit = per_degree[d][k]
    span = float(data.time.max() - data.time.min())
    harmonics: list[dict] = []  # every harmonic test, for results.json

    def harmonic(f):
        reduced, found, records = rules.harmonic_check(f, span)
        harmonics.extend(records)
        return reduced, found

    checks = (harmonic, rules.support_check)
    for check in checks if not fixed else ():
        if not fit.model.companions:
            break
        reduced, check_notes = check(fit)
        notes += check_notes
        if reduced is not fit:  # a companion dropped: the better fit of that count stands
            k = len(reduced.model.companions)
            if reduced.bic < per_degree[d][k].bic:
                per_degree[d][k] = reduced
            fit = per_degree[d][k]
    search_result = outcomes[d][0]
    fits = per_degree[d]
    comparison = _comparison_rows(fits, k, search_result)
    if spec and spec.companions:
        comparison[1]["n_companions"] = len(spec.companions)
        message = f"model file: {len(spec.companions)} companion(s)"
    elif fixed:
        message = f"{k} companion(s) fitted as asked (--companions)"
    else:
        message = (f"search: {len(search_result.significant)} significant signal(s); {k} "
                   "companion(s) kept after the BIC comparison")  # fmt: skip
    rows = _model_rows(per_degree, cands, (d, k))
    if not fixed:
        notes += rules.alternatives([per_degree[a][b] for a, b in cands], fit)
    prefix = f"{k} companion(s), degree {fit.model.trend}:"  # the chosen model's own stage
    notes += [n for n in chosen_notes if n.startswith(prefix)]
    return search_result, fit, comparison, message, fits, rows, notes, harmonics


def _candidates(outcomes: list, per_degree: list, fixed: bool) -> list[tuple[int, int]]:
    """The models that compete, as (degree index, companion count): at each degree every
    count up to the significant signals, or only the count given."""
    cands = []
    for d, (o, fits) in enumerate(zip(outcomes, per_degree, strict=True)):
        if fixed:
            cands.append((d, len(fits) - 1))
        else:
            n_sig = min(len(o[0].significant), len(fits) - 1)
            cands.extend((d, k) for k in range(n_sig + 1))
    return cands


def _model_rows(per_degree: list, cands: list, chosen: tuple[int, int]) -> list[dict]:
    """One row per competing model for results.json's ``model_comparison``."""
    from rvkep.choice import periods_of

    best_bic = min(per_degree[a][b].bic for a, b in cands)
    rows = []
    for a, b in cands:
        f = per_degree[a][b]
        rows.append({
            "degree": f.model.trend, "n_companions": len(f.model.companions),
            "periods_d": periods_of(f), "n_free": f.n_free,
            "log_likelihood": f.log_likelihood, "bic": f.bic, "delta_bic": f.bic - best_bic,
            "chosen": (a, b) == chosen,
        })  # fmt: skip
    return rows


def _selection_notes(search_result, fit, comparison) -> list[str]:
    """Warnings about the choice that must reach every output: ambiguous periods, and
    a better-scoring model that the rule did not choose."""
    notes = []
    by_label = {}
    if search_result is not None:
        # a search candidate belongs to the companion fitted at its period (a model
        # file's companions need not be the search's, nor in its order)
        for c in fit.model.companions:
            P = fit.params[f"{c.label}.period"]
            for cand in search_result.significant:
                if abs(cand.period / P - 1.0) < 0.01:
                    by_label[c.label] = cand
                    break
    for label, cand in by_label.items():
        if cand.ambiguous_with:
            alts = ", ".join(f"{a['period_d']:.6g} d (ln L lower by {a['delta_ln_l']:.1f})"
                             for a in cand.ambiguous_with)  # fmt: skip
            notes.append(f"period of {label} is AMBIGUOUS: {cand.period:.6g} d fits best, "
                         f"but {alts} fit(s) nearly as well")  # fmt: skip
    for label, cand in by_label.items():
        if cand.activity and fit.model.noise in ("white", "night") and not fit.model.decorrelate:
            cols = ",".join(cand.activity)
            notes.append(f"the period of {label} ({cand.period:.6g} d) also peaks in {cols}: it "
                         f"may be stellar activity; --noise gp (a correlated-noise model) or "
                         f"--decorrelate {cols} can tell")  # fmt: skip
    chosen = next((r for r in comparison if r.get("chosen")), None)
    if chosen is not None:
        for r in comparison:
            more = r["n_companions"] > chosen["n_companions"]
            if more and r["bic"] < chosen["bic"] - BIC_THRESHOLD:
                notes.append(
                    f"a model with {r['n_companions']} companions has a BIC lower by "
                    f"{chosen['bic'] - r['bic']:.1f} but was not chosen (its last periodogram "
                    "peak was not significant)"
                    + near_rotation(fit, r["periods_d"])
                    + "; inspect it before trusting the number"
                )
                break
    return notes


def _comparison_rows(fits, chosen: int, search_result) -> list[dict]:
    """The companion-number comparison table (one row per number of companions)."""
    best_bic = min(f.bic for f in fits)
    rows = []
    for k, f in enumerate(fits):
        fap = None
        if 0 < k <= len(search_result.candidates):
            fap = search_result.candidates[k - 1].fap
        rows.append({
            "n_companions": k,
            "log_likelihood": f.log_likelihood,
            "bic": f.bic,
            "delta_bic": f.bic - best_bic,
            "aic": f.aic,
            "periods_d": [f.params[f"{c.label}.period"] for c in f.model.companions],
            "fap_of_last": fap,
            "chosen": k == chosen,
        })  # fmt: skip
    return rows


def _with_rotation(base, rotation, opts: AnalyzeOptions):
    """``base`` with the star's rotation as the prior of its GP's rotation period (said
    on the terminal); unchanged without a rotation or a GP."""
    if rotation is None:
        return base
    given = rotation_prior(base, rotation)
    if given is not base:
        _say(opts, f"rotation period: normal prior {rotation[0]:g} +- {rotation[1]:g} d "
             "on the activity signal")  # fmt: skip
    return given


@dataclass
class ModelChoice:
    """What :func:`choose_model` decided: the search, the chosen fit, the
    companion-number and trend comparison tables, and the notes to report."""

    search: object
    fit: object
    comparison: list[dict]
    trend_rows: list[dict]
    notes: list[str]
    fits: list = field(default_factory=list)  # by number of companions, 0 .. N + 1
    evidence: list[dict] = field(default_factory=list)  # ln Z per number of companions
    nested: object = None  # the nested run of the chosen model, when there is one
    extra_notes: list[str] = field(default_factory=list)  # from the evidence stage
    dynamics_rows: list[dict] = field(default_factory=list)  # Keplerian against N-body
    harmonic_checks: list[dict] = field(default_factory=list)  # rvkep.choice.harmonic_check
    timings: dict = field(default_factory=dict)  # seconds: model_choice, evidence


def choose_model(data: RVData, opts: AnalyzeOptions, spec=None,
                 folder: Path | None = None) -> ModelChoice:  # fmt: skip
    """Stage 3: the trend degree(s) to try, the search and the number of companions for
    each, and the choice between them (see the module text); with evidences asked for,
    their nested runs (checkpointed in ``folder`` when given).

    Parameters
    ----------
    data : RVData
        The velocities.
    opts : AnalyzeOptions
        The run's options.
    spec : ModelSpec, optional
        The model file.
    folder : Path, optional
        The run folder (nested runs' checkpoints).

    Returns
    -------
    ModelChoice
        The choice, its tables and notes.
    """
    from rvkep.model import SystemModel

    columns = tuple(dict.fromkeys([*(spec.decorrelate if spec else ()), *opts.decorrelate]))
    try:
        if spec:
            base = spec.base_model(data, opts.noise)
        else:
            from rvkep.noise import default_noise_model

            base = SystemModel(data, [], noise=opts.noise or default_noise_model(data))
        base = replace(base, decorrelate=columns)
    except ValueError as exc:
        raise OptionError(str(exc)) from None
    if columns:
        n_terms = len(base.linear_names) - len(base.instruments) - base.trend
        _say(opts, f"decorrelating against {', '.join(columns)} ({n_terms} coefficient(s))")
    rotation = star_rotation(opts, spec)
    base = _with_rotation(base, rotation, opts)
    base = base.noise_model.initial(base)  # start values of its own parameters
    if base.noise_parameters:
        _say(
            opts, f"noise model: {base.noise} ({', '.join(p.name for p in base.noise_parameters)})"
        )
    try:
        trend = parse_trend(opts.trend)
    except ValueError as exc:
        raise OptionError(f"--trend {exc}") from None
    if spec is not None and spec.trend is not None:
        degrees = [spec.trend]  # the model file fixes it
    else:
        degrees = list(TREND_DEGREES) if trend == "auto" else [trend]
    t0 = time.perf_counter()
    outcomes = [select_companions(data, replace(base, trend=d), opts, spec) for d in degrees]
    fixed = bool(spec and spec.companions) or opts.companions is not None
    (search_result, fit, comparison, message, fits, trend_rows, rule_notes,
     harmonics) = choose_across(outcomes, data, fixed, spec)  # fmt: skip
    _say(opts, message)
    if len(outcomes) > 1:
        _say(opts, f"trend: degree {fit.model.trend} chosen of 0, 1, 2 (BIC by parameter count, "
                   "see trend_comparison)")  # fmt: skip
    choice = ModelChoice(search_result, fit, comparison, trend_rows, [], fits)
    choice.harmonic_checks = harmonics
    choice.extra_notes = list(rule_notes)
    t1 = time.perf_counter()
    choice.timings["model_choice"] = t1 - t0  # the search and the best fits, every trend
    if opts.evidence or opts.choose_by == "evidence" or opts.sampler == "nested":
        compute_evidence(choice, opts, spec, folder)
        choice.timings["evidence"] = time.perf_counter() - t1
    choice.notes = choice.extra_notes + _selection_notes(search_result, choice.fit,
                                                         choice.comparison)  # fmt: skip
    if rotation is not None:
        choice.notes += rotation_notes(choice.fit, rotation[0])
    for note in choice.notes:
        _say(opts, f"note: {note}")
    return choice
