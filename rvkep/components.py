"""The parts of a system model: companions, instruments, their elements, defaults.

:class:`Companion` and :class:`Instrument` are frozen descriptions (priors and start
values); :class:`Elements` is the one typed record of a companion's elements;
:func:`default_companion` and :func:`default_instrument` build them with the default
priors of :mod:`rvkep.defaults`; :func:`dynamics_parameters` lists what an N-body model
adds to the sampled vector. :class:`rvkep.model.SystemModel` puts them together.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from rvkep import defaults
from rvkep.data import RVData
from rvkep.defaults import DEFAULT_MAX_ECC
from rvkep.priors import Fixed, Prior, Uniform

__all__ = [
    "Companion",
    "Elements",
    "Instrument",
    "LABELS",
    "DYNAMICS",
    "MIN_INCLINATION",
    "YEAR",
    "default_companion",
    "default_instrument",
    "dynamics_parameters",
    "decorrelation_columns",
]

#: how the star's velocity follows from the companions' elements: a sum of Keplerians,
#: or an N-body integration (rvkep.nbody)
DYNAMICS = ("keplerian", "nbody", "nbody-inclined")
#: the least inclination of the N-body default prior (degrees)
MIN_INCLINATION = 10.0


LABELS = "bcdefghijklmnopqrstuvwxyz"
YEAR = 365.25


@dataclass(frozen=True)
class Companion:
    """One Keplerian companion: priors on P, tc, e, K and start values.

    ``start`` holds any of ``period``, ``tc`` (data time system), ``ecc``, ``omega``
    (radians) and ``K``; missing ones are filled by the best-fit search.
    """

    label: str
    period: Prior
    tc: Prior
    K: Prior
    ecc: Prior = field(default_factory=lambda: Uniform(0.0, DEFAULT_MAX_ECC))
    start: dict = field(default_factory=dict)
    steep: bool = False  # sampled in the steep-orbit coordinates (module text)

    @property
    def circular(self) -> bool:
        return isinstance(self.ecc, Fixed)

    def __post_init__(self) -> None:
        if isinstance(self.ecc, Fixed) and self.ecc.value != 0.0:
            raise ValueError(
                f"companion {self.label}: eccentricity can only be fixed at 0 (circular)"
            )
        if self.steep and self.circular:
            raise ValueError(f"companion {self.label}: a circular orbit has no steep coordinates")
        object.__setattr__(self, "start", dict(self.start))  # our own copy

    def canonical(self) -> dict:
        """Everything that shapes the posterior and its sampled coordinates, as plain
        JSON-able values."""
        return {
            "label": self.label,
            **{k: getattr(self, k).to_dict() for k in ("period", "tc", "K", "ecc")},
            **({"coordinates": "steep"} if self.steep else {}),
        }


@dataclass(frozen=True)
class Elements:
    """One companion's orbital elements for many parameter sets (arrays of one shape):
    ``period`` (d), ``tc`` and ``tp`` (conjunction and periastron, in the data's time
    system), ``ecc``, ``omega`` (the star's argument of periastron, radians) and ``K``
    (m/s). The one typed record of a companion's elements; :meth:`columns` turns it
    into named columns at the edges (tables, samples, fits)."""

    label: str
    period: np.ndarray
    tc: np.ndarray
    tp: np.ndarray
    ecc: np.ndarray
    omega: np.ndarray
    K: np.ndarray

    def columns(self, omega_unit: str = "rad") -> dict[str, np.ndarray]:
        """``<label>.period``, ``.tc``, ``.tp``, ``.ecc``, ``.K`` and ``.omega`` (radians)
        or, with ``omega_unit="deg"``, ``.omega_deg``."""
        L = self.label
        omega = ({f"{L}.omega": self.omega} if omega_unit == "rad"
                 else {f"{L}.omega_deg": np.degrees(self.omega)})  # fmt: skip
        return {f"{L}.period": self.period, f"{L}.tc": self.tc, f"{L}.tp": self.tp,
                f"{L}.ecc": self.ecc, **omega, f"{L}.K": self.K}  # fmt: skip

    @classmethod
    def from_columns(cls, label: str, columns) -> Elements:
        """From named columns (``.omega`` in radians or ``.omega_deg``)."""
        c = {k.removeprefix(f"{label}."): np.asarray(v, float) for k, v in columns.items()
             if k.startswith(f"{label}.")}  # fmt: skip
        omega = c["omega"] if "omega" in c else np.radians(c["omega_deg"])
        return cls(label, c["period"], c["tc"], c["tp"], c["ecc"], omega, c["K"])


@dataclass(frozen=True)
class Instrument:
    """One instrument: its name and the prior on its jitter (m/s)."""

    name: str
    jitter: Prior
    start_jitter: float = 1.0

    def canonical(self) -> dict:
        return {"name": self.name, "jitter": self.jitter.to_dict()}


def _stretch(e: np.ndarray) -> np.ndarray:
    """The steep coordinates' radius sqrt(-ln(1 - e)) (e = 1 - exp(-radius^2))."""
    return np.sqrt(-np.log1p(-np.asarray(e, float)))


def dynamics_parameters(kind: str, labels=()) -> list:
    """The parameters a kind of dynamics adds to the sampled vector, with their default
    priors and starts: none for ``"keplerian"``; for ``"nbody"`` ``cos_inc``, uniform
    on [0, cos 10 deg] (orientations isotropic; common practice, no source), start 0.1
    (nearly edge-on, where the N-body model is closest to the Keplerian one); for
    ``"nbody-inclined"`` a ``cos_inc.<label>`` per companion (the same prior) and a
    ``node.<label>`` (radians, uniform on [-pi, pi], start 0: coplanar) for each but
    the first of ``labels``.

    Parameters
    ----------
    kind : str
        ``"keplerian"``, ``"nbody"`` or ``"nbody-inclined"``.
    labels : sequence of str, optional
        The companions' labels (for the per-companion parameters).

    Returns
    -------
    list of NoiseParameter
        The added parameters, in the sampled vector's order.
    """
    from rvkep.noise.base import NoiseParameter

    if kind == "keplerian":
        return []
    high = math.cos(math.radians(MIN_INCLINATION))
    if kind == "nbody":
        return [NoiseParameter("cos_inc", Uniform(0.0, high), 0.1, "",
                               "cosine of the shared inclination", (0.0, 1.0))]  # fmt: skip
    out = [NoiseParameter(f"cos_inc.{L}", Uniform(0.0, high), 0.1, "",
                          f"cosine of {L}'s inclination", (0.0, 1.0)) for L in labels]  # fmt: skip
    out += [NoiseParameter(f"node.{L}", Uniform(-math.pi, math.pi), 0.0, "rad",
                           f"{L}'s longitude of the node from {labels[0]}'s",
                           (-math.pi, math.pi)) for L in labels[1:]]  # fmt: skip
    return out


def default_instrument(data: RVData, name: str, jitter: Prior | None = None) -> Instrument:
    """An instrument with ``jitter`` as its prior (default: :func:`defaults.jitter_prior`)
    and a start jitter inside it.

    Parameters
    ----------
    data : RVData
        The velocities (the start jitter comes from this instrument's scatter).
    name : str
        The instrument.
    jitter : Prior, optional
        The jitter's prior.

    Returns
    -------
    Instrument
        The instrument's model part.
    """
    prior = jitter if jitter is not None else defaults.jitter_prior(data, name)
    return Instrument(name, prior, start_jitter=defaults.start_jitter(data, name, prior))


def default_companion(
    data: RVData,
    label: str,
    period: float,
    tc: float,
    K: float,
    ecc: float = 0.0,
    omega: float = 0.5 * math.pi,
    period_range: tuple[float, float] | None = None,
    circular: bool = False,
) -> Companion:
    """A companion with the default priors (:mod:`rvkep.defaults`) around start values
    (tc in data time).

    Parameters
    ----------
    data : RVData
        The velocities (the priors scale with their span and spread).
    label : str
        The companion's label (``b``, ``c``, ...).
    period, tc, K : float
        Start period (days), time of conjunction (days) and semi-amplitude (m/s).
    ecc, omega : float, optional
        Start eccentricity and argument of periastron (radians).
    period_range : (float, float), optional
        The searched period range the period prior must cover.
    circular : bool, optional
        Hold e at 0.

    Returns
    -------
    Companion
        The companion's model part.
    """
    return Companion(
        label=label,
        period=defaults.period_prior(data, period, period_range),
        tc=defaults.tc_prior(tc, period),
        K=defaults.K_prior(data, K),
        ecc=defaults.ecc_prior(circular),
        start={"period": period, "tc": tc, "K": K, "ecc": ecc, "omega": omega},
    )


def decorrelation_columns(
    data: RVData, instruments: list[Instrument], decorrelate: tuple[str, ...]
) -> list[tuple[str, str, np.ndarray]]:
    """(indicator, instrument, design column) for each decorrelation coefficient:
    the indicator minus its median over the instrument's points, zero elsewhere.

    Parameters
    ----------
    data : RVData
        The velocities with their indicator columns.
    instruments : list of Instrument
        The model's instruments.
    decorrelate : tuple of str
        The indicator columns to decorrelate against.

    Returns
    -------
    list of (str, str, ndarray)
        One entry per coefficient, in the linear part's order.
    """
    d = data
    out = []
    for name in decorrelate:
        if name not in d.extra:
            have = ", ".join(d.extra) or "none"
            raise ValueError(f"cannot decorrelate against {name!r}: no such column in "
                             f"the data (extra columns: {have})")  # fmt: skip
        x = d.extra[name]
        for k, inst in enumerate(instruments):
            m = d.instrument_index == k
            finite = np.isfinite(x[m])
            if not finite.any():
                continue  # this instrument does not measure it
            if not finite.all():
                lack = int((~finite).sum())
                raise ValueError(f"cannot decorrelate against {name!r}: {lack} of "
                                 f"{int(m.sum())} points of {inst.name} lack it")  # fmt: skip
            if np.ptp(x[m]) == 0:
                raise ValueError(f"cannot decorrelate against {name!r}: it is constant over "
                                 f"the points of {inst.name}")  # fmt: skip
            col = np.zeros(d.t_rel.size)
            col[m] = x[m] - np.median(x[m])
            out.append((name, inst.name, col))
    if decorrelate and not out:
        raise ValueError(f"cannot decorrelate against {', '.join(decorrelate)}: no "
                         "instrument measures it")  # fmt: skip
    return out
