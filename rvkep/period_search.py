"""Iterative signal search: periodogram, Keplerian fit, residual periodogram, repeat.

At each step the residuals of the current joint best fit (all companions found so far,
per-instrument offsets and jitters, trend) are searched with a generalized Lomb-Scargle
periodogram weighted by err^2 + jitter^2 (with a correlated-noise model, the power is
measured through its covariance, so activity the noise model explains is not proposed
as a companion: :func:`residual_periodogram`). If the highest peak's Baluev false-alarm
probability is below the threshold (default 0.1%), the top few peaks, the highest
peak's alias family (+- the window's daily and yearly peaks) and its harmonic family
(2P, 3P, P/2) are tried as the next companion's period in a joint Keplerian best fit
(:mod:`rvkep.optimize`), and the best joint likelihood wins (so an eccentric orbit
whose sine power peaks at P/3 is fitted at P, and a daily alias loses to the true
period); periods within a few units of ln L of the winner are reported as ambiguous.
Then the search goes on with the new residuals. It stops at
the first peak that is not significant, or at ``max_signals``.

Each candidate carries its period, power, FAP, the fitted semi-amplitude, its alias
candidates (+- one sidereal day, +- one year, flagged where the spectral window allows
them and the periodogram shows a competing peak), and whether an activity indicator
(an extra data column) has a significant peak at the same period.

Three searches (``kind``): ``sine``, the generalized Lomb-Scargle periodogram with Baluev
false alarms; ``keplerian``, the Keplerian periodogram at every step, its false alarms
calibrated by redraws (:mod:`rvkep.keplerian_periodogram`); ``auto``, the sine search
checked by one Keplerian periodogram pass (no redraws) at two points: when a companion's
fitted orbit comes out eccentric (e >= :data:`AUTO_ECC`), the Keplerian peak's period is
put to the joint fit too and the better likelihood wins; and when the sine search stops,
a Keplerian peak whose false-alarm bound (:func:`bounded_fap`) is below the threshold is
taken as the next signal. The Keplerian checks weigh white noise only (a correlated-noise
model searches with the sine periodogram through its covariance).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from rvkep.data import RVData
from rvkep.defaults import CIRCULAR_BELOW
from rvkep.model import SystemModel
from rvkep.optimize import FitResult, fit, fit_companions
from rvkep.options import SEARCH_KINDS
from rvkep.periodogram import (
    FAP_LEVELS,
    AliasCandidate,
    Periodogram,
    alias_candidates,
    frequency_grid,
    periodogram,
    spectral_window,
)

__all__ = [
    "Candidate",
    "SearchResult",
    "search",
    "residual_velocities",
    "residual_periodogram",
    "candidate_periods",
    "keplerian_residual_periodogram",
    "bounded_fap",
    "SEARCH_KINDS",
    "AUTO_ECC",
]


@dataclass
class Candidate:
    """One signal proposed by the search."""

    period: float
    power: float
    fap: float
    K: float | None
    significant: bool
    aliases: list[AliasCandidate] = field(default_factory=list)
    activity: list[str] = field(default_factory=list)  # indicators peaking here
    tried: list[float] = field(default_factory=list)  # periods put to the joint fit
    ambiguous_with: list[dict] = field(default_factory=list)  # {period_d, delta_ln_l}
    periodogram: str = "sine"  # the periodogram that found it: sine or keplerian
    notes: list[str] = field(default_factory=list)

    @property
    def alias_flags(self) -> str:
        return ",".join(a.kind for a in self.aliases if a.flagged) or "-"


@dataclass
class SearchResult:
    """Candidates in the order found, periodograms of the data and of each residual,
    the spectral window, activity periodograms, and the best fit after each signal."""

    candidates: list[Candidate]
    periodograms: list[Periodogram]
    window: np.ndarray
    frequency: np.ndarray
    activity: dict[str, Periodogram]
    fits: list[FitResult]
    fap_threshold: float
    kind: str = "sine"

    @property
    def significant(self) -> list[Candidate]:
        return [c for c in self.candidates if c.significant]

    @property
    def best_fit(self) -> FitResult:
        """The fit with all significant signals."""
        return self.fits[len(self.significant)]

    def rows(self) -> list[dict]:
        out = []
        for i, c in enumerate(self.candidates):
            out.append(
                {
                    "signal": i + 1,
                    "period_d": c.period,
                    "power": c.power,
                    "fap": c.fap,
                    "K_mps": c.K,
                    "significant": c.significant,
                    "aliases": c.alias_flags,
                    "activity": ",".join(c.activity) or "-",
                    "periodogram": c.periodogram,
                }
            )
        return out

    def table(self) -> str:
        head = (
            f"{'#':>2} {'period [d]':>12} {'power':>7} {'FAP':>10} {'K [m/s]':>9}"
            f" {'signif.':>8} {'aliases':>16} {'activity':>10}"
        )
        lines = [head]
        for r in self.rows():
            K = f"{r['K_mps']:.2f}" if r["K_mps"] is not None else "-"
            lines.append(
                f"{r['signal']:>2} {r['period_d']:>12.4f} {r['power']:>7.3f} {r['fap']:>10.2e}"
                f" {K:>9} {'yes' if r['significant'] else 'no':>8} {r['aliases']:>16}"
                f" {r['activity']:>10}"
            )
        how = {
            "sine": "Baluev 2008",
            "keplerian": "Keplerian periodogram, bootstrap-calibrated",
            "auto": "Baluev 2008; Keplerian periodogram checks, see the notes",
        }[self.kind]
        lines.append(
            f"FAP threshold {self.fap_threshold:g} ({how}); aliases flagged where the "
            "window allows them and the periodogram shows a competing peak"
        )
        for i, c in enumerate(self.candidates):
            lines += [f"signal {i + 1}: {note}" for note in c.notes]
        return "\n".join(lines)

    def __str__(self) -> str:
        return self.table()


def _snap(pg: Periodogram, f: float) -> float:
    """The frequency of the periodogram's highest point within one peak width of f."""
    width = 1.0 / float(pg.t.max() - pg.t.min())
    near = np.flatnonzero(np.abs(pg.frequency - f) <= width)
    if near.size == 0:
        return f
    return float(pg.frequency[near[np.argmax(pg.power[near])]])


