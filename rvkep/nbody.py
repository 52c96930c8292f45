"""The star's velocity from an N-body integration of star and companions (REBOUND).

A sum of Keplerians treats each companion as if it orbited alone; planets in or near
a resonance, or close to each other, pull on each other and their orbits precess
measurably over years. :func:`star_velocity` integrates the whole system instead:

* the companions' elements (P, K, e, omega, tc) are read as *osculating Jacobi
  elements* at the reference epoch (the data's ``epoch``, time 0 of ``t_rel``): the
  companion sorted k-th by period orbits the centre of mass of the star and the
  k - 1 inner companions;
* masses come from K through the mass function with that interior mass,
  m^3 sin^3 i / (M_interior + m)^2 = P K^3 (1 - e^2)^(3/2) / (2 pi G), which is exact
  for the star's Jacobi reflex motion (the Keplerian limit of the integration is the
  sum of Keplerians to rounding);
* the orbits are coplanar with one inclination i to the sky (the line of sight is the
  z axis; a positive velocity moves away from the observer), nodes at 0; or each
  companion has its own inclination and longitude of the node (mutual inclinations);
* the integration runs from the epoch forwards and backwards to each observation time
  exactly (each ``integrate`` ends on the time: no interpolation);
* light-travel time across the system and relativity are neglected.

Integrator (:func:`integrator_for`): WHFast (Wisdom & Holman 1991, AJ 102, 1528; Rein &
Tamayo 2015, MNRAS 452, 376; symplectic corrector of order 5, Wisdom, Holman &
Touma 1996) with a step of 1/20 of the shortest period, or IAS15
(Rein & Spiegel 2015, MNRAS 446, 1424; adaptive, for close encounters) when an orbit
is eccentric (e >= 0.5) or two orbits cross.

Units inside: solar masses, au, days, G = k^2 with the Gaussian constant k.
"""

from __future__ import annotations

import contextlib
import math

import numpy as np

from rvkep.errors import OptionError

__all__ = [
    "require_rebound",
    "companion_masses",
    "integrator_for",
    "simulation",
    "star_velocity",
    "star_velocity_rows",
    "orientation",
    "mutual_inclination",
    "threads",
    "M_PER_S",
]

#: Gaussian gravitational constant (au^(3/2) Msun^(-1/2) day^(-1)), IAU 1976
GAUSS_K = 0.01720209895
G_AU_DAY = GAUSS_K * GAUSS_K
AU_M = 149_597_870_700.0  # IAU 2012 B2
#: one au/day in m/s
M_PER_S = AU_M / 86400.0
#: G M_sun in m^3/s^2 consistent with the units above
_GM_SUN = G_AU_DAY * AU_M**3 / 86400.0**2

#: the WHFast step as a fraction of the shortest period
STEP_FRACTION = 1.0 / 20.0
#: an orbit at least this eccentric sends the integration to IAS15
ECCENTRIC = 0.5

_INSTALL = 'the N-body model needs REBOUND: pip install "rvkep[dynamics]"'


def require_rebound():
    """The ``rebound`` module, or :class:`~rvkep.errors.OptionError` with the install
    line when it is missing.

    Returns
    -------
    module
        ``rebound``.
    """
    try:
        import rebound
    except ImportError:
        raise OptionError(_INSTALL) from None
    return rebound


def _solve_mass(f: np.ndarray, M: np.ndarray) -> np.ndarray:
    """m with m^3 = f (M + m)^2 (the mass function's root; see
    :func:`rvkep.physics._solve_mass_function`, repeated here without astropy)."""
    cf = np.cbrt(f)
    m = cf * np.cbrt(M * M)
    for _ in range(200):
        new = cf * np.cbrt((M + m) ** 2)
        if np.all(np.abs(new - m) <= 1e-15 * new):
            m = new
            break
        m = new
    for _ in range(3):
        g = m**3 - f * (M + m) ** 2
        dg = 3.0 * m * m - 2.0 * f * (M + m)
        m = m - np.where(dg > 0, g / np.where(dg > 0, dg, 1.0), 0.0)
    return m


