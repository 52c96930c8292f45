"""Invented stars that reproduce the model-choice failures met on published data sets.

Each generator is seeded and documented (its truth in its docstring); they are test
inputs, not demos. Times are BJD - 2450000 style numbers near 2459000.
"""

from __future__ import annotations

import math

import numpy as np

from rvkep import nbody
from rvkep.data import RVData
from rvkep.orbit import radial_velocity


def _season_times(rng, n: int, span: float) -> np.ndarray:
    """``n`` distinct nights over ``span`` days, 250 of every 365 observable."""
    nights = np.arange(int(span))
    nights = nights[(nights % 365) < 250]
    return 2459000.0 + np.sort(rng.choice(nights, n, replace=False)) + rng.uniform(-0.1, 0.1, n)


def planet_and_acceleration(seed: int = 3) -> RVData:
    """One planet (P 44.6 d, K 12 m/s, e 0.1) and a steady acceleration of 8 m/s per
    year, 72 velocities over 2,000 days from one spectrograph with 2.5 m/s errors.

    Truth: one companion and a linear trend. On a published star of this kind the
    trend rule (a higher degree must win by 10 in BIC within its own search) chose
    degree 0 with a second, 1,264-d e = 0.65 companion standing in for the trend."""
    rng = np.random.default_rng(seed)
    t = _season_times(rng, 72, 2000)
    v = radial_velocity(t, 44.6, 2459010.0, 0.1, 1.0, 12.0) + 8.0 / 365.25 * (t - t.mean())
    err = np.full(t.size, 2.5)
    return RVData(t, v + rng.normal(0, 2.5, t.size), err, np.array(["kite"] * t.size))


def eccentric_resonant_pair(seed: int = 5) -> RVData:
    """Two planets near 2:1, P 30.2 and 61.0 d, K 88 and 214 m/s, e 0.26 on the inner
    (omega 4.0 rad) and 0.03 on the outer; 110 velocities over 1,800 days, 3 m/s
    errors.

    Truth: two companions. Fitted circular, the inner orbit leaves its first harmonic
    (15.1 d) in the residuals, which the search adopts as a false third companion."""
    rng = np.random.default_rng(seed)
    t = _season_times(rng, 110, 1800)
    v = (radial_velocity(t, 30.2, 2459004.0, 0.26, 4.0, 88.0)
         + radial_velocity(t, 61.0, 2459020.0, 0.03, 2.0, 214.0))  # fmt: skip
    err = np.full(t.size, 3.0)
    return RVData(t, v + rng.normal(0, 3.0, t.size), err, np.array(["kite"] * t.size))


def seven_night_hot_jupiter(seed: int = 2, night_sd: float = 2.0) -> RVData:
    """A hot Jupiter (P 4.2308 d, K 55 m/s, circular) seen by a 0.6 m/s spectrograph
    on seven nights over 114 days, 13 exposures 15 minutes apart each night (91
    points), with stellar noise correlated within a night: a shift of ``night_sd`` m/s
    shared by the night's exposures plus a slow wiggle (1 m/s, 2-hour period, random
    phase) over it, as oscillation and granulation give (Dumusque et al. 2011, A&A
    525, A140: 0.5-2 m/s for solar-type stars).

    Truth: one companion, no trend. White noise weighs each night like 13 independent
    epochs, and the fit can trade the period for an alias (P/3 at 1.41 d) plus a
    trend."""
    rng = np.random.default_rng(seed)
    nights = np.sort(rng.choice(np.arange(114), 7, replace=False)) + 2459000.3
    t = (nights[:, None] + np.arange(13)[None, :] * 15.0 / 1440.0).ravel()
    v = radial_velocity(t, 4.2308, 2459001.1, 0.0, 0.0, 55.0)
    shift = np.repeat(rng.normal(0.0, night_sd, 7), 13)
    phase = np.repeat(rng.uniform(0, 2 * np.pi, 7), 13)
    wiggle = 1.0 * np.sin(2 * np.pi * (t - t.min()) * 12.0 + phase)
    err = np.full(t.size, 0.6)
    v = v + shift + wiggle + rng.normal(0.0, 0.6, t.size)
    return RVData(t, v, err, np.array(["heron"] * t.size))


