"""Observing plans: the epochs at which one more velocity would teach the most.

Every candidate time comes from :mod:`rvkep.sky` (night, star above the airmass limit).
The value of a new velocity y(t) = v(t) + noise is judged from the kept posterior
samples, in the linear-Gaussian (Bayes linear) approximation: over the posterior, the
velocity the instrument would see, v(t) (companions, trend and the instrument's offset),
and the aimed parameter theta have a covariance, and one measurement with noise
variance s^2 (the instrument's jitter and typical error) shrinks the variance of theta by

    Var(theta) - Var(theta | y) = Cov(theta, v(t))^2 / (Var v(t) + s^2)

(the Kalman / conjugate-Gaussian update; exact when v is linear in Gaussian parameters,
Bishop 2006 eq. 3.50-3.51). The **score** of a time is that reduction as a fraction of
the current variance of theta. With no aimed parameter (``aim="all"``) the score is the
expected information gain of the measurement about the whole orbit,
0.5 ln(1 + Var v(t) / s^2) nats: maximum-entropy sampling (Sebastiani & Wynn 2000), the
criterion of adaptive RV scheduling in Loredo (2004) and Ford (2008).

Epochs are chosen greedily: the best time, then the covariances conditioned on a
measurement there (the same update applied to every candidate), then the next best, at
most ``per_night`` per night, so later picks do not repeat what earlier ones learned.

References
----------
.. [1] Loredo, T. J. (2004), AIP Conf. Proc. 707, 330 (Bayesian adaptive exploration).
.. [2] Ford, E. B. (2008), AJ 135, 1008 (adaptive scheduling for planet searches).
.. [3] Sebastiani, P. & Wynn, H. P. (2000), J. R. Stat. Soc. B 62, 145.
.. [4] Bishop, C. M. (2006), Pattern Recognition and Machine Learning, section 3.3.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np

from rvkep.prediction import predict
from rvkep.sky import SkyGrid

__all__ = ["Plan", "Choice", "choose_epochs", "default_aim", "plan_epochs", "MAX_DRAWS"]

#: Posterior draws used for the covariances (a random subset, seeded).
MAX_DRAWS = 4000


@dataclass(frozen=True)
class Choice:
    """The greedy choice: grid indices in the order chosen, each one's score when it
    was chosen, the aimed parameter's variance after each, and the score of every
    candidate before any choice (NaN where not a candidate)."""

    order: np.ndarray
    scores: np.ndarray
    variance_after: np.ndarray
    first_scores: np.ndarray
    variance_before: float


def _scores(cov: np.ndarray, noise_var: float, ctv: np.ndarray | None, vt: float):
    """Each candidate's score: the fraction of the aimed parameter's variance one more
    velocity there removes (with ``ctv``), else the information it adds about the
    whole orbit, 0.5 ln(1 + var / s^2)."""
    var = np.clip(np.diag(cov), 0.0, None)
    if ctv is not None:
        return ctv**2 / (var + noise_var) / vt if vt > 0 else np.zeros(cov.shape[0])
    return 0.5 * np.log1p(var / noise_var)


def choose_epochs(cov_vv: np.ndarray, noise_var: float, night: np.ndarray, *,
                  cov_tv: np.ndarray | None = None, var_theta: float | None = None,
                  per_night: int = 1, count: int | None = None,
                  allowed: np.ndarray | None = None) -> Choice:  # fmt: skip
    """Greedy sequential design on Gaussian moments (see the module text).

    Parameters
    ----------
    cov_vv : (n, n) array
        Covariance of the velocities at the n candidate times.
    noise_var : float
        Variance of a new measurement's noise, s^2 (> 0).
    night : (n,) int array
        The night of each candidate (at most ``per_night`` chosen per night).
    cov_tv, var_theta : (n,) array and float, optional
        Covariance of the aimed parameter with each velocity, and its variance; without
        them the score is the information gain about the whole orbit.
    per_night : int
        Most epochs on one night.
    count : int, optional
        Epochs to choose (default: ``per_night`` on every night that has a candidate).
    allowed : (n,) bool array, optional
        Candidates that may be chosen (default: all).

    Returns
    -------
    Choice
    """
    cov = np.array(cov_vv, dtype=float)  # conditioned in place: a copy
    n = cov.shape[0]
    night = np.asarray(night)
    ok = np.ones(n, bool) if allowed is None else np.asarray(allowed, bool).copy()
    if noise_var <= 0:
        raise ValueError(f"the noise variance must be positive, got {noise_var}")
    aimed = cov_tv is not None
    ctv = np.array(cov_tv, float) if aimed else None
    vt = float(var_theta) if aimed else float("nan")
    v0 = vt
    if count is None:
        count = per_night * len(np.unique(night[ok]))
    used = {k: 0 for k in np.unique(night)}
    first = np.where(ok, _scores(cov, noise_var, ctv, vt), np.nan)
    order, scores, after = [], [], []
    while len(order) < count and ok.any():
        s = np.where(ok, _scores(cov, noise_var, ctv, vt), -np.inf)
        j = int(np.argmax(s))
        k = cov[:, j].copy()
        denom = k[j] + noise_var
        if aimed:
            vt = vt - ctv[j] ** 2 / denom
            ctv -= k * (ctv[j] / denom)
        cov -= np.outer(k, k) / denom
        order.append(j)
        scores.append(float(s[j]))
        after.append(vt)
        ok[j] = False
        used[night[j]] += 1
        if used[night[j]] >= per_night:
            ok &= night != night[j]
    return Choice(np.array(order, int), np.array(scores), np.array(after), first, v0)


def default_aim(columns: Mapping[str, np.ndarray], labels: list[str]) -> str:
    """The least-constrained companion's period or K: of the ``<label>.period`` and
    ``<label>.K`` columns, the one with the largest posterior standard deviation relative
    to its median.

    Parameters
    ----------
    columns : mapping
        Posterior samples by name.
    labels : list of str
        The companions.

    Returns
    -------
    str
        The column's name, e.g. ``"c.K"``.
    """
    if not labels:
        raise ValueError("no companion to plan for")
    rel = {}
    for L in labels:
        for k in ("period", "K"):
            x = np.asarray(columns[f"{L}.{k}"], float)
            rel[f"{L}.{k}"] = float(np.std(x) / max(abs(float(np.median(x))), 1e-300))
    return max(rel, key=rel.get)


@dataclass(frozen=True)
class Plan:
    """An observing plan (see :func:`plan_epochs`): the grid, the chosen epochs and
    their scores. ``time`` is the grid in the data's time system (NaN where not
    observable); ``velocity_sd`` the posterior standard deviation of the velocity the
    instrument would see there; ``time_offset`` BJD_TDB minus the data's times."""

    grid: SkyGrid
    time: np.ndarray
    aim: str
    instrument: str
    noise_sd: float
    choice: Choice
    velocity_sd: np.ndarray
    time_offset: float

    @property
    def criterion(self) -> str:
        if self.aim == "all":
            return ("expected information gain about the orbit, 0.5 ln(1 + Var v / s^2) nats "
                    "(maximum-entropy sampling; Loredo 2004, Ford 2008)")  # fmt: skip
        return (f"fraction of the posterior variance of {self.aim} one velocity removes, "
                "Cov(theta, v)^2 / ((Var v + s^2) Var theta) (linear-Gaussian update; "
                "Loredo 2004, Ford 2008)")  # fmt: skip

    @property
    def aim_sd(self) -> tuple[float, float]:
        """The aimed parameter's standard deviation now and after every chosen epoch
        (linear-Gaussian prediction; NaN for ``aim="all"``)."""
        c = self.choice
        after = float(c.variance_after[-1]) if c.order.size else c.variance_before
        return float(np.sqrt(c.variance_before)), float(np.sqrt(max(after, 0.0)))

    def rows(self) -> list[dict]:
        """One row per chosen epoch, in time order: ``night`` (its evening's date),
        ``utc``, ``time`` (data's system), ``sun_alt_deg``, ``target_alt_deg``,
        ``airmass``, ``velocity_sd_mps``, ``score``, ``rank`` (1 = chosen first) and
        ``aim_sd_after`` (the aimed parameter's standard deviation after the epochs of
        rank 1 to this one)."""
        g, c = self.grid, self.choice
        rows = []
        for rank, (j, s, var) in enumerate(zip(c.order, c.scores, c.variance_after,
                                               strict=True), 1):  # fmt: skip
            rows.append({
                "night": g.night_dates[g.night[j]], "utc": g.iso(int(j)),
                "time": float(self.time[j]), "sun_alt_deg": float(g.sun_alt[j]),
                "target_alt_deg": float(g.target_alt[j]), "airmass": float(g.airmass[j]),
                "velocity_sd_mps": float(self.velocity_sd[j]), "score": float(s),
                "rank": rank, "aim_sd_after": float(np.sqrt(max(var, 0.0))) if var == var
                else None,
            })  # fmt: skip
        return sorted(rows, key=lambda r: r["time"])


