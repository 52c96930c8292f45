"""The model file: a TOML description of the star, instruments, companions and options.

It is data, read with :mod:`tomllib`, never executed. Every key is optional except
``star.mass`` (for physical results) and, per companion, a start period. Example::

    [star]
    name = "Veyla"
    mass = 0.92            # solar masses
    mass_err = 0.04
    radius = 0.88          # solar radii (optional: transit probability)
    teff = 5400            # K (optional: equilibrium temperature, insolation)

    [data]
    files = ["kestrel.txt", "osprey.csv"]   # relative to this file
    kms = false
    decorrelate = ["fwhm"]   # optional: indicator columns to decorrelate against

    [trend]
    degree = 1             # 0 none, 1 linear, 2 quadratic

    [instruments.osprey]
    jitter = { prior = "uniform", min = 0, max = 20 }    # m/s

    [companions.b]
    period = { start = 11.87, prior = "loguniform", min = 5, max = 20 }   # days
    tc = { start = 2459807.5, prior = "normal", mean = 2459807.52, sd = 0.01 }
    K = { start = 18, prior = "uniform", min = 0, max = 100 }              # m/s
    ecc = { start = 0.1, prior = "beta", a = 0.867, b = 3.03 }
    omega_deg = 50         # start only; the prior on omega is uniform
    # circular = true      # e fixed at 0

    [noise]                # optional: correlated stellar activity (default white)
    kind = "gp"
    rotation_period = { start = 24, prior = "normal", mean = 24, sd = 3 }   # days

    [dynamics]             # optional: an N-body model (default keplerian)
    kind = "nbody"
    cos_inc = { start = 0.5, prior = "uniform", min = 0, max = 0.98 }

    [sampling]
    walkers = 32
    max_steps = 20000
    seed = 1

A parameter is a number (a start value with the default prior) or a table with
``start`` and a prior: ``prior`` is one of ``uniform`` / ``loguniform`` (``min``,
``max``), ``normal`` (``mean``, ``sd``), ``truncnormal`` (``mean``, ``sd``, optional
``min``, ``max``) or ``beta`` (``a``, ``b``); ``{ hold = 2.0 }`` holds a parameter at a
value (a plain number stays a start value). Times are in the
data's time system. ``[noise]`` names the noise model (``kind``: ``white``, ``gp`` or ``night``,
see :mod:`rvkep.noise`) and takes that model's own parameters with the same syntax.
``[dynamics]`` chooses ``kind = "keplerian"`` or ``"nbody"`` (:mod:`rvkep.nbody`) and,
for N-body, the prior of ``cos_inc``, the cosine of the shared inclination.
Errors name the file, the key and the problem.
"""

from __future__ import annotations

import math
import sys
from dataclasses import dataclass, field
from pathlib import Path

from rvkep import defaults
from rvkep.data import RVData
from rvkep.errors import ModelFileError
from rvkep.model import Companion, Instrument, SystemModel, default_instrument
from rvkep.names import name_problem
from rvkep.physics import StarProperties
from rvkep.priors import Fixed, Prior, prior_from_dict

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover
    import tomli as tomllib

__all__ = ["ModelSpec", "CompanionSpec", "read_model_file", "parse_model"]

_TOP = {"star", "data", "trend", "instruments", "companions", "noise", "dynamics", "sampling"}
_STAR = {"name", "mass", "mass_err", "radius", "radius_err", "teff", "teff_err", "rotation",
         "rotation_err"}
_DATA = {"files", "kms", "decorrelate"}
_TREND = {"degree"}
_INSTRUMENT = {"jitter"}
_COMPANION = {"period", "tc", "K", "ecc", "omega_deg", "circular"}
_SAMPLING = {"walkers", "max_steps", "seed"}
# walkers: emcee's moves need at least a few; the cap keeps memory bounded (chain memory
# is walkers x steps x parameters x 8 bytes) and the checkpoint's commit record (628 +
# walkers numbers in one HDF5 attribute, at most 64 KiB: 7,564 walkers) writable
_SAMPLING_RANGE = {"walkers": (8, 5_000), "max_steps": (100, 10_000_000), "seed": (0, 2**32 - 1)}


