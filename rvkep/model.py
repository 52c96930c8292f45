"""The system model: star, companions, instruments, trend, and the parameter vector.

Sampled coordinates (each companion labelled b, c, d ... in the order found):

=============================  =================================================
coordinate                     physical parameter and implied prior
=============================  =================================================
``<label>.ln_period``          period P (days); the prior is stated on P and the
                               Jacobian dP/dlnP = P is added, so the default
                               log-uniform prior on P is uniform in ln P
``<label>.tc``                 time of conjunction (days, minus the reference
                               epoch: the sampled coordinate only); the prior
                               and every physical value are in the data's time
                               system. Default: uniform over one period centred
                               on the start value (one phase mode)
``<label>.sqrt_e_cos_omega``,  (e, omega): uniform in these two inside the unit
``<label>.sqrt_e_sin_omega``   disc is uniform in e and in omega (Eastman et al.
                               2013), so the prior on e applies as stated and
                               omega is uniform on [0, 2 pi). Absent when the
                               orbit is circular (e fixed at 0)
``<label>.K``                  semi-amplitude K (m/s), prior as stated
``<label>.stretched_e_cos_omega``  steep orbits only (below): (e, omega) as
``<label>.stretched_e_sin_omega``  sqrt(-ln(1 - e)) (cos omega, sin omega), the
                               whole plane; the prior on e and omega as above
                               times the Jacobian (1 - e)
``<label>.K_sqrt_1_minus_e2``  steep orbits only: K sqrt(1 - e^2); the prior on K
                               as stated times the Jacobian 1 / sqrt(1 - e^2)
``jitter.<instrument>``        extra white noise (m/s) added in quadrature
``noise.<name>``               a parameter the noise model owns (none for white
                               noise; see :mod:`rvkep.noise`), prior as stated
``dynamics.cos_inc``           N-body models only (``dynamics="nbody"``): the
                               cosine of the orbits' shared inclination to the
                               sky; default uniform on [0, cos 10 deg] (isotropic
                               orientations, masses at most 5.8 x m sin i)
``dynamics.cos_inc.<label>``,  ``dynamics="nbody-inclined"``: each companion's own
``dynamics.node.<label>``      inclination (prior as above) and, but for the first
                               companion's (the reference, 0), its longitude of
                               the node on the sky (radians, uniform on
                               [-pi, pi]): mutual inclinations are free
=============================  =================================================

Offsets (one per instrument), the trend coefficients (slope in m/s/yr, curvature in
m/s/yr^2, about the reference epoch) and, when asked, one decorrelation coefficient per
activity indicator and instrument (``decorr.<indicator>.<instrument>``, m/s per unit
of the indicator, about the instrument's median indicator value) are linear parameters
with flat priors; the
likelihood marginalizes (or, for best fits, solves for) them analytically, so they are
not in the sampled vector. Their posterior is drawn afterwards from the conditional
Gaussian of each sample.

Steep orbits. A companion marked ``steep`` is sampled in the last two rows' coordinates
instead of the sqrt(e) pair and K. Near e = 0.9 the data fix the velocity curve away
from periastron, which pins K sqrt(1 - e^2) (proportional to m sin i at a given period)
while K alone follows e along a narrow curved ridge, and sqrt(e) piles up against the
edge of the unit disc; in the stretched coordinates the posterior is close to Gaussian.
On a seeded e = 0.9 star (60 points) the largest autocorrelation time fell from about
1,560 steps (unconverged at 40,000) to 170 (converged at about 9,000), same posterior. The
prior is the same distribution in either set of coordinates: the log densities differ
by the log Jacobian, which :meth:`SystemModel.log_prior` adds. Near e = 0 the
stretched pair equals the sqrt(e) pair to first order.

Default priors come from :mod:`rvkep.defaults` (one place for the search, the best
fit and model files): period log-uniform over the search range; tc uniform over one
period around the start; e uniform on [0, 0.99]; K uniform on [0, 2 x peak-to-peak of
the velocities with each instrument's zero point removed]; jitter uniform on
[0, max(10, 3 x RMS)] m/s per instrument.

Companions and instruments are frozen descriptions: fitting never changes them; new
values come back in new objects (:func:`dataclasses.replace`).

References
----------
.. [1] Eastman, J., Gaudi, B. S. & Agol, E. (2013), PASP 125, 83.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace

import numpy as np

from rvkep import model_dump, prior_layout
from rvkep.components import (
    DYNAMICS,
    LABELS,
    MIN_INCLINATION,
    YEAR,
    Companion,
    Elements,
    Instrument,
    _stretch,
    decorrelation_columns,
    default_companion,
    default_instrument,
    dynamics_parameters,
)
from rvkep.data import RVData
from rvkep.defaults import DEFAULT_MAX_ECC
from rvkep.orbit import conjunction_mean_anomaly
from rvkep.physics import StarProperties
from rvkep.velocity import keplerian_velocity, orbit_velocity

__all__ = [
    "Companion",
    "Instrument",
    "SystemModel",
    "LABELS",
    "DEFAULT_MAX_ECC",
    "DYNAMICS",
    "MIN_INCLINATION",
    "YEAR",
    "default_companion",
    "default_instrument",
    "dynamics_parameters",
    "keplerian_velocity",
    "orbit_velocity",
    "Elements",
]


@dataclass
class SystemModel:
    """Star + companions + instruments + trend, bound to one data set.

    Parameters
    ----------
    data : RVData
    companions : list of Companion
    instruments : list of Instrument, optional
        One per instrument in ``data`` (default priors when omitted).
    trend : int
        Polynomial degree of the long-term trend: 0 (none), 1 (linear), 2 (quadratic).
    star : StarProperties, optional
    noise : str
        The noise model's name (:mod:`rvkep.noise`; default ``"white"``).
    noise_parameters : list of NoiseParameter, optional
        The noise model's own parameters with their priors and starts (its defaults
        for the data when omitted).
    decorrelate : tuple of str
        Extra data columns (activity indicators such as ``fwhm``) the velocities are
        decorrelated against: a linear coefficient per indicator and instrument,
        handled like the offsets. An instrument whose points all lack the column gets
        no coefficient.
    dynamics : {"keplerian", "nbody"}
        The star's velocity as a sum of Keplerians, or from an N-body integration of
        star and companions (:mod:`rvkep.nbody`; the elements are osculating Jacobi
        elements at the data's epoch, one shared inclination is sampled, the star's
        mass is its nominal value).
    dynamics_parameters : list of NoiseParameter, optional
        The N-body model's own parameters (``cos_inc``) with priors and starts
        (:func:`dynamics_parameters` when omitted).
    """

    data: RVData
    companions: list[Companion] = field(default_factory=list)
    instruments: list[Instrument] | None = None
    trend: int = 0
    star: StarProperties | None = None
    noise: str = "white"  # a name in rvkep.noise.NOISE_MODELS
    noise_parameters: list | None = None  # of rvkep.noise.NoiseParameter
    decorrelate: tuple[str, ...] = ()
    dynamics: str = "keplerian"
    dynamics_parameters: list | None = None

    def __post_init__(self) -> None:
        if self.dynamics not in DYNAMICS:
            raise ValueError(f"dynamics must be one of {', '.join(DYNAMICS)}, got "
                             f"{self.dynamics!r}")  # fmt: skip
        # the dynamics' parameters for these companions, given ones kept by name (a
        # model with other companions gets theirs)
        given = {p.name: p for p in (self.dynamics_parameters or [])}
        self.dynamics_parameters = [given.get(p.name, p) for p in
                                    dynamics_parameters(self.dynamics, self.labels())]  # fmt: skip
        if self.dynamics != "keplerian" and (self.star is None or not self.star.mass > 0):
            raise ValueError("the N-body model needs the star's mass (--star-mass)")
        own = self.noise_model.parameters(self.data)
        if self.noise_parameters is None:
            self.noise_parameters = own
        else:
            want = [p.name for p in own]
            given = [p.name for p in self.noise_parameters]
            if sorted(given) != sorted(want):
                raise ValueError(
                    f"noise model {self.noise!r} has parameters {', '.join(want) or 'none'}, "
                    f"got {', '.join(given) or 'none'}"
                )
            by_name = {p.name: p for p in self.noise_parameters}
            self.noise_parameters = [by_name[n] for n in want]
        names = self.data.instruments
        if self.instruments is None:
            self.instruments = [default_instrument(self.data, n) for n in names]
        given = {i.name for i in self.instruments}
        if given != set(names):
            missing = sorted(set(names) - given)
            extra = sorted(given - set(names))
            raise ValueError(
                "instruments in the model do not match the data"
                + (f"; missing {', '.join(missing)}" if missing else "")
                + (f"; not in the data: {', '.join(extra)}" if extra else "")
            )
        order = {n: i for i, n in enumerate(names)}
        self.instruments = sorted(self.instruments, key=lambda i: order[i.name])
        if self.trend not in (0, 1, 2):
            raise ValueError(f"trend degree must be 0, 1 or 2, got {self.trend!r}")
        self.decorrelate = tuple(self.decorrelate)
        self._build()

    # -- layout ---------------------------------------------------------------

    def _build(self) -> None:
        self._build_design()
        self._build_slots()
        self._build_gathers()

    def _build_design(self) -> None:
        """The data as the likelihood sees them: times, shifted velocities, variances
        and the design matrix of the linear parameters."""
        d = self.data
        self.t = d.t_rel.copy()
        self.inst_index = d.instrument_index
        n_inst = len(self.instruments)
        # centre each instrument on its median so the linear solve is well scaled
        self.rv_shift = np.array(
            [np.median(d.rv[self.inst_index == k]) for k in range(n_inst)], dtype=float
        )
        self.y = d.rv - self.rv_shift[self.inst_index]
        self.err2 = d.err**2
        cols = [(self.inst_index == k).astype(float) for k in range(n_inst)]
        cols += [(self.t / YEAR) ** p for p in range(1, self.trend + 1)]
        self._decorr = decorrelation_columns(d, self.instruments, self.decorrelate)
        cols += [c for _, _, c in self._decorr]
        self.design = np.column_stack(cols)

    def _build_slots(self) -> None:
        """The sampled vector's names and slots (kind, owner index, field)."""
        names: list[str] = []
        slots: list[tuple[str, int, str]] = []  # (kind, owner index, field)
        for ci, c in enumerate(self.companions):
            if not c.period.is_fixed:
                names.append(f"{c.label}.ln_period")
                slots.append(("companion", ci, "ln_period"))
            if not c.tc.is_fixed:
                names.append(f"{c.label}.tc")
                slots.append(("companion", ci, "tc"))
            if not c.circular:
                pair = "stretched_e" if c.steep else "sqrt_e"
                names += [f"{c.label}.{pair}_cos_omega", f"{c.label}.{pair}_sin_omega"]
                slots += [("companion", ci, "h"), ("companion", ci, "k")]
            if not c.K.is_fixed:
                names.append(f"{c.label}.K_sqrt_1_minus_e2" if c.steep else f"{c.label}.K")
                slots.append(("companion", ci, "K"))
        for ii, inst in enumerate(self.instruments):
            if not inst.jitter.is_fixed:
                names.append(f"jitter.{inst.name}")
                slots.append(("instrument", ii, "jitter"))
        for group, owned in self._groups():
            for ni, par in enumerate(owned):
                if not par.prior.is_fixed:
                    names.append(f"{group}.{par.name}")
                    slots.append((group, ni, par.name))
        self.names = names
        self._slots = slots
        self._index = {(kind, i, f): j for j, (kind, i, f) in enumerate(slots)}

    def _build_gathers(self) -> None:
        """Gather tables from the sampled vector to the kernels' matrices, and the
        caches the priors fill on first use."""
        slots = self._slots
        # gather tables for orbit_arrays: fill values of fixed fields, and for each
        # field the theta columns and the companion columns they go to
        nc = len(self.companions)
        fill = {f: np.full(nc, np.nan) for f in ("ln_period", "tc_rel", "h", "k", "K")}
        for ci, c in enumerate(self.companions):
            if c.period.is_fixed:
                fill["ln_period"][ci] = math.log(c.period.value)
            if c.tc.is_fixed:
                fill["tc_rel"][ci] = c.tc.value - self.data.epoch
            fill["h"][ci] = fill["k"][ci] = 0.0
            if c.K.is_fixed:
                fill["K"][ci] = c.K.value
        self._fill = fill
        slot_of = {"tc_rel": "tc"}  # the tc slot holds tc minus the epoch
        self._gather = {}
        for f in fill:
            g = slot_of.get(f, f)
            mine = [
                (j, i) for j, (kind, i, h) in enumerate(slots) if kind == "companion" and h == g
            ]
            self._gather[f] = (np.array([j for j, _ in mine], dtype=np.intp),
                               np.array([i for _, i in mine], dtype=np.intp))  # fmt: skip
        self._circular = np.array([c.circular for c in self.companions], dtype=bool)
        self._steep = np.array([c.steep for c in self.companions], dtype=bool)
        # a fixed K of a steep companion stays K: only a sampled K is scaled
        self._steep_K = np.array(
            [c.steep and not c.K.is_fixed for c in self.companions], dtype=bool
        )
        self._jit_fill = np.array(
            [i.jitter.value if i.jitter.is_fixed else np.nan for i in self.instruments]
        )
        self._plan = None  # the prior plan, built on first use by log_prior
        self._compiled = None  # compiled_plan's tables (() when it does not apply)
        self._jit_gather = self._owned("instrument")
        self._noise_fill = np.array(
            [p.prior.value if p.prior.is_fixed else np.nan for p in self.noise_parameters]
        )
        self._noise_gather = self._owned("noise")
        self._noise_domain = (
            np.array([p.domain[0] for p in self.noise_parameters], dtype=float),
            np.array([p.domain[1] for p in self.noise_parameters], dtype=float),
        )
        dyn = self.dynamics_parameters
        self._dyn_fill = np.array([p.prior.value if p.prior.is_fixed else np.nan for p in dyn])
        self._dyn_gather = self._owned("dynamics")
        self._dyn_domain = (np.array([p.domain[0] for p in dyn], dtype=float),
                            np.array([p.domain[1] for p in dyn], dtype=float))  # fmt: skip

    def _groups(self) -> tuple[tuple[str, list], ...]:
        """The owned parameter lists by column prefix: the noise model's and the
        dynamics'."""
        return (("noise", self.noise_parameters), ("dynamics", self.dynamics_parameters))

    def _owned_parameter(self, kind: str, i: int):
        return (self.noise_parameters if kind == "noise" else self.dynamics_parameters)[i]

    def _owned(self, kind: str) -> tuple[np.ndarray, np.ndarray]:
        """(theta columns, owner indices) of the slots of one kind."""
        slots = self._slots
        return (
            np.array([j for j, (k, _, _) in enumerate(slots) if k == kind], dtype=np.intp),
            np.array([i for k, i, _ in slots if k == kind], dtype=np.intp),
        )

    @property
    def noise_model(self):
        """The noise model object (:func:`rvkep.noise.get_noise_model`)."""
        from rvkep.noise import get_noise_model

        return get_noise_model(self.noise)

    @property
    def ndim(self) -> int:
        return len(self.names)

    @property
    def n_linear(self) -> int:
        """Number of analytically handled parameters (offsets and trend terms)."""
        return self.design.shape[1]

    @property
    def linear_names(self) -> list[str]:
        out = [f"offset.{i.name}" for i in self.instruments]
        out += ["trend.slope", "trend.curvature"][: self.trend]
        return out + [f"decorr.{name}.{inst}" for name, inst, _ in self._decorr]

    def linear_part(self, values: dict) -> np.ndarray:
        """Each data point's offset, trend and decorrelation terms (m/s, the data's
        scale) from named linear values (``offset.<instrument>`` ... as
        :attr:`linear_names`; missing trend or decorrelation terms count as zero)."""
        beta = np.array([float(values.get(n, 0.0)) for n in self.linear_names])
        return self.design @ beta

    def labels(self) -> list[str]:
        return [c.label for c in self.companions]


    def canonical(self) -> dict:
        """A canonical description of everything that shapes the posterior: every
        companion's priors (fixed values included), every instrument's jitter prior,
        the trend degree, the noise model and a digest of the data. Equal dumps mean
        the same posterior; checkpoints are keyed on it (:func:`rvkep.model_dump.canonical`)."""
        return model_dump.canonical(self)

    def to_dict(self) -> dict:
        """Everything but the data and the star, as plain JSON-able values (priors,
        start values, trend, noise model, decorrelation): :meth:`from_dict` rebuilds
        the same model on the same data."""
        return model_dump.to_dict(self)

    @classmethod
    def from_dict(cls, d: dict, data: RVData, star: StarProperties | None = None) -> SystemModel:
        """The model :meth:`to_dict` described, bound to ``data``."""
        return model_dump.from_dict(cls, d, data, star)

    # -- coordinates <-> physical ---------------------------------------------

    def _matrix(self, theta, field):
        cols, comps = self._gather[field]
        out = np.empty((theta.shape[0], len(self.companions)))
        out[:] = self._fill[field]
        out[:, comps] = theta[:, cols]
        return out

    def orbit_arrays(self, theta: np.ndarray) -> dict[str, np.ndarray]:
        """Physical parameters as matrices for the kernels: ``period``, ``tc_rel``,
        ``tp_rel`` (both minus the epoch, the time origin of ``model.t``: the
        kernels' times), ``ecc``, ``omega``, ``K`` of shape (n_sets, n_companions),
        ``jitter``
        of shape (n_sets, n_instruments) and ``noise`` (the noise model's own
        parameters) of shape (n_sets, n_noise_parameters), in the order of the model's
        lists."""
        theta = np.atleast_2d(np.asarray(theta, float))
        h = self._matrix(theta, "h")
        k = self._matrix(theta, "k")
        e = h * h + k * k
        K = self._matrix(theta, "K")
        if self._steep.any():  # e = 1 - exp(-(a^2 + b^2)); K from the sampled K sqrt(1 - e^2)
            s = self._steep
            e[:, s] = -np.expm1(-e[:, s])
            with np.errstate(invalid="ignore", divide="ignore"):
                K[:, self._steep_K] /= np.sqrt(1.0 - e[:, self._steep_K] ** 2)
        omega = np.mod(np.arctan2(k, h), 2 * np.pi)
        omega[:, self._circular] = 0.5 * np.pi
        P = np.exp(self._matrix(theta, "ln_period"))
        tc = self._matrix(theta, "tc_rel")
        tp = tc - P * conjunction_mean_anomaly(np.minimum(e, _E_CAP), omega) / (2 * np.pi)
        jit = np.empty((theta.shape[0], len(self.instruments)))
        jit[:] = self._jit_fill
        jit[:, self._jit_gather[1]] = theta[:, self._jit_gather[0]]
        noise = np.empty((theta.shape[0], len(self.noise_parameters)))
        noise[:] = self._noise_fill
        noise[:, self._noise_gather[1]] = theta[:, self._noise_gather[0]]
        dyn = np.empty((theta.shape[0], len(self.dynamics_parameters)))
        dyn[:] = self._dyn_fill
        dyn[:, self._dyn_gather[1]] = theta[:, self._dyn_gather[0]]
        return {"period": P, "tc_rel": tc, "tp_rel": tp, "ecc": e, "omega": omega,
                "K": K, "jitter": jit, "noise": noise, "dynamics": dyn}  # fmt: skip

    def to_physical(self, theta: np.ndarray) -> dict[str, np.ndarray]:
        """Physical parameters of each row of ``theta`` (shape (n_sets, ndim)).

        Keys: ``<label>.period``, ``.tc``, ``.tp`` (in the data's time system, like
        every time outside the kernels), ``.ecc``, ``.omega`` (radians, [0, 2 pi)),
        ``.K``, ``jitter.<instrument>`` and ``noise.<name>``: the columns of
        :meth:`elements` plus the noise parameters. Rows with e >= 1 give e >= 1 here;
        :meth:`log_prior` marks them invalid.
        """
        return self.as_dict(self.orbit_arrays(theta))

    def elements(self, theta_or_arrays) -> dict[str, Elements]:
        """Each companion's elements (:class:`Elements`, times in the data's time
        system) for every row of ``theta`` (or of :meth:`orbit_arrays` already
        computed), by label."""
        arr = theta_or_arrays
        if not isinstance(arr, dict):
            arr = self.orbit_arrays(arr)
        epoch = self.data.epoch
        return {
            c.label: Elements(
                c.label,
                arr["period"][:, ci],
                arr["tc_rel"][:, ci] + epoch,
                arr["tp_rel"][:, ci] + epoch,
                arr["ecc"][:, ci],
                arr["omega"][:, ci],
                arr["K"][:, ci],
            )  # fmt: skip
            for ci, c in enumerate(self.companions)
        }

    def as_dict(self, arr: dict[str, np.ndarray]) -> dict[str, np.ndarray]:
        """The matrices of :meth:`orbit_arrays` as named columns (see to_physical)."""
        out: dict[str, np.ndarray] = {}
        for el in self.elements(arr).values():
            out.update(el.columns())
        for ii, inst in enumerate(self.instruments):
            out[f"jitter.{inst.name}"] = arr["jitter"][:, ii]
        for group, owned in self._groups():
            for ni, par in enumerate(owned):
                out[f"{group}.{par.name}"] = arr[group][:, ni]
        return out

    def from_physical(self, values: dict[str, float | np.ndarray]) -> np.ndarray:
        """Sampled coordinates from physical values (keys as :meth:`to_physical`;
        ``tc`` in the data's time system, ``omega`` in radians). Returns shape
        (n_sets, ndim)."""
        n = max(np.size(v) for v in values.values()) if values else 1
        theta = np.empty((n, self.ndim))
        for j, (kind, i, f) in enumerate(self._slots):
            if kind == "instrument":
                theta[:, j] = values[f"jitter.{self.instruments[i].name}"]
                continue
            if kind in ("noise", "dynamics"):
                theta[:, j] = values[f"{kind}.{f}"]
                continue
            c = self.companions[i]
            L = c.label
            e = np.asarray(values.get(f"{L}.ecc", 0.0), float)
            w = np.asarray(values.get(f"{L}.omega", 0.0), float)
            if f == "ln_period":
                theta[:, j] = np.log(values[f"{L}.period"])
            elif f == "tc":
                theta[:, j] = np.asarray(values[f"{L}.tc"], float) - self.data.epoch
            elif f in ("h", "k"):
                radius = _stretch(e) if c.steep else np.sqrt(e)
                theta[:, j] = radius * (np.cos(w) if f == "h" else np.sin(w))
            else:
                K = np.asarray(values[f"{L}.K"], float)
                theta[:, j] = K * np.sqrt(1.0 - e * e) if c.steep else K
        return theta


    def start_physical(self) -> dict[str, float]:
        """Physical start values from each companion's ``start`` and the jitter starts."""
        out: dict[str, float] = {}
        for c in self.companions:
            # a fixed value is its own start
            fixed = {
                k: getattr(c, k).value for k in ("period", "tc", "K") if getattr(c, k).is_fixed
            }
            s = {**c.start, **fixed}
            missing = [k for k in ("period", "tc", "K") if k not in s]
            if missing:
                raise ValueError(f"companion {c.label}: no start value for {', '.join(missing)}")
            out[f"{c.label}.period"] = float(s["period"])
            out[f"{c.label}.tc"] = float(s["tc"])
            out[f"{c.label}.K"] = float(s["K"])
            out[f"{c.label}.ecc"] = 0.0 if c.circular else float(s.get("ecc", 0.0))
            out[f"{c.label}.omega"] = float(s.get("omega", 0.5 * np.pi))
        for inst in self.instruments:
            value = inst.jitter.value if inst.jitter.is_fixed else inst.start_jitter
            out[f"jitter.{inst.name}"] = float(value)
        for group, owned in self._groups():
            for par in owned:
                value = par.prior.value if par.prior.is_fixed else par.start
                out[f"{group}.{par.name}"] = float(value)
        return out

    def start_theta(self) -> np.ndarray:
        """The start vector (ndim,)."""
        return self.from_physical(self.start_physical())[0]

    # -- priors (rvkep.prior_layout) -------------------------------------------

    def prior_transform(self, u: np.ndarray) -> np.ndarray:
        """Sampled coordinates from points of the unit cube, through each prior's
        inverse CDF: the map nested samplers draw the prior with
        (:func:`rvkep.prior_layout.prior_transform`)."""
        return prior_layout.prior_transform(self, u)

    def log_prior(self, theta: np.ndarray, arrays: dict | None = None) -> np.ndarray:
        """Log prior density in the sampled coordinates, (n_sets,); -inf when invalid
        (:func:`rvkep.prior_layout.log_prior`: Jacobians included)."""
        return prior_layout.log_prior(self, theta, arrays)

    def compiled_plan(self) -> tuple | None:
        """The compiled log posterior's coordinate and prior tables, or None when the
        model needs the general path (:func:`rvkep.prior_layout.compiled_plan`)."""
        return prior_layout.compiled_plan(self)

    def coordinate_bounds(self) -> list[tuple[float | None, float | None]]:
        """(low, high) of each sampled coordinate, None where open
        (:func:`rvkep.prior_layout.coordinate_bounds`)."""
        return prior_layout.coordinate_bounds(self)

    def coordinate_log_jacobian(self, ecc: np.ndarray) -> np.ndarray:
        """What the steep companions' coordinates add to the log prior, (n_sets,)
        (:func:`rvkep.prior_layout.coordinate_log_jacobian`)."""
        return prior_layout.coordinate_log_jacobian(self, ecc)

    # -- building -------------------------------------------------------------

    def with_companions(self, companions: list[Companion]) -> SystemModel:
        """The same data, instruments, trend and star with other companions."""
        return replace(self, companions=list(companions))

    def describe_priors(self) -> list[tuple[str, str]]:
        """(parameter, prior statement) for every sampled and fixed parameter."""
        rows = []
        for c in self.companions:
            rows += [
                (f"{c.label}.period [d]", c.period.describe()),
                (f"{c.label}.tc [time]", c.tc.describe()),
                (f"{c.label}.ecc", c.ecc.describe() if not c.circular else "fixed at 0 (circular)"),
                (f"{c.label}.omega", "uniform(0, 2 pi)" if not c.circular else "undefined"),
                (f"{c.label}.K [m/s]", c.K.describe()),
            ]
        rows += [(f"jitter.{i.name} [m/s]", i.jitter.describe()) for i in self.instruments]
        rows += [
            (f"noise.{p.name}" + (f" [{p.unit}]" if p.unit else ""), p.prior.describe())
            for p in self.noise_parameters
        ]
        rows += [(f"dynamics.{p.name}", p.prior.describe()) for p in self.dynamics_parameters]
        rows += [(n, "flat (marginalized analytically)") for n in self.linear_names]
        return rows


_E_CAP = 1.0 - 1e-12  # e >= 1 rows are refused by the prior; keep their tp finite
