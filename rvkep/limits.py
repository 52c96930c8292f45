"""Detection limits by injection and recovery: which companions the data could have
revealed.

Companions are injected into the residuals of a run's chosen model (its companions,
offsets and trend removed; the same instruments, times and effective errors
err^2 + jitter^2) on a grid of period and minimum mass, log-spaced. Within each cell
every injection draws its period and M sin i log-uniformly inside the cell, a random
periastron phase and argument of periastron, and its eccentricity from the beta
distribution of RV planets, Beta(0.867, 3.03) (Kipping 2013; not the fit's uniform
prior, which would inject half of the orbits above e = 0.5); K follows from the star's
mass. Each injected series then goes through the search's rule for accepting a
companion: the residual periodogram (the generalized Lomb-Scargle periodogram,
instruments centred, weighted by the effective errors) has its highest peak above the
Baluev level of the false-alarm threshold (0.1% by default) over the search's own
frequency grid; the companion counts as recovered when that peak lies within 1% of
the injected period or, when it does not but the injected period is one of the periods
the search would put to the joint fit (the peak's alias and harmonic families,
:func:`rvkep.period_search.candidate_periods`), when the joint fit's linear start grid fits
the injected period best (the screen that orders the joint fits). The ``auto``
search's Keplerian check can only add detections, so these curves are conservative
for it.

The periodograms of all injections of a cell are computed at once
(:func:`rvkep.periodogram.power_many`). The grid's period rows are the work units,
run on local processes or a Dask cluster like a batch (:mod:`rvkep.batch`) and kept as
``limits_parts/row_NNN.json``, each keyed on everything that changes its answer (the
residuals, errors, grid, injections, seed and rule): a killed run resumes, and a
changed one recomputes.

Completeness curves: for each period row the completeness (recovered / tried) is made
non-decreasing in mass (running maximum) and interpolated in log mass to where it
reaches 50% and 95%; the semi-amplitudes quoted for them are those of a circular orbit
of that mass and period.

For pure white noise the 50% curve has a closed form (see :func:`k50_white_noise`).

References
----------
.. [1] Kipping, D. M. (2013), MNRAS 434, L51.
.. [2] Zechmeister, M. & Kuerster, M. (2009), A&A 496, 577.
.. [3] Baluev, R. V. (2008), MNRAS 385, 1279.
.. [4] Cumming, A. et al. (2008), PASP 120, 531 (detection limits by injection).
"""

from __future__ import annotations

import hashlib
import json
import math
import sys
import time
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from rvkep.defaults import DEFAULT_MIN_PERIOD
from rvkep.errors import OptionError
from rvkep.physics import M_EARTH as _M_EARTH
from rvkep.physics import M_JUP as _M_JUP

__all__ = [
    "LimitsSetup",
    "Limits",
    "setup_from_results",
    "row_injections",
    "run_limits",
    "completeness_curves",
    "k50_white_noise",
    "ECC_BETA",
    "TOLERANCE",
]

#: Beta(a, b) of the injected eccentricities (Kipping 2013).
ECC_BETA = (0.867, 3.03)
#: A companion is recovered when the accepted period is within this fraction.
TOLERANCE = 0.01
#: Version of the injection rule: part of every row's key.
RULE_VERSION = 1
EARTH_PER_JUPITER = float(_M_JUP / _M_EARTH)  # as the derived columns convert


@dataclass(frozen=True)
class LimitsSetup:
    """Everything one injection-recovery run depends on (its hash keys the parts)."""

    time: np.ndarray
    residuals: np.ndarray
    dy: np.ndarray
    instrument: np.ndarray
    period_edges: np.ndarray
    mass_edges: np.ndarray  # Earth masses
    n_injections: int
    star_mass: float
    seed: int = 0
    fap: float = 1e-3
    min_period: float | None = None
    max_period: float | None = None
    oversampling: float = 10.0
    circular: bool = False
    tolerance: float = TOLERANCE

    def key(self) -> str:
        h = hashlib.sha256()
        for a in (self.time, self.residuals, self.dy, self.period_edges, self.mass_edges):
            h.update(np.ascontiguousarray(a, float).tobytes())
        h.update("\x1f".join(map(str, self.instrument)).encode())
        rest = [self.n_injections, self.star_mass, self.seed, self.fap, self.min_period,
                self.max_period, self.oversampling, self.circular, self.tolerance,
                RULE_VERSION, ECC_BETA]  # fmt: skip
        h.update(json.dumps(rest).encode())
        return h.hexdigest()[:20]

    @property
    def shape(self) -> tuple[int, int]:
        return self.period_edges.size - 1, self.mass_edges.size - 1