def _checked_aim(columns, labels, grid, instrument, aim) -> str:
    """The aim (:func:`default_aim` when None), after checking it, the instrument and
    that the star is observable at all."""
    if aim is None:
        aim = default_aim(columns, labels)
    if aim != "all" and aim not in columns:
        raise ValueError(f"unknown parameter {aim!r} to aim at")
    if f"offset.{instrument}" not in columns:
        raise ValueError(f"unknown instrument {instrument!r}")
    if not grid.observable.any():
        raise ValueError("the star is never observable in the window (night and airmass)")
    return aim


def _covariances(sub, labels, t, epoch, instrument, aim) -> tuple[np.ndarray, dict]:
    """The posterior covariance of the velocities the instrument would measure at ``t``
    and, unless the aim is ``all``, their covariances with the aimed parameter and its
    variance (the keywords of :func:`choose_epochs`)."""
    v = predict(sub, labels, t, epoch=epoch).curves["total"]
    v = v + np.asarray(sub[f"offset.{instrument}"], float)[:, None]
    vc = v - v.mean(axis=0)
    m = vc.shape[0]
    cov_vv = vc.T @ vc / (m - 1)
    if aim == "all":
        return cov_vv, {}
    theta = np.asarray(sub[aim], float)
    tc = theta - theta.mean()
    return cov_vv, {"cov_tv": vc.T @ tc / (m - 1), "var_theta": float(tc @ tc / (m - 1))}