def companion_masses(period, K, ecc, star_mass: float, sin_i: float = 1.0) -> np.ndarray:
    """Each companion's mass (solar masses) from its K in Jacobi order.

    Parameters
    ----------
    period, K, ecc : array_like, shape (n_companions,)
        Days, m/s and eccentricity, in any order (masses come back in that order).
    star_mass : float
        Solar masses.
    sin_i : float
        The sine of the shared inclination.

    Returns
    -------
    numpy.ndarray
        Masses; the k-th companion by period is solved with the star plus the inner
        companions as its interior mass.
    """
    P = np.asarray(period, float)
    Kv = np.asarray(K, float)
    e = np.asarray(ecc, float)
    f = P * 86400.0 * Kv**3 * (1.0 - e * e) ** 1.5 / (2.0 * math.pi * _GM_SUN)
    f = f / sin_i**3
    out = np.empty_like(P)
    interior = float(star_mass)
    for j in np.argsort(P, kind="stable"):
        out[j] = _solve_mass(np.array(f[j]), np.array(interior))
        interior += out[j]
    return out


def integrator_for(period, ecc, masses, star_mass: float) -> str:
    """``"whfast"``, or ``"ias15"`` when an orbit is eccentric (e >= :data:`ECCENTRIC`)
    or two orbits cross (the inner apoastron reaches the outer periastron), where
    encounters can be close. A heavy 2:1 pair (K 88 and 214 m/s around 0.37 solar
    masses, e 0.25, not Hill stable) stays within 0.05 m/s of IAS15 over ten years
    with WHFast at P_min/20 (tests/kernel/test_nbody.py), so Hill instability alone does
    not send a system to the slower integrator.

    Parameters
    ----------
    period, ecc, masses : array_like
        Per companion: period (days), eccentricity, mass (solar masses).
    star_mass : float
        Solar masses.

    Returns
    -------
    str
        The integrator's name.
    """
    P = np.atleast_1d(np.asarray(period, float))
    e = np.atleast_1d(np.asarray(ecc, float))
    if P.size == 0:
        return "whfast"
    if np.max(e) >= ECCENTRIC:
        return "ias15"
    order = np.argsort(P)
    m = np.atleast_1d(np.asarray(masses, float))[order]
    a = np.cbrt(G_AU_DAY * (star_mass + m) * (P[order] / (2 * math.pi)) ** 2)
    e = e[order]
    if np.any(a[:-1] * (1 + e[:-1]) >= a[1:] * (1 - e[1:])):
        return "ias15"
    return "whfast"


def simulation(
    period,
    tp_rel,
    ecc,
    omega,
    K,
    star_mass: float,
    inclination=0.5 * math.pi,
    integrator: str | None = None,
    node=0.0,
):
    """A REBOUND simulation of the system at the epoch (time 0), centre of mass at rest.

    Parameters
    ----------
    period, tp_rel, ecc, omega, K : array_like, shape (n_companions,)
        Days, periastron time minus the epoch (days), eccentricity, the *star's*
        argument of periastron (radians; the companion's is omega + pi), m/s.
    star_mass : float
        Solar masses.
    inclination : float or array_like
        Radians (pi/2: edge-on), shared or one per companion.
    integrator : {"whfast", "ias15"}, optional
        Default: :func:`integrator_for`.
    node : float or array_like
        Longitudes of the node on the sky (radians), shared or one per companion.

    Returns
    -------
    rebound.Simulation
        Star first, then the companions in Jacobi coordinates.
    """
    rebound = require_rebound()
    P = np.atleast_1d(np.asarray(period, float))
    tp = np.atleast_1d(np.asarray(tp_rel, float))
    e = np.atleast_1d(np.asarray(ecc, float))
    w = np.atleast_1d(np.asarray(omega, float))
    inc = np.broadcast_to(np.asarray(inclination, float), P.shape)
    nodes = np.broadcast_to(np.asarray(node, float), P.shape)
    masses = companion_masses(P, K, e, star_mass, np.sin(inc))
    sim = rebound.Simulation()
    sim.G = G_AU_DAY
    sim.add(m=star_mass)
    for j in np.argsort(P, kind="stable"):  # Jacobi: by period, inside out
        M = 2.0 * math.pi * (0.0 - tp[j]) / P[j]
        sim.add(m=masses[j], P=P[j], e=e[j], omega=w[j] + math.pi, inc=float(inc[j]),
                Omega=float(nodes[j]), M=M)  # fmt: skip
    sim.move_to_com()
    kind = integrator or integrator_for(P, e, masses, star_mass)
    sim.integrator = kind
    if kind == "whfast":
        sim.dt = STEP_FRACTION * float(P.min())
        sim.integrator.corrector = 5
        sim.integrator.safe_mode = 0  # integrate() synchronizes when it ends on a time
    return sim