def candidate_periods(
    pg: Periodogram,
    t: np.ndarray,
    period_range: tuple[float, float],
    n_peaks: int = 3,
    known_aliases: tuple[float, list[AliasCandidate]] | None = None,
) -> list[float]:
    """Periods to put to the joint fit for the next companion.

    The ``n_peaks`` highest peaks; for the highest, its alias family (its frequency
    plus and minus the spectral window's daily and yearly peaks, each moved to the
    periodogram's local maximum) and its harmonic family (2P, 3P and P/2: an
    eccentric orbit puts sine power at P/2 and P/3). Members outside the search range
    are dropped, near-duplicates (0.5%) merged. The joint fit's likelihood decides.
    ``known_aliases`` is (period, its :func:`alias_candidates`) when already computed;
    they are reused if that period is the top peak.

    Parameters
    ----------
    pg : Periodogram
        The residual periodogram.
    t : ndarray
        The data's times (days; the window comes from them).
    period_range : (float, float)
        The searched periods (days).
    n_peaks : int, optional
        Highest peaks kept.
    known_aliases : tuple, optional
        As above.

    Returns
    -------
    list of float
        Candidate periods (days), the highest peak first.
    """
    lo, hi = period_range
    peaks = [p for p, _ in pg.peaks(n_peaks)]
    if not peaks:
        return []
    top = peaks[0]
    family = list(peaks)
    if known_aliases is not None and known_aliases[0] == top:
        aliases = known_aliases[1]
    else:
        aliases = alias_candidates(pg, top, t)
    for a in aliases:
        f = _snap(pg, 1.0 / a.period)
        family.append(1.0 / f)
    family += [2.0 * top, 3.0 * top, 0.5 * top]
    out: list[float] = []
    for P in family:
        if lo <= P <= hi and all(abs(P / q - 1.0) > 0.005 for q in out):
            out.append(float(P))
    return out


def residual_velocities(fit_result: FitResult) -> tuple[np.ndarray, np.ndarray]:
    """Residuals of a fit (offsets and trend removed) and errors with jitter added.

    Parameters
    ----------
    fit_result : FitResult
        A best fit.

    Returns
    -------
    residuals, errors : ndarray
        Per point (m/s).
    """
    model = fit_result.model
    phys = model.to_physical(np.asarray(fit_result.theta, float)[None, :])
    dy = np.sqrt(model.noise_model.effective_variance(model, phys, np.array([0]))[0])
    return fit_result.residuals, dy