@dataclass
class CompanionSpec:
    """A companion as written in the file: priors (None: default) and start values."""

    label: str
    period: Prior | None = None
    tc: Prior | None = None
    K: Prior | None = None
    ecc: Prior | None = None
    start: dict = field(default_factory=dict)

    def build(self, data: RVData, period_range: tuple[float, float] | None = None) -> Companion:
        """The :class:`Companion`, default priors (:mod:`rvkep.defaults`, the same the
        search uses) filled in; tc's default needs a start tc, so call after the start
        search when tc has no start."""
        P = self.start["period"]
        period = self.period or defaults.period_prior(data, P, period_range)
        tc = self.tc or defaults.tc_prior(self.start["tc"], P)
        K = self.K or defaults.K_prior(data, self.start.get("K", 1.0))
        ecc = self.ecc or defaults.ecc_prior()
        return Companion(self.label, period, tc, K, ecc, dict(self.start))


@dataclass
class ModelSpec:
    """Everything a model file says; :meth:`build` binds it to data."""

    path: str = "<model>"
    star: StarProperties | None = None
    star_name: str = ""
    files: list[str] = field(default_factory=list)
    kms: bool = False
    trend: int | None = None  # None: not given (analyze then chooses it)
    jitter: dict[str, Prior] = field(default_factory=dict)
    companions: list[CompanionSpec] = field(default_factory=list)
    sampling: dict = field(default_factory=dict)
    noise: str | None = None  # None: not given (white unless the command line says)
    star_rotation: tuple | None = None  # (period, error or None) from [star] rotation
    decorrelate: tuple[str, ...] = ()  # indicator columns (the command line's add to them)
    noise_parameters: dict[str, tuple] = field(default_factory=dict)  # name: (prior, start)
    dynamics: str | None = None  # None: not given (keplerian unless the command line says)
    dynamics_parameters: dict[str, tuple] = field(default_factory=dict)  # name: (prior, start)

    def instruments_for(self, data: RVData) -> list[Instrument]:
        unknown = sorted(set(self.jitter) - set(data.instruments))
        if unknown:
            raise ModelFileError(
                f"{self.path}: instruments.{unknown[0]}: no such instrument in the data "
                f"(the data have {', '.join(data.instruments)})"
            )
        return [default_instrument(data, name, self.jitter.get(name)) for name in data.instruments]

    def noise_parameters_for(self, data: RVData, kind: str) -> list:
        """The noise model's parameters for ``data`` with this file's priors and starts
        in place of the defaults."""
        from dataclasses import replace

        from rvkep.noise import get_noise_model

        if self.noise_parameters and kind != (self.noise or "white"):
            raise ModelFileError(f"{self.path}: noise: sets parameters of the {self.noise} "
                                 f"noise model, but the {kind} model was asked for")  # fmt: skip
        out = []
        for par in get_noise_model(kind).parameters(data):
            prior, start = self.noise_parameters.get(par.name, (None, None))
            if prior is None and start is not None:
                prior = par.prior
            if prior is not None:
                lo, hi = prior.bounds
                d_lo, d_hi = par.domain
                # all but a negligible part (1e-9 each side) of the prior must make sense
                if not prior.is_fixed:
                    lo, hi = float(prior.ppf(1e-9)), float(prior.ppf(1.0 - 1e-9))
                if lo < d_lo or hi > d_hi:
                    raise ModelFileError(
                        f"{self.path}: noise.{par.name}: the prior {prior.describe()} reaches "
                        f"outside [{d_lo:g}, {d_hi:g}]"
                    )
                start = start if start is not None else par.start
                if prior.is_fixed:
                    start = prior.value
                elif not lo <= start <= hi:
                    start = float(prior.ppf(0.5))
                par = replace(par, prior=prior, start=float(start))
            out.append(par)
        return out

    def dynamics_parameters_for(self, kind: str) -> list:
        """The dynamics' own parameters (:func:`rvkep.model.dynamics_parameters`) with
        this file's priors and starts."""
        from dataclasses import replace

        from rvkep.model import dynamics_parameters

        out = []
        for par in dynamics_parameters(kind):
            prior, start = self.dynamics_parameters.get(par.name, (None, None))
            par = replace(par, prior=prior or par.prior)
            if start is not None:
                par = replace(par, start=float(start))
            elif prior is not None and not prior.is_fixed:
                lo, hi = prior.bounds
                if not lo <= par.start <= hi:
                    par = replace(par, start=0.5 * (lo + hi))
            out.append(par)
        return out

    def base_model(self, data: RVData, noise: str | None = None) -> SystemModel:
        """The model without companions (instruments, trend, star, noise model;
        ``noise`` overrides the file's kind)."""
        from rvkep.noise import default_noise_model

        trend = self.trend if self.trend is not None else 0
        kind = noise or self.noise or default_noise_model(data)
        return SystemModel(data, [], self.instruments_for(data), trend, self.star, noise=kind,
                           noise_parameters=self.noise_parameters_for(data, kind))  # fmt: skip