def _search_grid(setup: LimitsSetup):
    from rvkep.periodogram import frequency_grid, periodogram

    freq = frequency_grid(setup.time, setup.min_period, setup.max_period, setup.oversampling)
    pg = periodogram(setup.time, setup.residuals, setup.dy, setup.instrument, freq)
    return freq, pg


def _screen_prefers(setup, y, peak_power, freq, P_true) -> bool:
    """The search's candidate periods for a significant peak that missed the injected
    period: is the injected one among them, and does the joint fit's linear start grid
    fit it best?"""
    from rvkep.data import RVData
    from rvkep.period_search import candidate_periods
    from rvkep.periodogram import Periodogram
    from rvkep.start_grid import grid_starts

    t0 = setup.time - np.round(np.mean(setup.time))
    pg = Periodogram(freq, peak_power, t0, y, setup.dy)
    period_range = (1.0 / freq[-1], 1.0 / freq[0])
    tries = candidate_periods(pg, setup.time, period_range)
    if not any(abs(P / P_true - 1.0) < setup.tolerance for P in tries):
        return False
    data = RVData(setup.time, y, setup.dy, setup.instrument)
    names = list(dict.fromkeys(setup.instrument.tolist()))
    design = np.column_stack([(setup.instrument == n) * 1.0 for n in names])
    weights = 1.0 / setup.dy**2
    chi2 = [grid_starts(data, y, weights, design, P, n_best=1)[0]["chi2"] for P in tries]
    return abs(tries[int(np.argmin(chi2))] / P_true - 1.0) < setup.tolerance


def row_injections(setup: LimitsSetup, row: int) -> dict:
    """Inject and recover every cell of one period row (see the module text). Returns
    {"row", "tried", "recovered", "K_mps" (median K per cell), "key", "seconds"}.

    Parameters
    ----------
    setup : LimitsSetup
        The injection grid.
    row : int
        The period row.

    Returns
    -------
    dict
        The row's counts (keys above); ``key`` ties the saved row to the setup.
    """
    from rvkep.orbit import radial_velocity
    from rvkep.periodogram import PowerBasis
    from rvkep.physics import semi_amplitude

    start = time.perf_counter()
    freq, pg = _search_grid(setup)
    basis = PowerBasis(setup.time, setup.dy, setup.instrument, freq)
    level = pg.level(setup.fap)
    rng = np.random.default_rng([setup.seed, row])
    n = setup.n_injections
    p_lo, p_hi = np.log(setup.period_edges[row : row + 2])
    t = setup.time
    tried, recovered, k_med = [], [], []
    for j in range(setup.shape[1]):
        m_lo, m_hi = np.log(setup.mass_edges[j : j + 2])
        P = np.exp(rng.uniform(p_lo, p_hi, n))
        mass = np.exp(rng.uniform(m_lo, m_hi, n))
        e = np.zeros(n) if setup.circular else rng.beta(*ECC_BETA, n)
        omega = rng.uniform(0, 2 * np.pi, n)
        tp = t.min() + rng.uniform(0, 1, n) * P
        K = semi_amplitude(P, mass / EARTH_PER_JUPITER, setup.star_mass, e)
        v = radial_velocity(t[None, :], P[:, None], tp[:, None], e[:, None], omega[:, None],
                            K[:, None])  # fmt: skip
        y = setup.residuals[None, :] + v
        power = basis.power(y)
        best = np.argmax(power, axis=1)
        top = power[np.arange(n), best]
        found = 1.0 / freq[best]
        hit = (top > level) & (np.abs(found / P - 1.0) < setup.tolerance)
        for b in np.flatnonzero((top > level) & ~hit):
            hit[b] = _screen_prefers(setup, y[b], power[b], freq, P[b])
        tried.append(n)
        recovered.append(int(hit.sum()))
        k_med.append(float(np.median(K)))
    return {"row": row, "tried": tried, "recovered": recovered, "K_mps": k_med,
            "key": setup.key(), "seconds": time.perf_counter() - start}  # fmt: skip


def _row_file(folder: Path, row: int) -> Path:
    return folder / f"row_{row:03d}.json"


def _run_row(setup: LimitsSetup, row: int, folder: str) -> dict:
    """One row in a worker: computed, then written atomically (the resume point)."""
    from rvkep.outputs import write_text

    out = row_injections(setup, row)
    write_text(_row_file(Path(folder), row), json.dumps(out))
    return out