def residual_periodogram(fit_result: FitResult, frequency: np.ndarray, label: str) -> Periodogram:
    """The periodogram of a fit's residuals on ``frequency``: the generalized
    Lomb-Scargle periodogram weighted by the effective errors, or, for a noise model
    with correlated noise, the power measured through its covariance (the noise
    model's ``periodogram_power``; Baluev false-alarm levels over the same grid).

    Parameters
    ----------
    fit_result : FitResult
        A best fit.
    frequency : ndarray
        Trial frequencies (1/day).
    label : str
        The periodogram's name in figures.

    Returns
    -------
    Periodogram
        Power and false-alarm levels.
    """
    data = fit_result.model.data
    resid, dy = residual_velocities(fit_result)
    pg = periodogram(data.time, resid, dy, data.instrument, frequency, label=label)
    model = fit_result.model
    phys = model.to_physical(np.asarray(fit_result.theta, float)[None, :])
    power = model.noise_model.periodogram_power(model, phys, resid, frequency)
    if power is not None:
        pg.power = np.asarray(power, float)
        pg.label = f"{label} (through the {model.noise} noise model)"
    return pg


#: An orbit fitted at least this eccentric has its sine peak checked against the
#: Keplerian periodogram in the ``auto`` search.
AUTO_ECC = 0.5
#: the ``auto`` search's Keplerian checks look at periods from this up: shorter orbits
#: are fitted circular (rvkep.defaults.CIRCULAR_BELOW), where the sine periodogram
#: already is the Keplerian one; the checks then cost the same whatever the shortest
#: period searched
KEPLERIAN_MIN_PERIOD = CIRCULAR_BELOW


def _long_enough(freq: np.ndarray) -> np.ndarray:
    """The part of a frequency grid the ``auto`` Keplerian checks cover."""
    return freq[freq <= 1.0 / KEPLERIAN_MIN_PERIOD]


def keplerian_residual_periodogram(fit_result: FitResult, frequency: np.ndarray, label: str,
                                   n_bootstrap: int = 0, rng=0):  # fmt: skip
    """The Keplerian periodogram (:mod:`rvkep.keplerian_periodogram`) of a fit's
    residuals, weighted by the effective errors, with ``n_bootstrap`` redraws
    calibrating its false-alarm probability.

    Parameters
    ----------
    fit_result : FitResult
        A best fit.
    frequency : ndarray
        Trial frequencies (1/day).
    label : str
        The periodogram's name in figures.
    n_bootstrap : int, optional
        Redraws (0: the Bonferroni bound, :func:`bounded_fap`).
    rng : int or numpy.random.Generator, optional
        Seed of the redraws.

    Returns
    -------
    Periodogram
        Power and false-alarm levels.
    """
    from rvkep.keplerian_periodogram import keplerian_periodogram

    data = fit_result.model.data
    resid, dy = residual_velocities(fit_result)
    return keplerian_periodogram(data.time, resid, dy, data.instrument, frequency,
                                 n_bootstrap=n_bootstrap, rng=rng,
                                 label=f"{label} (Keplerian)")  # fmt: skip


def bounded_fap(pg, power: float) -> tuple[float, int]:
    """An upper bound on a Keplerian periodogram peak's false-alarm probability with no
    redraws: the number of grid points times the single-trial probability (Bonferroni's
    inequality; conservative, since neighbouring trials are correlated). Returns the
    bound and the number of trials.

    Parameters
    ----------
    pg : Periodogram
        A Keplerian periodogram.
    power : float
        The peak's power.

    Returns
    -------
    fap : float
        The bound (at most 1).
    trials : int
        The number of trials.
    """
    from rvkep.keplerian_periodogram import KEPLER_ECC, phase_counts

    trials = int(pg.frequency.size * phase_counts(KEPLER_ECC).sum())
    return min(1.0, trials * float(pg.single_trial(power))), trials