def _where(path, *keys):
    return f"{path}: {'.'.join(keys)}"


def _number(value, where, positive=False):
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
        raise ModelFileError(f"{where}: must be a number, got {value!r}")
    if positive and value <= 0:
        raise ModelFileError(f"{where}: must be positive, got {value!r}")
    return float(value)


def _check_keys(table, allowed, where):
    if not isinstance(table, dict):
        raise ModelFileError(f"{where}: must be a table")
    for key in table:
        if key not in allowed:
            raise ModelFileError(
                f"{where}: unknown key {key!r} (allowed: {', '.join(sorted(allowed))})"
            )


def _parameter(value, where) -> tuple[Prior | None, float | None]:
    """A parameter entry: a number (start) or a table (start and prior)."""
    if isinstance(value, dict):
        spec = dict(value)
        start = spec.pop("start", None)
        if start is not None:
            start = _number(start, f"{where}.start")
        prior = None
        if spec.get("prior") == "fixed":
            raise ModelFileError(f"{where}: a held value is written {{ hold = "
                                 f"{spec.get('value', 'X')} }}")  # fmt: skip
        if spec:
            if "prior" not in spec and "hold" not in spec:
                raise ModelFileError(f"{where}: keys {', '.join(spec)} need a 'prior' name")
            try:
                prior = prior_from_dict(spec, where)
            except ValueError as exc:
                raise ModelFileError(str(exc)) from None
            if start is not None and not prior.is_fixed:
                lo, hi = prior.bounds
                if not lo <= start <= hi:
                    raise ModelFileError(
                        f"{where}: start {start:g} is outside the prior {prior.describe()}"
                    )
            if prior.is_fixed:
                start = prior.value
        return prior, start
    return None, _number(value, where)


#: where each parameter has a physical meaning: (low, high, high included); a prior or
#: a start value outside is refused (it would be cut silently by the model's bounds)
_DOMAIN = {"ecc": (0.0, 1.0, False), "K": (0.0, math.inf, True),
           "jitter": (0.0, math.inf, True)}  # fmt: skip


def _check_domain(key: str, prior, start, where: str) -> None:
    """Refuse a start value or a prior reaching outside ``key``'s physical range (all
    but a negligible part, 1e-9 at each end, of the prior must lie inside)."""
    lo, hi, closed = _DOMAIN[key]
    shown = f"[{lo:g}, {hi:g}{']' if closed and math.isfinite(hi) else ')'}"
    if start is not None and not (lo <= start and (start <= hi if closed else start < hi)):
        raise ModelFileError(f"{where}: {start:g} is outside {key}'s range {shown}")
    if prior is None or prior.is_fixed:
        return
    a, b = float(prior.ppf(1e-9)), float(prior.ppf(1.0 - 1e-9))
    if a < lo or (b > hi if closed else b >= hi):
        raise ModelFileError(f"{where}: the prior {prior.describe()} reaches outside {key}'s "
                             f"range {shown}")  # fmt: skip