def _read_row(folder: Path, row: int, key: str) -> dict | None:
    try:
        got = json.loads(_row_file(folder, row).read_text())
    except (OSError, ValueError):
        return None
    return got if isinstance(got, dict) and got.get("key") == key else None


@dataclass(frozen=True)
class Limits:
    """The completeness grid: ``recovered`` and ``tried`` (rows: periods, columns:
    masses), the median injected K per cell, and the curves."""

    setup: LimitsSetup
    recovered: np.ndarray
    tried: np.ndarray
    K: np.ndarray
    seconds: float

    @property
    def completeness(self) -> np.ndarray:
        return self.recovered / np.maximum(self.tried, 1)

    @property
    def period_centres(self) -> np.ndarray:
        e = self.setup.period_edges
        return np.sqrt(e[:-1] * e[1:])

    @property
    def mass_centres(self) -> np.ndarray:
        e = self.setup.mass_edges
        return np.sqrt(e[:-1] * e[1:])

    def rows(self) -> list[dict]:
        """limits.csv: ``period_d``, ``msini_mearth``, ``K_mps``, ``recovered``, ``tried``."""
        out = []
        for i, P in enumerate(self.period_centres):
            for j, m in enumerate(self.mass_centres):
                out.append({"period_d": float(P), "msini_mearth": float(m),
                            "K_mps": float(self.K[i, j]), "recovered": int(self.recovered[i, j]),
                            "tried": int(self.tried[i, j])})  # fmt: skip
        return out

    def curves(self) -> list[dict]:
        """limits_curves.csv (see :func:`completeness_curves`)."""
        return completeness_curves(self.period_centres, self.mass_centres, self.completeness,
                                   self.setup.star_mass)  # fmt: skip


def completeness_curves(periods, masses, completeness, star_mass: float) -> list[dict]:
    """Per period: the M sin i (Earth masses) at 50% and 95% completeness (running
    maximum along mass, interpolated in log mass; None where never reached) and the
    circular-orbit K of each (``period_d``, ``k50_mps``, ``k95_mps``,
    ``msini50_mearth``, ``msini95_mearth``).

    Parameters
    ----------
    periods : ndarray
        The grid's periods (days).
    masses : ndarray
        The grid's minimum masses (Earth masses).
    completeness : ndarray, shape (n_periods, n_masses)
        Fraction recovered per cell.
    star_mass : float
        Stellar mass (solar masses).

    Returns
    -------
    list of dict
        One row per period (keys above).
    """
    from rvkep.physics import semi_amplitude

    out = []
    logm = np.log(np.asarray(masses, float))
    for i, P in enumerate(periods):
        c = np.maximum.accumulate(np.asarray(completeness[i], float))
        row = {"period_d": float(P)}
        for level, name in ((0.5, "50"), (0.95, "95")):
            m = None
            if c[-1] >= level:
                k = int(np.argmax(c >= level))
                if k == 0:
                    m = float(np.exp(logm[0]))
                else:
                    frac = (level - c[k - 1]) / (c[k] - c[k - 1])
                    m = float(np.exp(logm[k - 1] + frac * (logm[k] - logm[k - 1])))
            row[f"msini{name}_mearth"] = m
            k = None if m is None else semi_amplitude(P, m / EARTH_PER_JUPITER, star_mass)
            row[f"k{name}_mps"] = None if k is None else float(k)
        out.append(row)
    return [{k: r[k] for k in ("period_d", "k50_mps", "k95_mps", "msini50_mearth",
                               "msini95_mearth")} for r in out]  # fmt: skip


