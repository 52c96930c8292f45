"""Prior distributions with one small interface.

Every prior has

* ``logpdf(x)``: log density, vectorized, ``-inf`` outside the support (never raises
  or warns, since it runs in the sampler's hot path);
* ``sample(n, rng)``: n independent draws;
* ``ppf(u)``: the inverse cumulative distribution, mapping the unit interval onto the
  support (the unit-cube transform nested samplers need);
* ``bounds``: (low, high) of the support;
* ``describe()``: a short readable statement, and ``to_dict()`` for the model file.

Uniform, log-uniform and normal priors also have ``packed``: their kind
(:class:`PriorCode`) and three numbers (a, b, c). A model's priors over its whole
parameter vector form one :class:`PriorTable` of such rows, which the numpy log prior
(:meth:`PriorTable.logpdf`) and the compiled log posterior
(:mod:`rvkep._kepler_numba`) read alike. Each of these densities is written once, in
:data:`PACKED_DENSITY`; the priors' own ``logpdf`` use the same functions.

:class:`Fixed` is the degenerate case: the parameter leaves the sampled vector.

References
----------
.. [1] Kipping, D. M. (2013), "Parametrizing the exoplanet eccentricity distribution
   with the beta distribution", MNRAS 434, L51. Beta(0.867, 3.03) for RV planets.
"""

from __future__ import annotations

import enum
import math
from dataclasses import dataclass, field

import numpy as np
from scipy import special

from rvkep import _constants

__all__ = [
    "Prior",
    "Uniform",
    "LogUniform",
    "Normal",
    "TruncatedNormal",
    "Beta",
    "Fixed",
    "KIPPING_ECC",
    "prior_from_dict",
    "PRIOR_KINDS",
    "PriorCode",
    "PriorTable",
    "PACKED_DENSITY",
]

_LOG_SQRT_2PI = 0.5 * math.log(2.0 * math.pi)


class PriorCode(enum.IntEnum):
    """The kind of a row of the packed prior table (values from :mod:`rvkep._constants`,
    which the compiled kernels read)."""

    GENERAL = _constants.PRIOR_GENERAL
    UNIFORM = _constants.PRIOR_UNIFORM
    LOGUNIFORM = _constants.PRIOR_LOGUNIFORM
    NORMAL = _constants.PRIOR_NORMAL


def _uniform_density(x, a, b, c):
    return np.broadcast_to(c, np.shape(x)), (x >= a) & (x <= b)


def _loguniform_density(x, a, b, c):
    return c - np.log(np.where(x > 0, x, 1.0)), (x >= a) & (x <= b)


def _normal_density(x, a, b, c):
    z = (x - a) / b
    out = c - 0.5 * z * z
    return out, ~np.isnan(out)  # NaN is never a valid value


#: the packed kinds' log densities: ``f(x, a, b, c) -> (log density, inside)``,
#: broadcasting x (..., m) against rows a, b, c (m,); the compiled kernel
#: ``_posterior_numba._row_elements`` is their loop twin
PACKED_DENSITY = {
    PriorCode.UNIFORM: _uniform_density,
    PriorCode.LOGUNIFORM: _loguniform_density,
    PriorCode.NORMAL: _normal_density,
}


def _packed_logpdf(prior, x):
    code, a, b, c = prior.packed
    x = np.asarray(x, float)
    with np.errstate(invalid="ignore", divide="ignore"):
        value, inside = PACKED_DENSITY[code](x, a, b, c)
    return np.where(inside, value, -np.inf)


class Prior:
    """Base class; subclasses implement the methods below."""

    kind = "prior"

    @property
    def bounds(self) -> tuple[float, float]:
        raise NotImplementedError

    def logpdf(self, x):
        raise NotImplementedError

    def ppf(self, u):
        raise NotImplementedError

    def sample(self, n: int, rng: np.random.Generator | int | None = None) -> np.ndarray:
        rng = np.random.default_rng(rng)
        return self.ppf(rng.uniform(size=n))

    def describe(self) -> str:
        raise NotImplementedError

    def to_dict(self) -> dict:
        raise NotImplementedError

    @property
    def is_fixed(self) -> bool:
        return False

    #: (kind, a, b, c) for the packed table; None: evaluated by ``logpdf`` itself
    packed: tuple | None = None

    def __repr__(self) -> str:
        return self.describe()


