"""When things happen on each orbit: conjunctions, oppositions, periastron passages and
the two quadratures, with their uncertainty from the posterior samples.

For every posterior draw the event's true anomaly gives its mean anomaly (Kepler's
equation backwards: tan(E/2) = sqrt((1-e)/(1+e)) tan(nu/2), M = E - e sin E) and so
its time in each orbit. The events, as true anomalies of the companion's orbit with
omega the star's argument of periastron:

================  ==============  =================================================
event             nu              meaning
================  ==============  =================================================
conjunction       pi/2 - omega    the companion in front of the star (a transit, if
                                  the inclination allows); the star's velocity
                                  crosses its mean going down
opposition        3 pi/2 - omega  the companion behind the star (secondary eclipse)
periastron        0               closest approach
quadrature_max    -omega          the star's largest velocity (receding fastest)
quadrature_min    pi - omega      the star's smallest velocity
================  ==============  =================================================

Each draw's event phase (in periods from its own conjunction) is unwrapped about the
circular median over draws, so an event near a phase boundary is not split into two
orbits; the n-th event's time is then tc + P (n + phase), per draw, and its interval
is the spread over draws: it widens with the distance from the data as the period's
uncertainty accumulates (sigma_t^2 ~ sigma_tc^2 + n^2 sigma_P^2 + 2 n cov(tc, P)).
"""

from __future__ import annotations

from collections.abc import Mapping

import numpy as np

from rvkep.orbit import conjunction_mean_anomaly

__all__ = ["EVENTS", "event_times", "MAX_EVENT_ROWS"]

EVENTS = ("conjunction", "opposition", "periastron", "quadrature_max", "quadrature_min")
#: the most rows one call returns (a window of many thousand orbits is a mistake)
MAX_EVENT_ROWS = 100_000
_LEVELS = (50.0, 15.865, 84.135, 2.275, 97.725)


def _true_anomaly(event: str, omega: np.ndarray) -> np.ndarray:
    return {
        "conjunction": 0.5 * np.pi - omega,
        "opposition": 1.5 * np.pi - omega,
        "periastron": np.zeros_like(omega),
        "quadrature_max": -omega,
        "quadrature_min": np.pi - omega,
    }[event]


def _mean_anomaly(nu: np.ndarray, ecc: np.ndarray) -> np.ndarray:
    """Mean anomaly in [0, 2 pi) of true anomaly ``nu``: the conjunction's formula
    (:func:`rvkep.orbit.conjunction_mean_anomaly`, at nu = pi/2 - omega) with
    omega = pi/2 - nu."""
    return np.mod(conjunction_mean_anomaly(ecc, 0.5 * np.pi - nu), 2 * np.pi)


def _phase(columns: Mapping, label: str, event: str) -> np.ndarray:
    """Each draw's event phase in periods after its conjunction, unwrapped about the
    circular median over draws."""
    e = np.asarray(columns[f"{label}.ecc"], float)
    w = np.radians(np.asarray(columns[f"{label}.omega_deg"], float))
    m_event = _mean_anomaly(_true_anomaly(event, w), e)
    m_conj = _mean_anomaly(_true_anomaly("conjunction", w), e)
    phase = np.mod((m_event - m_conj) / (2 * np.pi), 1.0)
    centre = np.angle(np.mean(np.exp(2j * np.pi * phase))) / (2 * np.pi)
    return centre + (np.mod(phase - centre + 0.5, 1.0) - 0.5)


def event_times(columns: Mapping, labels: list[str], start: float, end: float,
                transit_probability: Mapping[str, float] | None = None) -> list[dict]:  # fmt: skip
    """Every event of every companion whose median time lies in [start, end], sorted by
    time: dicts with ``companion``, ``event``, ``time_median``, ``time_lo68``,
    ``time_hi68``, ``time_lo95``, ``time_hi95`` (times in the data's system) and
    ``transit_probability`` (conjunctions, when given per companion; else None).

    ``columns`` are posterior samples by name (``<label>.period``, ``.tc``, ``.ecc``,
    ``.omega_deg``), as :class:`rvkep.posterior.PosteriorSamples` holds them.

    Parameters
    ----------
    columns : mapping
        Posterior samples by name.
    labels : list of str
        The companions.
    start, end : float
        The window (days, the data's time system).
    transit_probability : mapping, optional
        {label: probability} for the conjunctions.

    Returns
    -------
    list of dict
        The events (keys above).
    """
    if not (np.isfinite(start) and np.isfinite(end) and end > start):
        raise ValueError("the window needs finite times with end > start")
    rows: list[dict] = []
    for L in labels:
        P = np.asarray(columns[f"{L}.period"], float)
        tc = np.asarray(columns[f"{L}.tc"], float)
        p_med, tc_med = float(np.median(P)), float(np.median(tc))
        n_orbits = (end - start) / p_med + 2
        if len(rows) + 5 * n_orbits > MAX_EVENT_ROWS:
            raise ValueError(f"the window holds about {5 * n_orbits:,.0f} events of {L}; "
                             f"at most {MAX_EVENT_ROWS:,} (narrow it)")  # fmt: skip
        for event in EVENTS:
            phase = _phase(columns, L, event)
            first = int(np.floor((start - tc_med) / p_med - float(np.median(phase)))) - 1
            last = int(np.ceil((end - tc_med) / p_med - float(np.median(phase)))) + 1
            for n in range(first, last + 1):
                t = tc + P * (n + phase)
                q = np.percentile(t, _LEVELS)
                if not start <= q[0] <= end:
                    continue
                prob = None
                if event == "conjunction" and transit_probability is not None:
                    prob = transit_probability.get(L)
                rows.append({"companion": L, "event": event, "time_median": float(q[0]),
                             "time_lo68": float(q[1]), "time_hi68": float(q[2]),
                             "time_lo95": float(q[3]), "time_hi95": float(q[4]),
                             "transit_probability": prob})  # fmt: skip
    rows.sort(key=lambda r: (r["time_median"], r["companion"], r["event"]))
    return rows