def k50_white_noise(sigma: float, n: int, threshold_power: float, n_linear: int = 1,
                    leftover: float | None = None) -> float:  # fmt: skip
    """The semi-amplitude a circular orbit needs to be found half of the time in white
    noise of known ``sigma`` at ``n`` epochs, given the periodogram's detection
    threshold (the power of the false-alarm level, e.g. Baluev 2008 at 0.1%).

    Derivation. With the "standard" normalization (Zechmeister & Kuerster 2009) the
    power of a sinusoid is z = D / (D + R): D, the chi-square the two sinusoid terms
    remove, is noncentral chi-square with 2 degrees of freedom and noncentrality
    lambda = sum (v_i - mean v)^2 / sigma^2, on average n K^2 / (2 sigma^2) for a
    random phase; R is the chi-square left, chi-square with n - n_linear - 2 degrees
    of freedom (n_linear: the offsets), taken at its mean, or at ``leftover`` when one
    noise series is given (injections into fixed residuals see that series' own R,
    its chi-square about the mean less about 2). So z > z* when D > D* = R z* / (1 - z*),
    and half the injections pass when D* is the median of the noncentral chi-square:
    lambda_50 solves F(D*; 2, lambda_50) = 1/2, and K_50 = sigma sqrt(2 lambda_50 / n).
    (Taking R's spread into account, a noncentral F law, moves K_50 by 0.5% at n = 60.)

    Parameters
    ----------
    sigma : float
        The noise (m/s).
    n : int
        Number of epochs.
    threshold_power : float
        The periodogram power at the detection threshold.
    n_linear : int, optional
        Linear parameters fitted beside the sinusoid (offsets, trend).
    leftover : float, optional
        The chi-square left by the fit, when one noise series is given.

    Returns
    -------
    float
        K_50 (m/s).

    References
    ----------
    .. [1] Zechmeister, M. & Kuerster, M. (2009), A&A 496, 577.
    .. [2] Baluev, R. V. (2008), MNRAS 385, 1279.
    """
    from scipy.optimize import brentq
    from scipy.stats import ncx2

    R = float(n - n_linear - 2) if leftover is None else float(leftover)
    d_star = R * threshold_power / (1.0 - threshold_power)
    lam = brentq(lambda x: ncx2.cdf(d_star, 2, x) - 0.5, 1e-9, 1e6)
    return float(sigma * math.sqrt(2.0 * lam / n))


def setup_from_results(results, *, n_injections: int = 20, periods: tuple | None = None,
                       masses: tuple | None = None, n_periods: int = 30, n_masses: int = 30,
                       seed: int = 0, fap: float = 1e-3) -> LimitsSetup:  # fmt: skip
    """The injection grid of a finished run: its residuals and effective errors, its
    star's mass; periods from ``periods`` (min, max days; default the search's range,
    1.2 d to the baseline), masses from ``masses`` (min, max Earth masses; default from
    a third to five times the 50% semi-amplitude of white noise at the period range's
    ends).

    Parameters
    ----------
    results : Results
        A finished run (with a stellar mass).
    n_injections : int, optional
        Injections per cell.
    periods, masses : (float, float), optional
        Ranges of the grid (days; Earth masses).
    n_periods, n_masses : int, optional
        Grid size.
    seed : int, optional
        Seed of the injections.
    fap : float, optional
        The false-alarm probability a recovered signal must beat.

    Returns
    -------
    LimitsSetup
        The grid and everything a row needs.
    """
    from rvkep.period_search import residual_velocities
    from rvkep.periodogram import frequency_grid, periodogram
    from rvkep.physics import minimum_mass

    if results.noise_kind != "white":
        raise OptionError(f"limits: injection-recovery runs on white-noise runs only; this run "
                          f"used the {results.noise_kind!r} noise model")  # fmt: skip
    if results.fit is None:
        raise OptionError("limits: the run has no best fit to take residuals from")
    data = results.data
    resid, dy = residual_velocities(results.fit)
    baseline = float(np.ptp(data.time))
    lo, hi = periods if periods is not None else (DEFAULT_MIN_PERIOD, baseline)
    if not 0 < lo < hi:
        raise OptionError(f"--periods MIN:MAX needs 0 < MIN < MAX, got {lo:g}:{hi:g}")
    star = results.star.mass if results.star is not None else 1.0
    if masses is None:
        freq = frequency_grid(data.time, lo, hi)
        pg = periodogram(data.time, resid, dy, data.instrument, freq)
        sigma = float(np.sqrt(np.mean(dy**2)))
        k50 = k50_white_noise(sigma, len(data), pg.level(fap), len(data.instruments))
        m_lo = float(minimum_mass(lo, k50 / 3.0, 0.0, star)) * EARTH_PER_JUPITER
        m_hi = float(minimum_mass(hi, k50 * 5.0, 0.0, star)) * EARTH_PER_JUPITER
    else:
        m_lo, m_hi = masses
    if not 0 < m_lo < m_hi:
        raise OptionError(f"--masses MIN:MAX needs 0 < MIN < MAX, got {m_lo:g}:{m_hi:g}")
    return LimitsSetup(
        time=np.asarray(data.time, float), residuals=np.asarray(resid, float),
        dy=np.asarray(dy, float), instrument=np.asarray(data.instrument),
        period_edges=np.geomspace(lo, hi, n_periods + 1),
        mass_edges=np.geomspace(m_lo, m_hi, n_masses + 1), n_injections=int(n_injections),
        star_mass=float(star), seed=int(seed), fap=float(fap), min_period=lo, max_period=hi,
    )  # fmt: skip