def _inside(x, lo, hi):
    x = np.asarray(x, float)
    return x, (x >= lo) & (x <= hi)


@dataclass(frozen=True, repr=False)
class Uniform(Prior):
    """Uniform on [low, high]."""

    low: float
    high: float
    kind = "uniform"

    def __post_init__(self):
        if not self.high > self.low:
            raise ValueError(f"uniform prior needs min < max, got [{self.low}, {self.high}]")

    @property
    def bounds(self):
        return (self.low, self.high)

    @property
    def packed(self) -> tuple[PriorCode, float, float, float]:
        return PriorCode.UNIFORM, self.low, self.high, -math.log(self.high - self.low)

    def logpdf(self, x):
        return _packed_logpdf(self, x)

    def ppf(self, u):
        return self.low + np.asarray(u, float) * (self.high - self.low)

    def describe(self):
        return f"uniform({self.low:.10g}, {self.high:.10g})"

    def to_dict(self):
        return {"prior": "uniform", "min": self.low, "max": self.high}


@dataclass(frozen=True, repr=False)
class LogUniform(Prior):
    """Density proportional to 1/x on [low, high], 0 < low < high."""

    low: float
    high: float
    kind = "loguniform"

    def __post_init__(self):
        if not (self.low > 0 and self.high > self.low):
            raise ValueError(
                f"log-uniform prior needs 0 < min < max, got [{self.low}, {self.high}]"
            )

    @property
    def bounds(self):
        return (self.low, self.high)

    @property
    def packed(self) -> tuple[PriorCode, float, float, float]:
        c = -math.log(math.log(self.high / self.low))
        return PriorCode.LOGUNIFORM, self.low, self.high, c

    def logpdf(self, x):
        return _packed_logpdf(self, x)

    def ppf(self, u):
        return self.low * (self.high / self.low) ** np.asarray(u, float)

    def describe(self):
        return f"log-uniform({self.low:.10g}, {self.high:.10g})"

    def to_dict(self):
        return {"prior": "loguniform", "min": self.low, "max": self.high}


@dataclass(frozen=True, repr=False)
class Normal(Prior):
    """Normal (Gaussian) with mean and standard deviation."""

    mean: float
    sd: float
    kind = "normal"

    def __post_init__(self):
        if not self.sd > 0:
            raise ValueError(f"normal prior needs sd > 0, got {self.sd}")

    @property
    def bounds(self):
        return (-np.inf, np.inf)

    @property
    def packed(self) -> tuple[PriorCode, float, float, float]:
        return PriorCode.NORMAL, self.mean, self.sd, -math.log(self.sd) - _LOG_SQRT_2PI

    def logpdf(self, x):
        return _packed_logpdf(self, x)

    def ppf(self, u):
        return self.mean + self.sd * special.ndtri(np.asarray(u, float))

    def describe(self):
        return f"normal({self.mean:.10g}, {self.sd:.10g})"

    def to_dict(self):
        return {"prior": "normal", "mean": self.mean, "sd": self.sd}


