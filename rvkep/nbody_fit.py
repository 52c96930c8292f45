"""Stage 3b, with ``--dynamics nbody``: the chosen Keplerian model refitted with the
companions' mutual attraction (:mod:`rvkep.nbody`, REBOUND), and the two compared."""

from __future__ import annotations

import math
from dataclasses import replace
from typing import TYPE_CHECKING

from rvkep.errors import OptionError
from rvkep.messages import say as _say

if TYPE_CHECKING:
    from rvkep.model_choice import ModelChoice
    from rvkep.pipeline import AnalyzeOptions

__all__ = ["dynamics_kind", "check_dynamics", "NBODY_STARTS", "fit_dynamics"]


def dynamics_kind(opts: AnalyzeOptions, spec=None) -> str:
    """``--dynamics`` over the model file's ``[dynamics] kind``, else keplerian.

    Parameters
    ----------
    opts : AnalyzeOptions
        The run's options.
    spec : ModelSpec, optional
        The model file.

    Returns
    -------
    str
        ``"keplerian"``, ``"nbody"`` or ``"nbody-inclined"``.
    """
    return opts.dynamics or (spec.dynamics if spec is not None else None) or "keplerian"


def check_dynamics(opts: AnalyzeOptions, spec, star) -> None:
    """Refuse an N-body run that cannot start, before any folder is made: REBOUND
    missing, or no stellar mass (the masses, and so the interactions, scale with it).

    Parameters
    ----------
    opts : AnalyzeOptions
        The run's options.
    spec : ModelSpec or None
        The model file.
    star : StarProperties or None
        The star.

    Raises
    ------
    OptionError
        When no stellar mass is given (or REBOUND's missing-extra error).
    """
    if dynamics_kind(opts, spec) == "keplerian":
        return
    from rvkep.nbody import require_rebound

    require_rebound()
    if star is None:
        raise OptionError("--dynamics nbody needs the star's mass: give --star-mass (or a "
                          "model file's [star] mass)")  # fmt: skip


#: inclinations (cosines) the N-body best fit starts from, beside the model's own start
NBODY_STARTS = (0.1, 0.5, 0.8)


def fit_dynamics(choice: ModelChoice, opts: AnalyzeOptions, spec=None, star=None) -> ModelChoice:
    """Stage 3b, with ``--dynamics nbody``: the chosen Keplerian model refitted as an
    N-body one (:mod:`rvkep.nbody`), from the Keplerian optimum at several
    inclinations; the two are compared (ln L, BIC) in ``dynamics_rows`` and the
    N-body fit becomes the chosen one. Without companions there is nothing to
    integrate and the Keplerian model stays, with a note.

    Parameters
    ----------
    choice : ModelChoice
        The Keplerian choice (its ``fit``, ``notes`` and ``dynamics_rows`` are updated).
    opts : AnalyzeOptions
        The run's options.
    spec : ModelSpec, optional
        The model file.
    star : StarProperties, optional
        The star (its mass sets the companions' masses).

    Returns
    -------
    ModelChoice
        ``choice``.
    """
    from rvkep.optimize import fit as best_fit

    kind = dynamics_kind(opts, spec)
    if kind == "keplerian":
        return choice
    kep = choice.fit
    if not kep.model.companions:
        choice.notes.append("--dynamics nbody: no companion was adopted, so the model stays "
                            "Keplerian")  # fmt: skip
        return choice
    own = spec.dynamics_parameters_for(kind) if spec is not None else None
    model = replace(kep.model, dynamics=kind, dynamics_parameters=own, star=star)
    own_start = model.start_physical()
    start = {k: v for k, v in kep.params.items() if k in own_start}
    cos_keys = [f"dynamics.{p.name}" for p in model.dynamics_parameters
                if p.name.startswith("cos_inc")]  # fmt: skip
    lo, hi = model.dynamics_parameters[0].prior.bounds
    cos_starts = dict.fromkeys([own_start[cos_keys[0]], *NBODY_STARTS])
    starts = [model.from_physical({**own_start, **start, **dict.fromkeys(cos_keys, c)})[0]
              for c in cos_starts if lo <= c <= hi]  # fmt: skip
    _say(opts, f"N-body fit (REBOUND) of {len(kep.model.companions)} companion(s) from the "
               f"Keplerian solution, {len(starts)} inclination start(s)")  # fmt: skip
    nb = best_fit(model, starts)
    rows = []
    for name, f in (("keplerian", kep), ("nbody", nb)):
        rows.append({"dynamics": name, "n_free": f.n_free, "log_likelihood": f.log_likelihood,
                     "bic": f.bic})  # fmt: skip
    best_bic = min(r["bic"] for r in rows)
    for r in rows:
        r["delta_bic"] = r["bic"] - best_bic
    gain = nb.log_likelihood - kep.log_likelihood
    inc = ", ".join(f"{k.removeprefix('dynamics.cos_inc').lstrip('.') or 'shared'} "
                    f"{math.degrees(math.acos(min(1.0, nb.params[k]))):.1f}" for k in cos_keys)
    _say(opts, f"N-body: ln L {nb.log_likelihood:.2f} against {kep.log_likelihood:.2f} "
               f"(Keplerian), delta BIC {rows[1]['bic'] - rows[0]['bic']:+.2f}; inclination "
               f"(deg) {inc} at the best fit")  # fmt: skip
    if gain < -1.0:  # a nested model (sin i -> 1, light masses) should not lose
        choice.notes.append(f"the N-body best fit has ln L lower than the Keplerian one by "
                            f"{-gain:.1f}: the optimizer may have stopped early")  # fmt: skip
    choice.fit = nb
    choice.dynamics_rows = rows
    return choice