def parse_model(doc: dict, path: str = "<model>") -> ModelSpec:
    """Validate a parsed TOML document and turn it into a :class:`ModelSpec`.

    Parameters
    ----------
    doc : dict
        The TOML document as :mod:`tomllib` reads it.
    path : str
        The file's name, for the messages and as the base of relative data files.

    Returns
    -------
    ModelSpec
        The star, data, trend, instruments, companions, noise, dynamics and sampling.

    Raises
    ------
    ModelFileError
        Naming the file, the table and the key at fault.
    """
    _check_keys(doc, _TOP, path)
    spec = ModelSpec(path=path)
    _read_star(doc.get("star", {}), spec, path)
    _read_data(doc.get("data", {}), spec, path)
    _read_trend(doc.get("trend", {}), spec, path)
    _read_instruments(doc.get("instruments", {}), spec, path)
    _read_companions(doc.get("companions", {}), spec, path)
    _read_noise(doc.get("noise", {}), spec, path)
    _read_dynamics(doc.get("dynamics", {}), spec, path)
    _read_sampling(doc.get("sampling", {}), spec, path)
    return spec


def _read_star(star, spec: ModelSpec, path: str) -> None:
    """The ``[star]`` table: mass (required), radius, Teff, rotation, name."""
    _check_keys(star, _STAR, _where(path, "star"))
    if star:
        if "mass" not in star:
            raise ModelFileError(f"{_where(path, 'star')}: needs 'mass' (solar masses)")
        vals = {k: _number(v, _where(path, "star", k),
                           positive=k in ("mass", "radius", "teff", "rotation", "rotation_err"))
                for k, v in star.items() if k != "name"}  # fmt: skip
        if "rotation" in vals:
            spec.star_rotation = (vals["rotation"], vals.get("rotation_err"))
        for k, v in vals.items():
            if k.endswith("_err") and v < 0:
                raise ModelFileError(f"{_where(path, 'star', k)}: must not be negative, got {v:g}")
        spec.star = StarProperties(
            mass=vals["mass"], mass_err=vals.get("mass_err", 0.0),
            radius=vals.get("radius"), radius_err=vals.get("radius_err", 0.0),
            teff=vals.get("teff"), teff_err=vals.get("teff_err", 0.0),
        )  # fmt: skip
        spec.star_name = str(star.get("name", ""))


def _read_data(data, spec: ModelSpec, path: str) -> None:
    """The ``[data]`` table: files (relative to the model file), kms, decorrelate."""
    _check_keys(data, _DATA, _where(path, "data"))
    files = data.get("files", [])
    if not isinstance(files, list) or not all(isinstance(f, str) for f in files):
        raise ModelFileError(f"{_where(path, 'data', 'files')}: must be a list of file names")
    base = Path(path).parent
    spec.files = [str(base / f) for f in files]
    kms = data.get("kms", False)
    if not isinstance(kms, bool):
        raise ModelFileError(f"{_where(path, 'data', 'kms')}: must be true or false")
    spec.kms = kms
    decorr = data.get("decorrelate", [])
    if not isinstance(decorr, list) or not all(isinstance(c, str) and c for c in decorr):
        raise ModelFileError(f"{_where(path, 'data', 'decorrelate')}: must be a list of "
                             "column names")  # fmt: skip
    spec.decorrelate = tuple(decorr)


def _read_trend(trend, spec: ModelSpec, path: str) -> None:
    """The ``[trend]`` table: its degree."""
    _check_keys(trend, _TREND, _where(path, "trend"))
    if "degree" in trend:
        degree = trend["degree"]
        if degree not in (0, 1, 2) or isinstance(degree, bool):
            raise ModelFileError(
                f"{_where(path, 'trend', 'degree')}: must be 0, 1 or 2, got {degree!r}"
            )
        spec.trend = int(degree)