def brown_dwarf_open_orbit(seed: int = 7) -> RVData:
    """A brown dwarf on an orbit longer than the data: P 11,600 d, e 0.72, omega 2.2
    rad, K 590 m/s (m sin i about 46 M_Jup around a solar-mass star), 50 velocities
    over 6,500 days from one spectrograph split at an upgrade into two zero points
    ("eagle-1" before day 3,000, "eagle-2" after, offset 40 m/s), errors 5 m/s.

    Truth: one companion with P far beyond the span. The default period prior ended at
    1.07 x the span (7,014 d), so the run reported P = 5,800 d and hid the misfit in a
    large jitter."""
    rng = np.random.default_rng(seed)
    t = np.sort(2459000.0 + rng.uniform(0, 6500, 50))
    v = radial_velocity(t, 11600.0, 2461500.0, 0.72, 2.2, 590.0)
    late = t - t.min() > 3000
    v = v + np.where(late, 40.0, 0.0) + rng.normal(0, 5.0, t.size)
    inst = np.where(late, "eagle-2", "eagle-1")
    return RVData(t, v, np.full(t.size, 5.0), inst)


def signal_in_one_instrument(seed: int = 11) -> RVData:
    """Two spectrographs see one planet (P 31.4 d, K 12 m/s): "wren", precise (1.0 m/s
    errors), and "finch" (2.5 m/s), 70 points each over 600 days; a second signal (P 9.3
    d, K 4 m/s) is put into wren's velocities only, as an instrumental systematic or
    the precise instrument's own noise would be.

    Truth: one companion; finch, precise enough to see a 4 m/s signal (its K error is
    about 0.4 m/s), shows none of it."""
    rng = np.random.default_rng(seed)
    t = np.concatenate([_season_times(rng, 70, 600), _season_times(rng, 70, 600) + 0.3])
    inst = np.array(["finch"] * 70 + ["wren"] * 70)
    err = np.where(inst == "wren", 1.0, 2.5)
    v = radial_velocity(t, 31.4, 2459010.0, 0.05, 1.0, 12.0)
    v = v + np.where(inst == "wren", radial_velocity(t, 9.3, 2459003.0, 0.0, 0.0, 4.0), 0.0)
    v = v + np.where(inst == "wren", 25.0, 0.0) + rng.normal(0, 1.0, t.size) * err
    return RVData(t, v, err, inst)


# -- interacting planets: an integration of Newton's equations independent of REBOUND --

G = nbody.G_AU_DAY  # the Gaussian constant squared (au^3 / Msun / day^2)


def _kepler_state(mu, P, e, w_planet, M0, inc, node=0.0):
    """Position and velocity of a two-body relative orbit from its elements (node 0),
    from the textbook formulas (Murray & Dermott 1999, Solar System Dynamics, sec. 2.8),
    written here without REBOUND."""
    a = (mu * (P / (2 * math.pi)) ** 2) ** (1 / 3)
    E = M0
    for _ in range(50):
        E = E - (E - e * math.sin(E) - M0) / (1 - e * math.cos(E))
    nu = 2 * math.atan2(math.sqrt(1 + e) * math.sin(E / 2), math.sqrt(1 - e) * math.cos(E / 2))
    r = a * (1 - e * math.cos(E))
    h = math.sqrt(mu * a * (1 - e * e))
    x_orb = np.array([r * math.cos(nu), r * math.sin(nu), 0.0])
    v_orb = np.array([-mu / h * math.sin(nu), mu / h * (e + math.cos(nu)), 0.0])
    cw, sw, ci, si = math.cos(w_planet), math.sin(w_planet), math.cos(inc), math.sin(inc)
    Rw = np.array([[cw, -sw, 0], [sw, cw, 0], [0, 0, 1]])
    Ri = np.array([[1, 0, 0], [0, ci, -si], [0, si, ci]])
    cn, sn = math.cos(node), math.sin(node)
    Rn = np.array([[cn, -sn, 0], [sn, cn, 0], [0, 0, 1]])
    R = Rn @ Ri @ Rw
    return R @ x_orb, R @ v_orb