def _velocities(sim, times: np.ndarray) -> np.ndarray:
    """The star's vz (au/day) at ``times`` (all on one side of sim.t, in the order of
    integration)."""
    out = np.empty(times.size)
    star = sim.particles[0]
    for n, t in enumerate(times):
        sim.integrate(float(t), exact_finish_time=1)
        out[n] = star.vz
    return out


def _keeping_sigint(fn):
    """``fn`` run inside :func:`keep_sigint` (it is defined below; looked up at call)."""
    import functools

    @functools.wraps(fn)
    def guarded(*args, **kwargs):
        with keep_sigint():
            return fn(*args, **kwargs)

    return guarded


@_keeping_sigint
def star_velocity(
    t_rel,
    period,
    tp_rel,
    ecc,
    omega,
    K,
    star_mass: float,
    inclination=0.5 * math.pi,
    integrator: str | None = None,
    node=0.0,
) -> np.ndarray:
    """The star's line-of-sight velocity (m/s) at times ``t_rel`` (days from the epoch).

    Positive values move away from the observer, as a radial velocity does; for
    well-separated light companions this is the sum of the Keplerians with the same
    elements. The unguarded integration (for worker threads) is
    ``star_velocity.__wrapped__``.

    Parameters
    ----------
    t_rel : array_like
        Times from the epoch (days), before or after it.
    period, tp_rel, ecc, omega, K, star_mass, inclination, integrator, node
        As for :func:`simulation`.

    Returns
    -------
    ndarray
        The velocity (m/s), shape ``t_rel.shape``.
    """
    t = np.asarray(t_rel, float)
    flat = t.ravel()
    out = np.zeros(flat.size)
    if np.size(period) == 0:
        return out.reshape(t.shape)
    sim = simulation(period, tp_rel, ecc, omega, K, star_mass, inclination, integrator, node)
    after = np.flatnonzero(flat >= 0.0)
    before = np.flatnonzero(flat < 0.0)
    back = sim.copy() if before.size else None
    if after.size:
        order = after[np.argsort(flat[after], kind="stable")]
        out[order] = _velocities(sim, flat[order])
    if before.size:
        if back.integrator == "whfast":
            back.dt = -back.dt
        order = before[np.argsort(-flat[before], kind="stable")]
        out[order] = _velocities(back, flat[order])
    return (out * M_PER_S).reshape(t.shape)


@contextlib.contextmanager
def keep_sigint():
    """Keep Ctrl-C working around REBOUND.

    REBOUND's integrate installs its own C handler for SIGINT and leaves it there: a
    later Ctrl-C would be swallowed (measured with 5.2.2). On the main thread this
    puts Python's handler back when the block ends; a Ctrl-C that REBOUND caught
    inside (its KeyboardInterrupt) is handed to that handler as the signal would have
    been, so the sampler's own Ctrl-C handling (stop at the next step) still applies."""
    import signal
    import threading

    if threading.current_thread() is not threading.main_thread():
        yield
        return
    handler = signal.getsignal(signal.SIGINT)
    caught = False
    try:
        yield
    except KeyboardInterrupt:
        caught = True
    finally:
        if handler is not None:
            signal.signal(signal.SIGINT, handler)
    if caught:
        if callable(handler):
            handler(signal.SIGINT, None)
        elif handler != signal.SIG_IGN:
            raise KeyboardInterrupt


def threads() -> int:
    """Threads :func:`star_velocity_rows` spreads its rows over: ``OMP_NUM_THREADS``
    when set (rvkep's batch and limits workers set it to 1), else the cores this
    process may use. REBOUND's C integrator runs without Python's lock (ctypes), so
    the rows integrate side by side: 1.5x on 2 cores (16 four-planet rows).

    Returns
    -------
    int
        At least 1.
    """
    import os

    given = os.environ.get("OMP_NUM_THREADS", "")
    if given.isdigit() and int(given) > 0:
        return int(given)
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # not on Linux
        return max(1, os.cpu_count() or 1)


_POOL = None


def _pool(n: int):
    global _POOL
    if _POOL is None or _POOL._max_workers != n:
        from concurrent.futures import ThreadPoolExecutor

        _POOL = ThreadPoolExecutor(n, thread_name_prefix="rvkep-nbody")
    return _POOL


