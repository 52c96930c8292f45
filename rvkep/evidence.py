"""The evidence of each companion count: ln Z by nested sampling
(:mod:`rvkep.samplers.nested`) for the models the choice compares, and the number of
companions chosen by it with ``--choose-by evidence``.

References
----------
.. [1] Kass, R. E. & Raftery, A. E. (1995), JASA 90, 773.
.. [2] Skilling, J. (2006), Bayesian Analysis 1, 833.
"""

from __future__ import annotations

import warnings
from pathlib import Path
from typing import TYPE_CHECKING

from rvkep.messages import say as _say

if TYPE_CHECKING:
    from rvkep.model_choice import ModelChoice
    from rvkep.pipeline import AnalyzeOptions

__all__ = ["EVIDENCE_THRESHOLD", "compute_evidence", "run_seed", "run_nested"]


#: a model with more companions is chosen by evidence only if ln Z rises by more than
#: this: a Bayes factor above e^5 ~ 150, "very strong" on the scale of Kass & Raftery
#: (1995, 2 ln B > 10), the same bar as the BIC rule (Delta BIC ~ -2 ln B)
EVIDENCE_THRESHOLD = 5.0


def compute_evidence(choice: ModelChoice, opts: AnalyzeOptions, spec=None,
                     folder: Path | None = None) -> None:  # fmt: skip
    """ln Z by nested sampling (:mod:`rvkep.samplers.nested`) for N - 1, N and N + 1
    companions (every number fitted, with ``choose_by="evidence"``), kept in
    ``choice.evidence``; with ``choose_by="evidence"`` the number of companions is
    chosen by it (a larger number must raise ln Z by more than EVIDENCE_THRESHOLD).
    The nested run of the chosen model is kept for its posterior (``choice.nested``).

    Parameters
    ----------
    choice : ModelChoice
        The model choice; ``evidence``, ``nested``, ``fit``, ``comparison`` and
        ``extra_notes`` are updated in place.
    opts : AnalyzeOptions
        The run's options (``evidence``, ``choose_by``, ``sampler``, ``quick``, ``seed``).
    spec : ModelSpec, optional
        The model file.
    folder : Path, optional
        Where the nested runs keep their checkpoints.
    """

    by_n = {len(f.model.companions): f for f in choice.fits}
    n = len(choice.fit.model.companions)
    wanted = sorted(by_n) if opts.choose_by == "evidence" else [k for k in (n - 1, n, n + 1)
                                                                 if k in by_n]  # fmt: skip
    if not (opts.evidence or opts.choose_by == "evidence"):
        wanted = [n]  # only the posterior of the chosen model (--sampler nested)
    runs = {}
    for k in wanted:
        model = by_n[k].model
        if model.ndim == 0:
            continue
        saved = folder / f"nested_{k}.save" if folder else None
        runs[k] = run_nested(by_n[k], opts, run_seed(opts, spec), saved, choice.extra_notes)
        _say(opts, f"  ln Z = {runs[k].extra['ln_z']:.2f} +- {runs[k].extra['ln_z_err']:.2f} "
                   f"({runs[k].info['likelihood_calls']:,} likelihood calls, "
                   f"{runs[k].info['seconds']:.1f} s)")  # fmt: skip
    if opts.evidence or opts.choose_by == "evidence":
        choice.evidence = [{"n_companions": k, "ln_z": r.extra["ln_z"],
                            "ln_z_err": r.extra["ln_z_err"], "reliable": not r.info["missed_mode"],
                            "likelihood_calls": r.info["likelihood_calls"],
                            "seconds": r.info["seconds"]} for k, r in runs.items()]  # fmt: skip
    missed = [k for k, r in runs.items() if r.info["missed_mode"]]
    for k in missed:
        r = runs[k]
        note = (f"the nested run for {k} companion(s) never reached the best fit's likelihood "
                f"(best ln L met {r.info['max_ln_l']:.1f}, best fit {r.info['start_ln_l']:.1f}): "
                "its ln Z is UNRELIABLE (a narrow mode missed; more live points help)")  # fmt: skip
        _say(opts, f"WARNING: {note}")
        choice.extra_notes.append(note)
    if opts.choose_by == "evidence" and missed:
        _say(opts, "evidence: not used to choose (an unreliable run); the BIC choice stands")
    elif opts.choose_by == "evidence" and runs:
        ks = sorted(runs)
        best = ks[0]
        for k in ks[1:]:
            if runs[k].extra["ln_z"] - runs[best].extra["ln_z"] > EVIDENCE_THRESHOLD:
                best = k
        if best != n:
            _say(opts, f"evidence: {best} companion(s) chosen (BIC chose {n})")
        choice.fit = by_n[best]
        for row in choice.comparison:
            row["chosen"] = row["n_companions"] == best
        n = best
    choice.nested = runs.get(n)


def run_seed(opts: AnalyzeOptions, spec=None) -> int:
    """The run's seed: the option, else the model file's ``[sampling]`` seed, else 0.

    Parameters
    ----------
    opts : AnalyzeOptions
        The run's options.
    spec : ModelSpec, optional
        The model file.

    Returns
    -------
    int
        The seed.
    """
    if opts.seed is not None:
        return opts.seed
    return spec.sampling.get("seed", 0) if spec else 0


def run_nested(fit, opts: AnalyzeOptions, seed: int, checkpoint: Path | None, notes: list[str]):
    """One nested run of ``fit.model`` (checked against the best fit ``fit.theta``); a
    checkpoint it could not resume is said on the terminal and kept in ``notes``.

    Parameters
    ----------
    fit : FitResult
        The model's best fit.
    opts : AnalyzeOptions
        The run's options.
    seed : int
        The run's seed.
    checkpoint : Path or None
        The checkpoint file.
    notes : list of str
        Appended to.

    Returns
    -------
    SamplerRun
        The nested run (``extra`` holds ``ln_z`` and ``ln_z_err``).
    """
    from rvkep.likelihood import LogPosterior
    from rvkep.samplers import get_sampler
    from rvkep.samplers.nested import NestedOptions
    from rvkep.sampling import CheckpointNotice

    model = fit.model
    nopts = NestedOptions(seed=seed, progress=None if not opts.quiet else False,
                          dlogz=0.5 if opts.quick else 0.1, checkpoint=checkpoint)  # fmt: skip
    _say(opts, f"nested sampling: {len(model.companions)} companion(s), {model.ndim} "
               f"parameters, {nopts.n_live(model.ndim)} live points")  # fmt: skip
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", CheckpointNotice)
        run = get_sampler("nested").run(LogPosterior(model), fit.theta, nopts)
    for w in caught:
        if issubclass(w.category, CheckpointNotice):
            _say(opts, f"note: {w.message}")
            notes.append(str(w.message))
        else:  # anything else the library says goes on as it was
            warnings.warn_explicit(w.message, w.category, w.filename, w.lineno)
    return run