def _masses(P, K, e, M_star, sin_i):
    """Masses from the mass function with the interior mass (scipy's brentq)."""
    from scipy.optimize import brentq

    out, interior = [], M_star
    gm_sun = G * nbody.AU_M**3 / 86400.0**2
    for Pj, Kj, ej, sj in zip(P, K, e, np.broadcast_to(sin_i, np.shape(P)), strict=True):
        f = Pj * 86400 * Kj**3 * (1 - ej * ej) ** 1.5 / (2 * math.pi * gm_sun) / sj**3
        m = brentq(lambda m, f=f, M=interior: m**3 - f * (M + m) ** 2, 1e-12, 1.0, xtol=1e-18)
        out.append(m)
        interior += m
    return out


def newton_star_velocity(t, P, tp, e, w, K, M_star, inc, node=0.0):
    """The star's vz (m/s) from Jacobi elements at t = 0 integrated with solve_ivp
    (DOP853, rtol 1e-12, atol 1e-15), forwards and backwards. Planets sorted by period;
    ``inc`` and ``node`` (radians) shared or one per planet."""
    inc = np.broadcast_to(np.asarray(inc, float), np.shape(P))
    node = np.broadcast_to(np.asarray(node, float), np.shape(P))
    return _newton(t, P, tp, e, w, K, M_star, inc, node)


def _newton(t, P, tp, e, w, K, M_star, inc, node):
    from scipy.integrate import solve_ivp

    masses = _masses(P, K, e, M_star, np.sin(inc))
    pos = [np.zeros(3)]
    vel = [np.zeros(3)]
    m_all = [M_star]
    com_r, com_v, interior = np.zeros(3), np.zeros(3), M_star
    for j in range(len(P)):
        mu = G * (interior + masses[j])
        r, v = _kepler_state(mu, P[j], e[j], w[j] + math.pi, 2 * math.pi * (0 - tp[j]) / P[j],
                             inc[j], node[j])  # fmt: skip
        pos.append(com_r + r)
        vel.append(com_v + v)
        m_all.append(masses[j])
        com_r = (interior * com_r + masses[j] * pos[-1]) / (interior + masses[j])
        com_v = (interior * com_v + masses[j] * vel[-1]) / (interior + masses[j])
        interior += masses[j]
    m_all = np.array(m_all)
    X = np.array(pos) - com_r
    V = np.array(vel) - com_v
    n = len(m_all)

    def rhs(_, y):
        x = y[: 3 * n].reshape(n, 3)
        d = x[None, :, :] - x[:, None, :]
        r3 = np.sum(d * d, axis=2) ** 1.5
        np.fill_diagonal(r3, np.inf)
        acc = G * np.sum(m_all[None, :, None] * d / r3[:, :, None], axis=1)
        return np.concatenate([y[3 * n :], acc.ravel()])

    y0 = np.concatenate([X.ravel(), V.ravel()])
    out = np.empty(t.size)
    for side in (t >= 0, t < 0):
        if not side.any():
            continue
        ts = t[side]
        end = ts.max() if ts[0] >= 0 else ts.min()
        sol = solve_ivp(rhs, (0.0, end), y0, method="DOP853", rtol=1e-12, atol=1e-15,
                        t_eval=np.sort(ts) if end > 0 else np.sort(ts)[::-1])  # fmt: skip
        got = dict(zip(sol.t, sol.y[3 * n + 2], strict=True))
        out[side] = [got[x] for x in ts]
    return out * nbody.M_PER_S