def orientation(columns, labels, rows=slice(None)) -> tuple[np.ndarray, np.ndarray]:
    """(inclinations, nodes) in radians, each (n_draws, n_companions), from posterior
    or model columns: ``dynamics.cos_inc`` (shared, nodes 0) or ``dynamics.cos_inc.<L>``
    and ``dynamics.node.<L>`` (the first companion's node 0); edge-on without them.

    Parameters
    ----------
    columns : mapping of str to array
        Posterior or model columns.
    labels : list of str
        The companions.
    rows : slice or index array
        The draws to take.

    Returns
    -------
    tuple of ndarray
        Inclinations and nodes.
    """

    def col(key):
        return np.atleast_1d(np.asarray(columns[key], float))[rows]

    if "dynamics.cos_inc" in columns:
        inc = np.arccos(np.clip(col("dynamics.cos_inc"), 0.0, 1.0))[:, None]
        inc = np.repeat(inc, len(labels), axis=1)
        return inc, np.zeros_like(inc)
    if labels and f"dynamics.cos_inc.{labels[0]}" in columns:
        inc = np.column_stack([np.arccos(np.clip(col(f"dynamics.cos_inc.{L}"), 0.0, 1.0))
                               for L in labels])  # fmt: skip
        node = np.column_stack([col(f"dynamics.node.{L}") if f"dynamics.node.{L}" in columns
                                else np.zeros(inc.shape[0]) for L in labels])  # fmt: skip
        return inc, node
    n = len(np.atleast_1d(np.asarray(next(iter(columns.values()))))[rows]) if columns else 1
    return np.full((n, len(labels)), 0.5 * math.pi), np.zeros((n, len(labels)))


def mutual_inclination(inc1, node1, inc2, node2) -> np.ndarray:
    """The angle between two orbit planes (radians) from their inclinations and nodes
    on the sky: cos Phi = cos i1 cos i2 + sin i1 sin i2 cos(node1 - node2) (spherical
    trigonometry; common practice, no source).

    Parameters
    ----------
    inc1, node1, inc2, node2 : array_like
        Inclinations and nodes of the two orbits (radians).

    Returns
    -------
    ndarray
        The mutual inclination, radians in [0, pi].
    """
    c = np.cos(inc1) * np.cos(inc2) + np.sin(inc1) * np.sin(inc2) * np.cos(node1 - node2)
    return np.arccos(np.clip(c, -1.0, 1.0))


def _per_row(x, shape: tuple[int, int]) -> np.ndarray:
    """A value per row, or per row and companion, as an (n_sets, n_companions) array."""
    x = np.asarray(x, float)
    return np.broadcast_to(x[:, None] if x.ndim == 1 else x, shape)


def star_velocity_rows(
    t_rel: np.ndarray, arr: dict, star_mass: np.ndarray | float, inclination: np.ndarray,
    node: np.ndarray | float = 0.0,
) -> np.ndarray:
    """:func:`star_velocity` for every row of the model's matrices ``arr`` (keys
    ``period``, ``tp_rel``, ``ecc``, ``omega``, ``K``, shape (n_sets, n_companions)):
    (n_sets, n_times). ``inclination`` and ``node`` (radians) have one value per row,
    or a row of one per companion (:func:`orientation`); a row that
    cannot be integrated (an orbit crossing, an escape) gives NaN. Rows run on
    :func:`threads` threads; each row's result is the same whatever their number.

    Parameters
    ----------
    t_rel : ndarray
        Times from the epoch (days).
    arr : dict
        The companions' matrices.
    star_mass : ndarray or float
        Solar masses, per row or shared.
    inclination, node : ndarray or float
        Radians, per row (and per companion).

    Returns
    -------
    ndarray
        (n_sets, n_times) velocities, m/s.
    """
    n = arr["period"].shape[0]
    out = np.empty((n, np.size(t_rel)))
    mass = np.broadcast_to(np.asarray(star_mass, float), (n,))
    inc, nodes = (_per_row(x, arr["period"].shape) for x in (inclination, node))
    interrupted = []

    def row(r: int) -> None:
        if interrupted:
            out[r] = np.nan
            return
        try:
            out[r] = star_velocity.__wrapped__(
                t_rel, arr["period"][r], arr["tp_rel"][r], arr["ecc"][r], arr["omega"][r],
                arr["K"][r], mass[r], inc[r], node=nodes[r])  # fmt: skip
        except (RuntimeError, ValueError, ArithmeticError):  # rebound.Escape etc.
            out[r] = np.nan
        except KeyboardInterrupt:  # REBOUND caught a Ctrl-C (in any thread)
            interrupted.append(r)
            out[r] = np.nan

    workers = min(threads(), n)
    with keep_sigint():
        if workers > 1:
            list(_pool(workers).map(row, range(n)))
        else:
            for r in range(n):
                row(r)
        if interrupted:
            raise KeyboardInterrupt
    return out