def search(data: RVData, min_period: float | None = None, max_period: float | None = None,
           fap_threshold: float = 1e-3, max_signals: int = 5, oversampling: float = 10.0,
           trend: int = 0, base: SystemModel | None = None, n_peaks: int = 3,
           kind: str = "sine", n_bootstrap: int | None = None, rng: int = 0,
           ) -> SearchResult:  # fmt: skip
    """Find signals one at a time (see the module text).

    Parameters
    ----------
    data : RVData
        The velocities.
    min_period, max_period : float, optional
        Search range in days (default :data:`DEFAULT_MIN_PERIOD`, 1.2 d, to the span).
    fap_threshold : float
        Stop at the first peak with a larger false-alarm probability.
    max_signals : int
        Most companions to look for.
    oversampling : float
        Frequency grid points per 1 / baseline.
    trend : int
        Trend degree fitted throughout.
    base : SystemModel, optional
        Instruments (jitter priors), trend and star to use.
    n_peaks : int
        Highest periodogram peaks tried as each new companion's period.
    kind : {"sine", "keplerian", "auto"}
        The periodogram of each step (see the module text).
    n_bootstrap, rng : int, optional
        Redraws of the ``keplerian`` search, their seed (default: ``N_BOOTSTRAP`` of
        :mod:`rvkep.keplerian_periodogram`).

    Returns
    -------
    SearchResult
        Every candidate, the periodograms, the window and the fit of each step.
    """
    from rvkep.keplerian_periodogram import N_BOOTSTRAP

    base, check = _search_base(data, kind, trend, base)
    n_bootstrap = N_BOOTSTRAP if n_bootstrap is None else int(n_bootstrap)
    freq = frequency_grid(data.time, min_period, max_period, oversampling)
    period_range = (1.0 / freq[-1], 1.0 / freq[0])
    current = fit(base.noise_model.initial(base.with_companions([])))
    fits, candidates, periodograms, activity = [current], [], [], _activity_periodograms(data, freq)
    for _ in range(max_signals + 1):
        label = "velocities" if not candidates else f"residuals after {len(candidates)} signal(s)"
        pg, cand = _strongest_peak(current, freq, label, kind, check, len(fits) <= max_signals,
                                   fap_threshold, n_bootstrap, rng)  # fmt: skip
        periodograms.append(pg)
        _describe(cand, pg, data, activity)
        candidates.append(cand)
        if not cand.significant:
            break
        current = _adopt(current, cand, pg, freq, label, data, base, period_range, n_peaks,
                         check)  # fmt: skip
        fits.append(current)
    _as_finally_fitted(candidates, fits[-1])
    window = spectral_window(data.time, freq)
    return SearchResult(candidates, periodograms, window, freq, activity, fits, fap_threshold,
                        kind)  # fmt: skip


def _search_base(data: RVData, kind: str, trend: int, base: SystemModel | None):
    """The model the search adds companions to, after checking ``kind`` against it, and
    whether the ``auto`` search's Keplerian checks apply (white noise only)."""
    if kind not in SEARCH_KINDS:
        raise ValueError(f"unknown search {kind!r}; choose one of {', '.join(SEARCH_KINDS)}")
    base = base if base is not None else SystemModel(data, [], trend=trend)
    if kind == "keplerian" and base.noise != "white":
        raise ValueError("the Keplerian periodogram weighs white noise only; search a "
                         f"{base.noise} noise model with the sine periodogram")  # fmt: skip
    return base, kind == "auto" and base.noise == "white"


def _adopt(current, cand, pg, freq, label, data, base, period_range, n_peaks, check):
    """The joint fit with one more companion, its period tried at the candidate's peaks,
    aliases and harmonics (with ``check``, an eccentric result is checked by the
    Keplerian periodogram: :func:`_check_eccentric`); the candidate takes the fitted
    period, K, the periods tried and the close alternatives."""
    tries = candidate_periods(
        pg, data.time, period_range, n_peaks, known_aliases=(cand.period, cand.aliases)
    )
    fitted = fit_companions(data, [tries], base=base, period_range=period_range,
                            previous=current)  # fmt: skip
    new = fitted.model.companions[-1].label
    if check and cand.periodogram == "sine" and fitted.params[f"{new}.ecc"] >= AUTO_ECC:
        fitted = _check_eccentric(fitted, current, cand, tries, freq, label, data, base,
                                  period_range, n_peaks)  # fmt: skip
    cand.period = fitted.params[f"{new}.period"]
    cand.K = fitted.params[f"{new}.K"]
    cand.tried = tries
    cand.ambiguous_with = list(fitted.extra.get("ambiguous_with", []))
    return fitted


def _activity_periodograms(data: RVData, freq: np.ndarray) -> dict[str, Periodogram]:
    """The periodogram of each activity indicator that varies and has no gaps."""
    return {
        name: periodogram(data.time, col, None, data.instrument, freq, label=name)
        for name, col in data.extra.items()
        if np.all(np.isfinite(col)) and np.ptp(col) > 0
    }