def _read_instruments(instruments, spec: ModelSpec, path: str) -> None:
    """The ``[instruments.NAME]`` tables: a jitter prior or value each."""
    _check_keys(
        instruments,
        set(instruments) if isinstance(instruments, dict) else set(),
        _where(path, "instruments"),
    )
    for name, table in instruments.items():
        where = _where(path, "instruments", name)
        _check_keys(table, _INSTRUMENT, where)
        if "jitter" in table:
            prior, start = _parameter(table["jitter"], f"{where}.jitter")
            _check_domain("jitter", prior, start, f"{where}.jitter")
            if prior is None:
                prior = Fixed(start) if start is not None else None
            if prior is not None:
                spec.jitter[name] = prior


def _read_companions(companions, spec: ModelSpec, path: str) -> None:
    """The ``[companions.LABEL]`` tables, each read and checked."""
    if not isinstance(companions, dict):
        raise ModelFileError(f"{_where(path, 'companions')}: must be a table of tables")
    for label, table in companions.items():
        where = _where(path, "companions", label)
        problem = name_problem(label, "companion name")  # it names the figure files
        if problem:
            raise ModelFileError(f"{_where(path, 'companions')}: {problem}")
        _check_keys(table, _COMPANION, where)
        c = _read_companion(label, table, where)
        _check_companion(c, where)
        spec.companions.append(c)


def _read_companion(label: str, table: dict, where: str) -> CompanionSpec:
    """One companion's priors and start values (circular = true fixes e at 0)."""
    c = CompanionSpec(label=label)
    for key in ("period", "tc", "K", "ecc"):
        if key in table:
            prior, start = _parameter(table[key], f"{where}.{key}")
            if key in _DOMAIN:
                _check_domain(key, prior, start, f"{where}.{key}")
            setattr(c, key, prior)
            if start is not None:
                c.start[key] = start
    if "omega_deg" in table:
        prior, start = _parameter(table["omega_deg"], f"{where}.omega_deg")
        if prior is not None:
            raise ModelFileError(
                f"{where}.omega_deg: takes a start value only (its prior is uniform)"
            )
        c.start["omega"] = math.radians(start)
    circular = table.get("circular", False)
    if not isinstance(circular, bool):
        raise ModelFileError(f"{where}.circular: must be true or false")
    if circular:
        c.ecc = Fixed(0.0)
        c.start["ecc"] = 0.0
    elif isinstance(c.ecc, Fixed) and c.ecc.value != 0.0:
        raise ModelFileError(f"{where}.ecc: can only be fixed at 0 (write circular = true)")
    return c


def _check_companion(c: CompanionSpec, where: str) -> None:
    """A companion's period, K and e within their ranges; a period start when its
    prior gives none (the geometric middle of its bounds)."""
    if "period" in c.start and not 1e-3 <= c.start["period"] <= 1e7:
        raise ModelFileError(
            f"{where}.period: must lie between 0.001 and 1e7 days, got {c.start['period']:g}"
        )
    if c.period is not None:
        # all but a negligible part (1e-9) of the prior must lie at positive periods
        lo = c.period.value if c.period.is_fixed else float(c.period.ppf(1e-9))
        if not lo > 0:
            raise ModelFileError(
                f"{where}.period: the prior {c.period.describe()} allows periods <= 0"
            )
    if c.K is not None and c.K.is_fixed and c.K.value < 0:
        raise ModelFileError(f"{where}.K: must not be negative, got {c.K.value:g}")
    if "period" not in c.start:
        if c.period is not None and not c.period.is_fixed:
            lo, hi = c.period.bounds
            c.start["period"] = math.sqrt(lo * hi) if lo > 0 and math.isfinite(hi) else None
        if c.start.get("period") is None:
            raise ModelFileError(f"{where}.period: needs a start value")
    if "ecc" in c.start and not 0 <= c.start["ecc"] < 1:
        raise ModelFileError(f"{where}.ecc: start must be in [0, 1), got {c.start['ecc']:g}")