def run_limits(setup: LimitsSetup, folder: str | Path, *, workers: int = 1,
               scheduler: str | None = None, quiet: bool = False) -> Limits:  # fmt: skip
    """Run every period row not already done (``folder/limits_parts/``) on ``workers``
    local processes (1: in this process) or a Dask scheduler, and gather the grid.

    Parameters
    ----------
    setup : LimitsSetup
        The injection grid.
    folder : str or Path
        The run folder (the rows are saved under ``limits_parts/`` as they finish).
    workers : int, optional
        Local worker processes.
    scheduler : str, optional
        A Dask scheduler address.
    quiet : bool, optional
        No progress bar.

    Returns
    -------
    Limits
        The counts per cell.
    """
    from rvkep.workers import INTERRUPTED, run_tasks

    start = time.perf_counter()
    parts = Path(folder) / "limits_parts"
    parts.mkdir(parents=True, exist_ok=True)
    key = setup.key()
    n_rows = setup.shape[0]
    done = {i: r for i in range(n_rows) if (r := _read_row(parts, i, key)) is not None}
    todo = [i for i in range(n_rows) if i not in done]

    def say(row):
        if not quiet:
            print(f"limits: period row {len(done)}/{n_rows} done ({row['seconds']:.1f} s)",
                  file=sys.stderr, flush=True)  # fmt: skip

    if todo and not quiet and done:
        print(f"limits: resuming, {len(done)} of {n_rows} period rows already done",
              file=sys.stderr, flush=True)  # fmt: skip

    def record(i, row):
        if row == INTERRUPTED:  # Ctrl-C: the rows written so far are the resume point
            return
        if isinstance(row, BaseException):
            raise row
        done[i] = row
        say(row)

    run_tasks(_run_row, [(i, (setup, i, str(parts))) for i in todo], record,
              workers=workers, scheduler=scheduler)  # fmt: skip
    if len(done) < n_rows:  # interrupted rows
        raise KeyboardInterrupt
    rows = [done[i] for i in range(n_rows)]
    return Limits(setup, np.array([r["recovered"] for r in rows]),
                  np.array([r["tried"] for r in rows]), np.array([r["K_mps"] for r in rows]),
                  time.perf_counter() - start)  # fmt: skip


def write_limits(limits: Limits, results, folder: str | Path) -> list[Path]:
    """limits.csv, limits_curves.csv and limits.png in ``folder``; results.json gains
    ``limits`` (the curves and how they were made) and summary.md shows them."""
    from rvkep.extra_plots import plot_limits
    from rvkep.outputs import save_figure, write_csv, write_text

    folder = Path(folder)
    s = limits.setup
    how = (f"{s.n_injections} injections per cell, {s.shape[0]} periods x {s.shape[1]} masses "
           f"(log-spaced), e from {'0 (circular)' if s.circular else 'Beta(0.867, 3.03)'}, "
           f"recovered when the search's peak (FAP < {s.fap:g}) is within "
           f"{100 * s.tolerance:g}% of the injected period; seed {s.seed}")  # fmt: skip
    label = results.run_label()
    paths = [
        write_csv(folder / "limits.csv", f"rvkep limits ({label}): {how}",
                  ["period_d", "msini_mearth", "K_mps", "recovered", "tried"], limits.rows()),
        write_csv(folder / "limits_curves.csv", f"rvkep limits ({label}): 50% and 95% "
                  "completeness (K of a circular orbit of that M sin i)",
                  ["period_d", "k50_mps", "k95_mps", "msini50_mearth", "msini95_mearth"],
                  limits.curves()),
    ]  # fmt: skip
    companions = [(float(results.estimate(f"{L}.period")["median"]),
                   float(results.estimate(f"{L}.msini_mearth")["median"]), L)
                  for L in results.labels if f"{L}.msini_mearth" in results.posterior]  # fmt: skip
    fig = plot_limits(limits, companions)
    title = f"{label}: {how}".replace(", recovered", ",\nrecovered")
    fig.axes[0].set_title(title, fontsize=7, loc="left")
    paths.append(save_figure(fig, folder / "limits.png"))
    summary = {"method": how, "seconds": round(limits.seconds, 2), "curves": limits.curves()}
    saved = json.loads((folder / "results.json").read_text())
    saved["limits"] = summary
    write_text(folder / "results.json", json.dumps(saved, indent=2) + "\n")
    if results.saved is not None:
        results.saved["limits"] = summary
        write_text(folder / "summary.md", results.markdown())
    return paths