def _on_grid(values: np.ndarray, cand: np.ndarray, n: int) -> np.ndarray:
    """Values at the candidate times spread onto the whole grid (NaN elsewhere)."""
    out = np.full(n, np.nan)
    out[cand] = values
    return out


def plan_epochs(columns: Mapping[str, np.ndarray], labels: list[str], grid: SkyGrid, *,
                epoch: float, time_offset: float, instrument: str, noise_var: float,
                aim: str | None = None, per_night: int = 1, count: int | None = None,
                draws: int = MAX_DRAWS, rng: np.random.Generator | int | None = 0,
                ) -> Plan:  # fmt: skip
    """Choose observing epochs on ``grid`` from posterior samples ``columns`` (see the
    module text).

    Parameters
    ----------
    columns : mapping of str to array
        Posterior samples (as for :func:`rvkep.prediction.predict`), with
        ``offset.<instrument>``.
    labels : list of str
        The companions.
    grid : SkyGrid
        Candidate times (its ``observable`` ones are the candidates).
    epoch : float
        The data's reference epoch.
    time_offset : float
        BJD_TDB minus the data's times.
    instrument : str
        The instrument that will observe (its offset enters v).
    noise_var : float
        Its noise variance for one new velocity, m^2/s^2.
    aim : str, optional
        A posterior column (``b.K``, ``c.period``...), ``"all"``, or None for
        :func:`default_aim`.
    per_night, count : int
        As for :func:`choose_epochs`.
    draws : int
        Posterior draws used (a seeded random subset).
    rng : Generator or int
        Chooses the draws.

    Returns
    -------
    Plan
        The chosen times in order, each one's score and the aimed variance after it.
    """
    aim = _checked_aim(columns, labels, grid, instrument, aim)
    rng = np.random.default_rng(rng)
    n_all = len(next(iter(columns.values())))
    idx = np.sort(rng.choice(n_all, size=min(draws, n_all), replace=False))
    sub = {k: np.asarray(v)[idx] for k, v in columns.items()}
    cand = np.flatnonzero(grid.observable)
    t = grid.bjd_tdb[cand] - time_offset
    cov_vv, kw = _covariances(sub, labels, t, epoch, instrument, aim)
    choice = choose_epochs(cov_vv, noise_var, grid.night[cand], per_night=per_night,
                           count=count, **kw)  # fmt: skip
    n = grid.utc_jd.size
    first, vsd, time = (_on_grid(x, cand, n) for x in (choice.first_scores,
                                                      np.sqrt(np.diag(cov_vv)), t))  # fmt: skip
    on_grid = Choice(cand[choice.order], choice.scores, choice.variance_after, first,
                     choice.variance_before)  # fmt: skip
    return Plan(grid, time, aim, instrument, float(np.sqrt(noise_var)), on_grid, vsd,
                float(time_offset))  # fmt: skip