def _read_sampling(sampling, spec: ModelSpec, path: str) -> None:
    """The ``[sampling]`` table: walkers, steps, seed within their ranges."""
    _check_keys(sampling, _SAMPLING, _where(path, "sampling"))
    for key, value in sampling.items():
        v = _number(value, _where(path, "sampling", key), positive=key != "seed")
        if key in ("walkers", "max_steps", "seed"):
            if v != int(v):
                raise ModelFileError(f"{_where(path, 'sampling', key)}: must be a whole number")
            v = int(v)
        lo, hi = _SAMPLING_RANGE[key]
        if not lo <= v <= hi:
            raise ModelFileError(
                f"{_where(path, 'sampling', key)}: must lie between {lo} and {hi:,}, got {v:,}"
            )
        spec.sampling[key] = v


def _kind_of(table, section: str, kinds, default: str, path: str) -> str | None:
    """The ``kind`` a table of one of the registries names (``default`` when it names
    none), None for an empty table; a table that is not one, or an unknown kind, is a
    :class:`ModelFileError` naming the key."""
    if not isinstance(table, dict):
        raise ModelFileError(f"{_where(path, section)}: must be a table")
    if not table:
        return None
    kind = table.get("kind", default)
    if not isinstance(kind, str) or kind not in kinds:
        raise ModelFileError(f"{_where(path, section, 'kind')}: must be one of "
                             f"{', '.join(kinds)}, got {kind!r}")  # fmt: skip
    return kind


def _read_noise(table, spec: ModelSpec, path: str) -> None:
    """The ``[noise]`` table: ``kind`` and the noise model's own parameters."""
    from rvkep.noise import NOISE_MODELS, get_noise_model

    kind = _kind_of(table, "noise", NOISE_MODELS, "white", path)
    if kind is None:
        return
    names = list(get_noise_model(kind).parameter_keys)
    _check_keys(table, {"kind", *names}, _where(path, "noise"))
    spec.noise = kind
    for name in names:
        if name in table:
            # a bare number is a start value with the default prior
            spec.noise_parameters[name] = _parameter(table[name], _where(path, "noise", name))


def _read_dynamics(table, spec: ModelSpec, path: str) -> None:
    """The ``[dynamics]`` table: ``kind`` and, for N-body, ``cos_inc``."""
    from rvkep.model import DYNAMICS, dynamics_parameters

    kind = _kind_of(table, "dynamics", DYNAMICS, "keplerian", path)
    if kind is None:
        return
    own = {p.name: p for p in dynamics_parameters(kind)}  # none per companion here
    _check_keys(table, {"kind", *own}, _where(path, "dynamics"))
    spec.dynamics = kind
    for name, par in own.items():
        if name in table:
            where = _where(path, "dynamics", name)
            prior, start = _parameter(table[name], where)
            lo, hi = par.domain
            if prior is not None:
                plo, phi = prior.bounds
                if plo < lo or phi > hi:
                    raise ModelFileError(f"{where}: the prior {prior.describe()} reaches "
                                         f"outside [{lo:g}, {hi:g}]")  # fmt: skip
            if start is not None and not lo <= start <= hi:
                raise ModelFileError(f"{where}: start must be in [{lo:g}, {hi:g}], got "
                                     f"{start:g}")  # fmt: skip
            spec.dynamics_parameters[name] = (prior, start)


def read_model_file(path: str | Path) -> ModelSpec:
    """Read and validate a model file. Raises ModelFileError naming the key.

    Parameters
    ----------
    path : str or Path
        The model file (TOML).

    Returns
    -------
    ModelSpec
        Companions, instruments, star, trend, noise and sampling settings as given.
    """
    from rvkep.inputs import read_text

    path = Path(path)
    text = read_text(path, ModelFileError, "a model file")
    try:
        doc = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise ModelFileError(f"{path}: not valid TOML ({exc})") from None
    return parse_model(doc, str(path))