@dataclass(frozen=True, repr=False)
class TruncatedNormal(Prior):
    """Normal with mean and sd, restricted to [low, high] and renormalized."""

    mean: float
    sd: float
    low: float = -np.inf
    high: float = np.inf
    kind = "truncnormal"

    def __post_init__(self):
        if not self.sd > 0:
            raise ValueError(f"truncated normal prior needs sd > 0, got {self.sd}")
        if not self.high > self.low:
            raise ValueError(f"truncated normal needs min < max, got [{self.low}, {self.high}]")

    @property
    def _cdf_bounds(self):
        return (
            special.ndtr((self.low - self.mean) / self.sd),
            special.ndtr((self.high - self.mean) / self.sd),
        )

    @property
    def bounds(self):
        return (self.low, self.high)

    def logpdf(self, x):
        x, ok = _inside(x, self.low, self.high)
        c0, c1 = self._cdf_bounds
        z = (x - self.mean) / self.sd
        return np.where(
            ok, -0.5 * z * z - math.log(self.sd) - _LOG_SQRT_2PI - math.log(c1 - c0), -np.inf
        )

    def ppf(self, u):
        c0, c1 = self._cdf_bounds
        return self.mean + self.sd * special.ndtri(c0 + np.asarray(u, float) * (c1 - c0))

    def describe(self):
        base = f"normal({self.mean:.10g}, {self.sd:.10g})"
        return f"{base} truncated to [{self.low:.10g}, {self.high:.10g}]"

    def to_dict(self):
        return {
            "prior": "truncnormal",
            "mean": self.mean,
            "sd": self.sd,
            "min": self.low,
            "max": self.high,
        }


@dataclass(frozen=True, repr=False)
class Beta(Prior):
    """Beta(a, b) on [0, 1] (for eccentricity: Kipping 2013)."""

    a: float
    b: float
    kind = "beta"

    def __post_init__(self):
        if not (self.a > 0 and self.b > 0):
            raise ValueError(f"beta prior needs a, b > 0, got ({self.a}, {self.b})")

    @property
    def bounds(self):
        return (0.0, 1.0)

    def logpdf(self, x):
        x, ok = _inside(x, 0.0, 1.0)
        xs = np.clip(x, 1e-300, 1.0 - 1e-16)
        val = (
            (self.a - 1) * np.log(xs)
            + (self.b - 1) * np.log1p(-xs)
            - special.betaln(self.a, self.b)
        )
        return np.where(ok, val, -np.inf)

    def ppf(self, u):
        return special.betaincinv(self.a, self.b, np.asarray(u, float))

    def describe(self):
        return f"beta({self.a:.10g}, {self.b:.10g})"

    def to_dict(self):
        return {"prior": "beta", "a": self.a, "b": self.b}


@dataclass(frozen=True, repr=False)
class Fixed(Prior):
    """The parameter is held at ``value`` (not sampled)."""

    value: float
    kind = "fixed"

    @property
    def bounds(self):
        return (self.value, self.value)

    @property
    def is_fixed(self) -> bool:
        return True

    def logpdf(self, x):
        x = np.asarray(x, float)
        return np.where(x == self.value, 0.0, -np.inf)

    def ppf(self, u):
        return np.full(np.shape(u), self.value, dtype=float)

    def describe(self):
        return f"fixed at {self.value:.10g}"

    def to_dict(self):
        return {"hold": self.value}


#: Kipping (2013) beta prior on the eccentricity of RV planets.
KIPPING_ECC = Beta(0.867, 3.03)

#: Prior names in the model file and the keys each needs.
PRIOR_KINDS: dict[str, tuple[type[Prior], tuple[str, ...], dict[str, str]]] = {
    "uniform": (Uniform, ("min", "max"), {"min": "low", "max": "high"}),
    "loguniform": (LogUniform, ("min", "max"), {"min": "low", "max": "high"}),
    "normal": (Normal, ("mean", "sd"), {"mean": "mean", "sd": "sd"}),
    "truncnormal": (
        TruncatedNormal,
        ("mean", "sd"),
        {"mean": "mean", "sd": "sd", "min": "low", "max": "high"},
    ),
    "beta": (Beta, ("a", "b"), {"a": "a", "b": "b"}),
    "fixed": (Fixed, ("value",), {"value": "value"}),
}