def _strongest_peak(current, freq, label, kind, check, room, fap_threshold, n_bootstrap, rng):
    """The periodogram of ``current``'s residuals and its highest peak as a candidate
    (significant when its false-alarm probability is below the threshold and there is
    ``room`` for one more signal); with ``check``, a Keplerian peak replaces a sine one
    that is not significant (:func:`_keplerian_fallback`)."""
    if kind == "keplerian":
        pg = keplerian_residual_periodogram(current, freq, label, n_bootstrap, rng)
    else:
        pg = residual_periodogram(current, freq, label)
    period, power, fap = pg.best()
    cand = Candidate(period, power, fap, None, fap < fap_threshold and room,
                     periodogram="keplerian" if kind == "keplerian" else "sine")  # fmt: skip
    if check and room and not cand.significant and _long_enough(freq).size:
        pg, cand = _keplerian_fallback(current, freq, label, pg, cand, fap_threshold)
    return pg, cand


def _keplerian_fallback(current, freq, label, pg, cand, fap_threshold):
    """The ``auto`` search's last look when the sine peak is not significant: the
    Keplerian periodogram of the same residuals (from :data:`KEPLERIAN_MIN_PERIOD` up)
    with its Bonferroni bound. Returns the periodogram and candidate to keep: the
    Keplerian ones when the bound is below the threshold, else those given."""
    period, _, fap = pg.best()
    kp = keplerian_residual_periodogram(current, _long_enough(freq), label)
    k_period, k_power, _ = kp.best()
    bound, trials = bounded_fap(kp, k_power)
    if bound >= fap_threshold:
        return pg, cand
    found = Candidate(k_period, k_power, bound, None, True, periodogram="keplerian")
    found.notes.append(
        f"the sine periodogram's highest peak ({period:.5g} d, FAP {fap:.2g}) is "
        f"not significant; the Keplerian periodogram's ({k_period:.5g} d, best "
        f"e {kp.ecc[np.argmax(kp.power)]:.2g}) is: FAP <= {bound:.2g} (Bonferroni "
        f"bound over {trials:,} trials)"
    )  # fmt: skip
    kp.fap_levels = {f: 1.0 - (f / trials) ** (1.0 / kp.dof) for f in FAP_LEVELS}
    return kp, found


def _describe(cand: Candidate, pg: Periodogram, data: RVData, activity: dict) -> None:
    """A candidate's aliases in ``pg`` and the activity indicators with power at its
    period (false-alarm probability below 1%)."""
    cand.aliases = alias_candidates(pg, cand.period, data.time)
    for name, apg in activity.items():
        if float(apg.fap(apg.power_at(cand.period))) < 0.01:
            cand.activity.append(name)


def _as_finally_fitted(candidates: list[Candidate], final: FitResult) -> None:
    """Every accepted signal's period and K as the final joint fit has them (the periods
    of the companion-number comparison), not as they stood when first found."""
    accepted = [c for c in candidates if c.significant]
    for cand, comp in zip(accepted, final.model.companions, strict=False):
        cand.period = final.params[f"{comp.label}.period"]
        cand.K = final.params[f"{comp.label}.K"]


def _check_eccentric(current, previous, cand, tries, freq, label, data, base, period_range,
                     n_peaks):  # fmt: skip
    """The ``auto`` search's check of an eccentric orbit found from a sine peak: the
    Keplerian periodogram of the same residuals proposes its own periods; when they
    are new, the joint fit on them competes with ``current`` by likelihood."""
    new = current.model.companions[-1].label
    e = current.params[f"{new}.ecc"]
    if _long_enough(freq).size == 0:
        return current
    kp = keplerian_residual_periodogram(previous, _long_enough(freq), label)
    k_period = kp.best()[0]
    if any(abs(k_period / q - 1.0) <= 0.01 for q in tries):
        cand.notes.append(f"fitted e = {e:.2f}: the Keplerian periodogram peaks at a period "
                          f"already tried ({k_period:.5g} d)")  # fmt: skip
        return current
    k_tries = candidate_periods(kp, data.time, period_range, n_peaks)
    alt = fit_companions(data, [k_tries], base=base, period_range=period_range, previous=previous)
    if alt.log_likelihood > current.log_likelihood:
        cand.notes.append(
            f"fitted e = {e:.2f} at {current.params[f'{new}.period']:.5g} d; the Keplerian "
            f"periodogram's peak at {k_period:.5g} d fits better (ln L "
            f"{alt.log_likelihood - current.log_likelihood:+.1f}) and replaces it"
        )  # fmt: skip
        cand.periodogram = "keplerian"
        return alt
    cand.notes.append(f"fitted e = {e:.2f}: the Keplerian periodogram's peak at {k_period:.5g} "
                      "d fits worse; kept")  # fmt: skip
    return current