def interacting_pair(
    seed: int = 13, inclination_deg: float = 60.0, n: int = 70, span: float = 1400.0
) -> tuple[RVData, dict]:
    """Two planets in 2:1 resonance around an M dwarf of 0.37 solar masses: P 30.1 and
    61.1 d, K 88 and 214 m/s, e 0.25 (omega 1.1 rad) and 0.03 (omega 2.9 rad), as
    osculating Jacobi elements at the data's epoch (the middle of the data, as rvkep
    sets it), coplanar at ``inclination_deg``; ``n`` velocities over ``span`` days from
    one spectrograph with 2 m/s errors, made by :func:`newton_star_velocity` (scipy's
    DOP853 on Newton's equations, not REBOUND). Returns (data, truth)."""
    rng = np.random.default_rng(seed)
    t = _season_times(rng, n, span)
    epoch = float(np.round(0.5 * (t[0] + t[-1])))
    truth = dict(P=np.array([30.1, 61.1]), tp=np.array([4.0, -12.0]), e=np.array([0.25, 0.03]),
                 w=np.array([1.1, 2.9]), K=np.array([88.0, 214.0]), star_mass=0.37,
                 inclination_deg=inclination_deg, epoch=epoch)  # fmt: skip
    v = newton_star_velocity(t - epoch, truth["P"], truth["tp"], truth["e"], truth["w"],
                             truth["K"], 0.37, math.radians(inclination_deg))  # fmt: skip
    err = np.full(t.size, 2.0)
    data = RVData(t, v + rng.normal(0, 2.0, t.size), err, np.array(["wren"] * t.size))
    return data, truth


def giant_and_outer_companion(seed: int = 17) -> RVData:
    """A giant planet (P 326 d, K 40 m/s, e 0.1, omega 1.0 rad) and an outer companion
    on an orbit one and a half times longer than the data (P 6,000 d, K 35 m/s, e 0.4,
    omega 4.0 rad, periastron inside the data); 90 velocities over 4,000 days from three
    spectrographs ("heron" to day 1,500, "ibis" to 2,800, "jay" after; zero points 0,
    25 and -15 m/s), errors 4 m/s.

    Truth: two companions, no trend. On a published star of this kind the outer orbit
    came out at 587 d with e = 0.93 and a linear trend."""
    rng = np.random.default_rng(seed)
    t = _season_times(rng, 90, 4000)
    v = radial_velocity(t, 326.0, 2459100.0, 0.1, 1.0, 40.0)
    v = v + radial_velocity(t, 6000.0, 2461200.0, 0.4, 4.0, 35.0)
    day = t - t.min()
    inst = np.where(day < 1500, "heron", np.where(day < 2800, "ibis", "jay"))
    zero = np.where(inst == "heron", 0.0, np.where(inst == "ibis", 25.0, -15.0))
    v = v + zero + rng.normal(0, 4.0, t.size)
    return RVData(t, v, np.full(t.size, 4.0), inst)


def quadratic_instead_of_brown_dwarf(seed: int = 7) -> RVData:
    """The times, errors and two zero points of :func:`brown_dwarf_open_orbit` with the
    companion replaced by a quadratic trend (slope 30 m/s/yr, curvature -6 m/s/yr^2
    about the middle of the data).

    Truth: no companion, a trend of degree 2."""
    rng = np.random.default_rng(seed)
    t = np.sort(2459000.0 + rng.uniform(0, 6500, 50))
    years = (t - 0.5 * (t[0] + t[-1])) / 365.25
    v = 30.0 * years - 6.0 * years**2
    late = t - t.min() > 3000
    v = v + np.where(late, 40.0, 0.0) + rng.normal(0, 5.0, t.size)
    inst = np.where(late, "eagle-2", "eagle-1")
    return RVData(t, v, np.full(t.size, 5.0), inst)


def signal_in_one_season(seed: int = 19, fading: bool = True) -> RVData:
    """Three observing seasons (110 nights over 800 days, 250 of every 365 observable)
    from two spectrographs (2 m/s and 4 m/s errors, offsets 0 and 25 m/s): a 17.3-d
    circular signal of K 9 m/s that, with ``fading``, lives only in the first season
    (as a rotation signal of one active-region complex does) and is absent after it;
    without ``fading`` it is an orbit present throughout.

    Truth: with ``fading`` no companion (the signal's K per season is 9, 0, 0 m/s);
    without, one companion of K 9 m/s in every season.
    """
    rng = np.random.default_rng(seed)
    t = _season_times(rng, 110, 800)
    inst = np.where(rng.random(t.size) < 0.6, "alder", "birch")
    err = np.where(inst == "alder", 2.0, 4.0)
    v = radial_velocity(t, 17.3, 2459003.0, 0.0, 0.0, 9.0)
    if fading:
        v = np.where(t < 2459000.0 + 365.0, v, 0.0)
    v = v + np.where(inst == "birch", 25.0, 0.0) + rng.normal(0.0, err)
    return RVData(t, v, err, inst)