def prior_from_dict(spec: dict, where: str = "prior") -> Prior:
    """Build a prior from a model-file table such as ``{prior = "normal", mean = 1, sd = 2}``.

    Raises ValueError naming ``where`` and the problem.

    Parameters
    ----------
    spec : dict
        The table (``prior`` names the kind; ``value`` alone fixes the parameter).
    where : str, optional
        The key named in errors.

    Returns
    -------
    Prior
        The prior.
    """
    if "hold" in spec and "prior" not in spec:  # a held (fixed) value: { hold = 2.0 }
        if set(spec) != {"hold"}:
            extra = sorted(set(spec) - {"hold"})[0]
            raise ValueError(f"{where}: unknown key {extra!r} beside 'hold'")
        value = spec["hold"]
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            raise ValueError(f"{where}: hold must be a number, got {value!r}")
        return Fixed(float(value))
    kind = spec.get("prior")
    if kind not in PRIOR_KINDS:
        names = ", ".join(k for k in PRIOR_KINDS if k != "fixed")  # held values: { hold = x }
        raise ValueError(f"{where}: unknown prior {kind!r} (choose from {names})")
    cls, required, mapping = PRIOR_KINDS[kind]
    unknown = sorted(set(spec) - set(mapping) - {"prior"})
    if unknown:
        raise ValueError(
            f"{where}: unknown key {unknown[0]!r} for a {kind} prior "
            f"(allowed: {', '.join(mapping)})"
        )
    missing = [k for k in required if k not in spec]
    if missing:
        raise ValueError(f"{where}: {kind} prior needs {', '.join(missing)}")
    kwargs = {}
    for key, attr in mapping.items():
        if key in spec:
            value = spec[key]
            if isinstance(value, bool) or not isinstance(value, (int, float)):
                raise ValueError(f"{where}: {key} must be a number, got {value!r}")
            if not math.isfinite(value):
                raise ValueError(f"{where}: {key} must be finite, got {value!r}")
            kwargs[attr] = float(value)
    try:
        return cls(**kwargs)
    except ValueError as exc:
        raise ValueError(f"{where}: {exc}") from None


@dataclass(frozen=True)
class PriorTable:
    """The priors of a parameter vector, packed: row j holds column j's kind
    (:class:`PriorCode`) and numbers (a, b, c); ``general`` the (column, prior) pairs
    without a packed form, evaluated by their own ``logpdf``. Columns without a prior
    (held values) are ``GENERAL`` rows outside ``general``: they add nothing.

    Build it with :meth:`pack`; :meth:`logpdf` is the numpy evaluation, and the
    compiled log posterior reads ``code``, ``a``, ``b``, ``c`` directly.
    """

    code: np.ndarray
    a: np.ndarray
    b: np.ndarray
    c: np.ndarray
    general: tuple = ()
    _groups: dict = field(default_factory=dict, repr=False, compare=False)

    @classmethod
    def pack(cls, entries, size: int) -> PriorTable:
        """The table of ``size`` columns from (column, prior) pairs."""
        code = np.full(size, int(PriorCode.GENERAL), dtype=np.int64)
        a, b, c = np.zeros(size), np.ones(size), np.zeros(size)
        general = []
        for col, prior in entries:
            if prior.packed is None:
                general.append((col, prior))
                continue
            code[col], a[col], b[col], c[col] = prior.packed
        table = cls(code, a, b, c, tuple(general))
        for kind in PACKED_DENSITY:
            cols = np.flatnonzero(code == int(kind))
            if cols.size:
                table._groups[kind] = (cols, a[cols], b[cols], c[cols])
        return table

    def logpdf(self, V: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """(log density, inside) of the rows of ``V`` (n_sets, size): the sum over
        the columns, and whether every packed value lies in its support."""
        n = V.shape[0]
        lp = np.zeros(n)
        inside = np.ones(n, dtype=bool)
        with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
            for kind, (cols, a, b, c) in self._groups.items():
                value, ok = PACKED_DENSITY[kind](V[:, cols], a, b, c)
                lp += value.sum(axis=1)
                inside &= ok.all(axis=1)
            for col, prior in self.general:
                lp += prior.logpdf(V[:, col])
        return lp, inside
