"""Every option of every subcommand, declared once.

Each :class:`Option` says its name (the Python keyword and the target-list column; the
flag is the name with dashes), its kind and range, its default, unit and help, which
subcommands take it, and whether a target list may set it per target. From this table
come

* the argparse options of every subcommand (:func:`add_arguments`),
* the keyword signature and the ``Parameters`` section of :func:`rvkep.analyze`
  (:func:`signature`, :func:`numpydoc`) and the fields of ``AnalyzeOptions``,
* the target-list columns of ``rvkep batch`` (:func:`columns`, :func:`from_cell`),
* validation (:func:`check`): every value finite, in range and whole where it must
  be, and the rules between options, all before any file is read or folder made,
* the "how this was run" line of the outputs (:func:`as_flags`).

Choices come from the registries (noise models, samplers) and from the constants
below (search kinds, trend degrees). The module imports nothing heavy: ``rvkep
--help`` stays fast.
"""

from __future__ import annotations

import inspect
from collections.abc import Callable, Iterable
from dataclasses import dataclass
from typing import Any

__all__ = [
    "Option", "OPTIONS", "options_of", "option", "columns", "signature", "numpydoc", "as_flags",
    "DEFAULT_MIN_PERIOD", "TREND_DEGREES", "SEARCH_KINDS", "FIGURE_SETS", "parse_trend",
    "MIN_STEPS", "MAX_STEPS", "MIN_BOOTSTRAP", "MAX_SEED", "ANALYSIS", "TARGET_REQUIRED",
]  # fmt: skip

#: shortest period searched by default (days)
DEFAULT_MIN_PERIOD = 1.2
#: the polynomial trend degrees rvkep fits; "auto" lets them compete by BIC
TREND_DEGREES = (0, 1, 2)
#: the search's periodograms (rvkep.period_search)
SEARCH_KINDS = ("auto", "sine", "keplerian")
#: which figures a run draws
FIGURE_SETS = ("all", "summary", "none")
#: the range of sampler step caps
MIN_STEPS, MAX_STEPS = 100, 10_000_000
#: the fewest redraws that calibrate a Keplerian periodogram's false-alarm probability
MIN_BOOTSTRAP = 10
#: seeds are whole numbers from 0 to MAX_SEED (numpy's legacy generators take 32 bits)
MAX_SEED = 2**32 - 1

#: the subcommands that run the whole job (and the target list, as "batch-row")
ANALYSIS = frozenset({"analyze", "demo", "sample"})
#: target-list columns every row must have
TARGET_REQUIRED = ("name", "data", "star_mass", "star_mass_err")


def parse_trend(value) -> int | str:
    """``"auto"`` or a trend degree (from text, as on the command line and in target
    lists, or a number); ValueError naming the value otherwise.

    Parameters
    ----------
    value : str or int
        ``"auto"``, or 0, 1 or 2.

    Returns
    -------
    int or str
        The degree, or ``"auto"``.
    """
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        if value in TREND_DEGREES:
            return int(value)
    elif isinstance(value, str):
        text = value.strip()
        if text == "auto":
            return "auto"
        if text in {str(d) for d in TREND_DEGREES}:
            return int(text)
    raise ValueError(f"must be auto, 0, 1 or 2, got {value!r}")


def _noise_models() -> tuple[str, ...]:
    from rvkep.noise import NOISE_MODELS

    return tuple(NOISE_MODELS)


def _samplers() -> tuple[str, ...]:
    from rvkep.samplers import SAMPLERS

    return tuple(SAMPLERS)


def number_text(value: float) -> str:
    """A number as a message shows it: whole numbers in full up to 10 digits, others
    with 6 significant digits (never a 300-digit line)."""
    if float(value).is_integer() and abs(value) < 1e10:
        return str(int(value))
    return f"{value:.6g}"


@dataclass(frozen=True)
class Option:
    """One option: how it is spelled, parsed, checked, shown and where it applies.

    ``kind`` is one of ``float``, ``int``, ``flag`` (true/false), ``choice`` (one of
    ``choices``, a tuple or a function giving one), ``trend`` (auto or a degree),
    ``columns`` (names separated by commas), ``range`` (``MIN:MAX``, two floats),
    ``text`` and ``path``. Numbers must be finite and lie in ``[low, high]`` (ends
    excluded where ``open_low`` / ``open_high``)."""

    name: str
    kind: str
    default: Any = None
    help: str = ""
    commands: frozenset = ANALYSIS
    column: bool = False  # settable per target in a target list
    metavar: str | None = None
    choices: tuple | Callable[[], tuple] | None = None
    low: float | None = None
    high: float | None = None
    open_low: bool = False
    open_high: bool = False
    unit: str = ""
    shown_default: str | None = None  # the default as the help says it (None: the value)
    model_key: str | None = None  # the model-file key that gives the default instead
    group: str | None = None  # options of one group exclude each other
    required: bool = False
    flag: str | None = None  # the flag when it is not --name-with-dashes
    python: bool = True  # a keyword of the Python entry point

    @property
    def spelled(self) -> str:
        """The command-line flag."""
        return self.flag or "--" + self.name.replace("_", "-")

    def choice_list(self) -> tuple:
        c = self.choices
        return tuple(c() if callable(c) else c or ())

    def range_text(self) -> str:
        """The allowed range in words: "from 0 to 1", "above 0 and below 1", "at least 10"."""
        lo, hi = self.low, self.high
        if lo is not None and hi is not None and not (self.open_low or self.open_high):
            return f"from {number_text(lo)} to {number_text(hi)}"
        parts = []
        if lo is not None:
            parts.append(f"{'above' if self.open_low else 'at least'} {number_text(lo)}")
        if hi is not None:
            parts.append(f"{'below' if self.open_high else 'at most'} {number_text(hi)}")
        return " and ".join(parts)

    def help_text(self) -> str:
        parts = [self.help] if self.help else []
        if self.unit and parts:
            parts[0] += f", in {self.unit}"
        if self.shown_default is not None:
            parts.append(f"default {self.shown_default}")
        elif self.default not in (None, False, ()) and not self.required:
            parts.append(f"default {self.default:g}" if isinstance(self.default, float)
                         else f"default {self.default}")  # fmt: skip
        text = "; ".join(parts)
        return text.replace("%", "%%")  # argparse formats help with %


OPTIONS: tuple[Option, ...] = (
    # --- the star
    Option("star_mass", "float", None, "stellar mass", metavar="M", unit="solar masses",
           low=0.01, high=1000, column=True, model_key="[star] mass",
           shown_default="the model file's [star] mass, else 1 (flagged as assumed)",
           ),  # fmt: skip
    Option("star_mass_err", "float", 0.0, "1-sigma error of the stellar mass, carried into "
           "every derived quantity (at most a third of the mass)", metavar="S",
           unit="solar masses", low=0, column=True, model_key="[star] mass_err"),  # fmt: skip
    Option("star_radius", "float", None, "stellar radius (adds the transit probability)",
           metavar="R", unit="solar radii", low=0.001, high=10_000, column=True,
           model_key="[star] radius"),  # fmt: skip
    Option("star_radius_err", "float", 0.0, "1-sigma error of the stellar radius",
           metavar="S", unit="solar radii", low=0, column=True),  # fmt: skip
    Option("star_teff", "float", None, "effective temperature (adds the equilibrium "
           "temperature and insolation; needs --star-radius)", metavar="T", unit="K",
           low=100, high=1e6, column=True, model_key="[star] teff"),  # fmt: skip
    Option("star_teff_err", "float", 0.0, "1-sigma error of the effective temperature",
           metavar="S", unit="K", low=0, column=True),  # fmt: skip
    Option("star_rotation", "float", None, "the star's rotation period, as photometry gives "
           "it: a normal prior on the GP's rotation period (--noise gp), and companions near "
           "it or its half are named as possible activity", metavar="D", unit="days",
           low=0.05, high=1e4, column=True, model_key="[star] rotation"),  # fmt: skip
    Option("star_rotation_err", "float", None, "its 1-sigma error", metavar="S", unit="days",
           low=0, open_low=True, high=1e4, column=True, shown_default="10% of the period",
           model_key="[star] rotation_err"),  # fmt: skip
    Option("star_name", "text", None, "the star's name (titles the summary and the report)",
           metavar="NAME", model_key="[star] name",
           shown_default="the model file's [star] name, else the first data file's name"),
    # --- the data
    Option("kms", "flag", False, "velocities and errors are in km/s",
           commands=frozenset({"analyze", "sample", "check", "periodogram"}),
           column=True, model_key="[data] kms"),  # fmt: skip
    Option("bin", "float", None, "average each instrument's points in bins this wide first "
           "(weighted by 1/err^2; needed above 20,000 points)", metavar="DAYS", unit="days",
           low=0, open_low=True, high=1e6, column=True,
           commands=frozenset({"analyze", "sample", "check", "periodogram"})),  # fmt: skip
    Option("model", "path", None, "a model file (companions, priors, star, data)",
           metavar="MODEL.toml", commands=frozenset({"analyze"}), column=True),  # fmt: skip
    # --- the number of companions
    Option("companions", "int", None, "fit exactly N companions", metavar="N", low=0,
           high=20, group="companions", column=True,
           commands=frozenset({"analyze", "demo"})),  # fmt: skip
    Option("max_companions", "int", 4, "look for at most N companions", metavar="N",
           low=0, high=20, group="companions", column=True,
           commands=frozenset({"analyze", "demo"})),  # fmt: skip
    # --- the search
    Option("min_period", "float", None, "shortest period searched", metavar="DAYS",
           unit="days", low=1e-3, high=1e7, column=True, shown_default=f"{DEFAULT_MIN_PERIOD} d",
           commands=frozenset({"analyze", "demo", "periodogram"})),  # fmt: skip
    Option("max_period", "float", None, "longest period searched", metavar="DAYS",
           unit="days", low=1e-3, high=1e7, column=True, shown_default="the time span",
           commands=frozenset({"analyze", "demo", "periodogram"})),  # fmt: skip
    Option("fap", "float", 1e-3, "false-alarm probability below which a peak counts",
           low=0, high=1, open_low=True, open_high=True, column=True, metavar="P",
           commands=frozenset({"analyze", "demo", "periodogram", "limits"})),  # fmt: skip
    Option("search", "choice", "auto", "the search's periodogram: auto (sine, checked by "
           "the Keplerian periodogram when an orbit comes out eccentric and when the sine "
           "search stops), sine (generalized Lomb-Scargle, Baluev false alarms) or "
           "keplerian (one eccentric orbit per period, bootstrap-calibrated false alarms)",
           choices=SEARCH_KINDS, column=True,
           commands=frozenset({"analyze", "demo", "periodogram"})),  # fmt: skip
    Option("bootstrap", "int", None, "redraws calibrating the Keplerian periodogram's "
           "false-alarm probability", metavar="N", low=MIN_BOOTSTRAP, high=100_000,
           shown_default="50", column=True,
           commands=frozenset({"analyze", "demo", "periodogram"})),  # fmt: skip
    Option("trend", "trend", "auto", "polynomial trend degree; auto lets 0, 1 and 2 compete "
           "by BIC like the companions (a model file's [trend] fixes it)",
           metavar="auto|0|1|2", column=True, model_key="[trend] degree",
           commands=frozenset({"analyze", "demo"})),  # fmt: skip
    Option("trend", "trend", 0, "polynomial trend degree fitted along the search",
           metavar="0|1|2", commands=frozenset({"periodogram"})),  # fmt: skip
    Option("max_signals", "int", 5, "most signals to look for", metavar="N", low=1, high=20,
           commands=frozenset({"periodogram"})),  # fmt: skip
    # --- the noise and the model
    Option("noise", "choice", None, "noise model: white (independent errors plus a jitter "
           "per instrument), gp (stellar activity as a quasi-periodic Gaussian process "
           "shared by the instruments, beside their jitters) or night (white plus a shift "
           "shared by one instrument's points of one night)", choices=_noise_models,
           column=True, model_key="[noise] kind",
           shown_default="the model file's [noise], else night for an instrument with two "
           "or more nights of 4+ points within 6 hours, else white"),  # fmt: skip
    Option("dynamics", "choice", None, "how the star's velocity follows from the "
           "companions: keplerian (a sum of Keplerian orbits), nbody (an N-body "
           "integration with REBOUND, coplanar, one shared inclination sampled) or "
           "nbody-inclined (each companion its own inclination and node); the N-body "
           "kinds need the dynamics extra and --star-mass, and are fitted from the "
           "Keplerian solution and compared with it",
           choices=("keplerian", "nbody", "nbody-inclined"), column=True,
           model_key="[dynamics] kind",
           shown_default="the model file's [dynamics], else keplerian"),  # fmt: skip
    Option("decorrelate", "columns", (), "decorrelate the velocities against these extra "
           "data columns (activity indicators such as fwhm,bis): one linear coefficient "
           "per column and instrument, marginalized like the offsets",
           metavar="COL[,COL...]", column=True),  # fmt: skip
    # --- sampling and model choice
    Option("sampler", "choice", "emcee", "the posterior's sampler: emcee (MCMC) or nested "
           "(dynesty; weighted samples and the evidence)", choices=_samplers,
           column=True),  # fmt: skip
    Option("evidence", "flag", False, "compute ln Z by nested sampling for the chosen number "
           "of companions and for one fewer and one more (results.json 'evidence')",
           column=True),  # fmt: skip
    Option("choose_by", "choice", "bic", "choose the number of companions by BIC or by "
           "evidence (a larger number must raise ln Z by more than 5; nested runs for every "
           "number)", choices=("bic", "evidence"), column=True,
           commands=frozenset({"analyze", "demo"})),  # fmt: skip
    Option("circular", "choice", "no", "auto: refit with a circular orbit every companion "
           "whose eccentricity is consistent with zero (Lucy & Sweeney p >= 0.05) and "
           "sample again", choices=("no", "auto"), column=True),
    Option("max_steps", "int", None, "cap on sampler steps", metavar="N", low=MIN_STEPS,
           high=MAX_STEPS, column=True, model_key="[sampling] max_steps",
           shown_default="the model file's [sampling] max_steps, else 40000 (1500 "
           "with --quick)"),  # fmt: skip
    Option("seed", "int", None, "random seed; results reproduce", low=0, high=MAX_SEED,
           model_key="[sampling] seed", shown_default="the model file's [sampling] seed, "
           "else 0"),  # fmt: skip
    # --- outputs
    Option("out", "path", "rvkep_output", "output folder", metavar="DIR",
           commands=frozenset({"analyze"})),  # fmt: skip
    Option("out", "path", "rvkep-demo", "output folder", metavar="DIR",
           commands=frozenset({"demo"})),  # fmt: skip
    Option("out", "path", None, "output folder", metavar="DIR", required=True,
           commands=frozenset({"sample", "batch"})),  # fmt: skip
    Option("format", "choice", "png", "figure format", choices=("png", "pdf"),
           column=True,
           commands=ANALYSIS | {"periodogram"}),  # fmt: skip
    Option("figures", "choice", "all", "all, summary (time series and phase curves: no "
           "corner plots or periodograms) or none", choices=FIGURE_SETS,
           column=True),  # fmt: skip
    Option("quick", "flag", False, "short chains for a preview or tests (flagged in every "
           "output)", commands=ANALYSIS | {"batch"}),  # fmt: skip
    Option("quiet", "flag", False, "no progress bar or messages",
           commands=ANALYSIS | {"batch", "limits", "page", "population", "stability"}),  # fmt: skip
    Option("timings", "flag", False, "print the seconds each stage took (always in "
           "results.json)", commands=ANALYSIS),  # fmt: skip
    # --- periodogram
    Option("seed", "int", 0, "seed of the bootstrap redraws", low=0, high=MAX_SEED,
           commands=frozenset({"periodogram"})),  # fmt: skip
    Option("out", "path", ".", "folder for the figure", metavar="DIR",
           commands=frozenset({"periodogram"})),  # fmt: skip
    # --- batch
    Option("workers", "int", None, "local worker processes", low=1, high=4096, metavar="N",
           shown_default="the number of cores", commands=frozenset({"batch"})),  # fmt: skip
    Option("scheduler", "text", None, "run on an existing Dask cluster, e.g. "
           "tcp://10.0.0.5:8786", metavar="ADDRESS",
           commands=frozenset({"batch", "limits", "stability"})),  # fmt: skip
    Option("seed", "int", 0, "seed of the whole list (each target's seed follows from it "
           "and the target's name)", low=0, high=MAX_SEED,
           commands=frozenset({"batch"})),  # fmt: skip
    # --- predict, events, plan
    Option("times", "path", None, "one time per line, in the data's system",
           metavar="FILE", commands=frozenset({"predict"})),  # fmt: skip
    Option("start", "text", None, "a time in the data's system or an ISO date (UTC)",
           metavar="T", flag="--from", commands=frozenset({"predict"})),  # fmt: skip
    Option("end", "text", None, "a time or an ISO date (UTC)", metavar="T", flag="--to",
           commands=frozenset({"predict"})),  # fmt: skip
    Option("start", "text", None, "a time in the data's system or an ISO date (UTC)",
           metavar="T", flag="--from", required=True,
           commands=frozenset({"events"})),  # fmt: skip
    Option("end", "text", None, "a time or an ISO date (UTC)", metavar="T", flag="--to",
           required=True, commands=frozenset({"events"})),  # fmt: skip
    Option("step", "float", 1.0, "step between times", metavar="D", unit="days",
           low=1e-6, high=1e6, commands=frozenset({"predict"})),  # fmt: skip
    Option("instrument", "text", None, "add what this instrument measures (its offset and "
           "jitter)", metavar="NAME", commands=frozenset({"predict"})),  # fmt: skip
    Option("draws", "int", None, "posterior draws", low=1, high=10_000_000,
           shown_default="all", commands=frozenset({"predict"})),  # fmt: skip
    Option("seed", "int", 0, "chooses the posterior draws", low=0, high=MAX_SEED,
           commands=frozenset({"predict", "plan", "limits", "stability"})),  # fmt: skip
    Option("out", "path", None, "CSV file", metavar="FILE", shown_default="standard output",
           commands=frozenset({"predict", "events", "plan"})),  # fmt: skip
    Option("ra", "float", None, "right ascension (ICRS), for calendar dates", metavar="DEG",
           unit="degrees", low=0, high=360, commands=frozenset({"predict", "events"})),
    Option("dec", "float", None, "declination (ICRS), for calendar dates", metavar="DEG",
           unit="degrees", low=-90, high=90, commands=frozenset({"predict", "events"})),
    Option("site", "text", None, "the observatory (degrees north, degrees east, metres): "
           "for calendar dates", metavar="LAT,LON,HEIGHT",
           commands=frozenset({"predict", "events"})),  # fmt: skip
    Option("time_offset", "float", None, "BJD_TDB minus the data's times (needed for "
           "calendar dates unless the data hold full BJDs)", metavar="D", unit="days",
           low=-1e7, high=1e7, commands=frozenset({"predict", "events", "plan"})),
    Option("site", "text", None, "the observatory: degrees north, degrees east, metres (a "
           "southern site: --site=-30.2,-70.7,2200)", metavar="LAT,LON,HEIGHT", required=True,
           commands=frozenset({"plan"})),  # fmt: skip
    Option("ra", "float", None, "right ascension (ICRS)", metavar="DEG", unit="degrees",
           low=0, high=360, required=True, commands=frozenset({"plan"})),  # fmt: skip
    Option("dec", "float", None, "declination (ICRS)", metavar="DEG", unit="degrees",
           low=-90, high=90, required=True, commands=frozenset({"plan"})),  # fmt: skip
    Option("start", "text", None, "the first night's evening date (YYYY-MM-DD, local)",
           metavar="DATE", required=True, commands=frozenset({"plan"})),  # fmt: skip
    Option("nights", "int", None, "nights to plan", metavar="N", low=1, high=3660,
           required=True, commands=frozenset({"plan"})),  # fmt: skip
    Option("per_night", "int", 1, "most epochs on one night", metavar="K", low=1, high=100,
           commands=frozenset({"plan"})),  # fmt: skip
    Option("epochs", "int", None, "epochs to choose", metavar="N", low=1, high=10_000,
           shown_default="--per-night on every usable night",
           commands=frozenset({"plan"})),  # fmt: skip
    Option("max_airmass", "float", 2.0, "highest airmass observed", metavar="X", low=1,
           high=40, commands=frozenset({"plan"})),  # fmt: skip
    Option("aim", "text", None, "a posterior column such as b.K or c.period, or 'all' "
           "(the information gain about the whole orbit)", metavar="PARAM",
           shown_default="the least-constrained companion's period or K",
           commands=frozenset({"plan"})),  # fmt: skip
    Option("instrument", "text", None, "the instrument that will observe",
           metavar="NAME", shown_default="the one with most points",
           commands=frozenset({"plan"})),  # fmt: skip
    Option("step", "float", 10.0, "spacing of candidate times", metavar="MIN", unit="minutes",
           low=0.1, high=720, commands=frozenset({"plan"})),  # fmt: skip
    Option("figure", "path", None, "the score over the window", metavar="FILE",
           shown_default="beside --out, as .png", commands=frozenset({"plan"})),  # fmt: skip
    # --- limits
    Option("injections", "int", 20, "injections per cell", metavar="N", low=1,
           high=100_000, commands=frozenset({"limits"})),  # fmt: skip
    Option("grid", "int", 30, "cells along each axis", metavar="N", low=2, high=1000,
           commands=frozenset({"limits"})),  # fmt: skip
    Option("periods", "range", None, "period range", metavar="MIN:MAX", unit="days",
           low=1e-3, high=1e7, shown_default="the search's range, 1.2 d to the time span",
           commands=frozenset({"limits"})),  # fmt: skip
    Option("masses", "range", None, "M sin i range", metavar="MIN:MAX", unit="Earth masses",
           low=1e-6, high=1e8, shown_default="around the white-noise limit",
           commands=frozenset({"limits"})),  # fmt: skip
    Option("workers", "int", 1, "local processes", metavar="N", low=1, high=4096,
           commands=frozenset({"limits"})),  # fmt: skip
    Option("out", "path", None, "output folder", metavar="DIR",
           shown_default="the run's folder", commands=frozenset({"limits"})),  # fmt: skip
    # --- stability
    Option("draws", "int", 100, "posterior draws to integrate", low=1, high=100_000,
           commands=frozenset({"stability"})),  # fmt: skip
    Option("orbits", "float", 5000.0, "length of each integration in periods of the "
           "outermost companion", low=10, high=1e7, commands=frozenset({"stability"})),  # fmt: skip
    Option("workers", "int", 1, "local processes", metavar="N", low=1, high=4096,
           commands=frozenset({"stability"})),  # fmt: skip
    # --- population
    Option("out", "path", None, "output folder", metavar="DIR", required=True,
           commands=frozenset({"population"})),  # fmt: skip
    Option("period_range", "range", None, "the occurrence box's periods", metavar="LO,HI",
           unit="days", low=1e-3, high=1e7, shown_default="1,1000",
           commands=frozenset({"population"})),  # fmt: skip
    Option("mass_range", "range", None, "the occurrence box's m sin i", metavar="LO,HI",
           unit="Jupiter masses", low=1e-6, high=1e4, shown_default="0.1,13",
           commands=frozenset({"population"})),  # fmt: skip
    Option("seed", "int", 0, "seed of the population samplers", low=0, high=MAX_SEED,
           commands=frozenset({"population"})),  # fmt: skip
    Option("include_quick", "flag", False, "use quick and unconverged runs too (skipped by "
           "default, and listed)", commands=frozenset({"population"})),  # fmt: skip
)


def options_of(command: str) -> list[Option]:
    """The options ``command`` takes, in the table's order.

    Parameters
    ----------
    command : str
        A subcommand (or ``"batch-row"`` for the target-list columns).

    Returns
    -------
    list of Option
        Its options.
    """
    return [o for o in OPTIONS if command in o.commands]


def option(command: str, name: str) -> Option:
    """The option ``name`` of ``command`` (KeyError when it has none).

    Parameters
    ----------
    command, name : str
        The subcommand and the option's Python name.

    Returns
    -------
    Option
        The declaration.
    """
    for o in OPTIONS:
        if o.name == name and command in o.commands:
            return o
    raise KeyError(f"{command} has no option {name!r}")


def columns() -> list[Option]:
    """The target-list columns besides ``name`` and ``data``: analyze's options a target
    may set (the batch's own --out, --seed, --quick, --quiet apply to every target).

    Returns
    -------
    list of Option
        The options that have a column.
    """
    return [o for o in options_of("analyze") if o.column]


# --- values


def as_flags(values: dict, command: str = "analyze") -> str:
    """The options that differ from their defaults, written as flags (the outputs'
    "how this was run" when the run did not come from a command line).

    Parameters
    ----------
    values : dict
        {option name: value} of a run.
    command : str, optional
        The subcommand the names belong to.

    Returns
    -------
    str
        The flags, e.g. ``--star-mass 0.9 --noise gp`` (empty when all are defaults).
    """
    parts = []
    for opt in options_of(command):
        if opt.name not in values:
            continue
        v = values[opt.name]
        if v == opt.default or v is None:
            continue
        if opt.kind == "flag":
            parts.append(opt.spelled)
        elif opt.kind == "columns":
            parts.append(f"{opt.spelled} {','.join(v)}")
        elif opt.kind == "range":
            parts.append(f"{opt.spelled} {v[0]:g}:{v[1]:g}")
        else:
            parts.append(f"{opt.spelled} {v:g}" if isinstance(v, float)
                         else f"{opt.spelled} {v}")  # fmt: skip
    return " ".join(parts)


# --- Python entry points


_PY_TYPES = {
    "float": "float | None", "int": "int | None", "flag": "bool", "choice": "str",
    "trend": "int | str", "columns": "tuple[str, ...]", "path": "str | Path", "text": "str",
    "range": "tuple[float, float] | None",
}  # fmt: skip


def python_options(command: str) -> list[Option]:
    """The keywords of ``command``'s Python entry point."""
    return [o for o in options_of(command) if o.python]


def signature(command: str, leading: Iterable[inspect.Parameter] = ()) -> inspect.Signature:
    """The keyword signature of ``command``'s Python entry point: ``leading``
    parameters, then one keyword-only parameter per option, its default the table's.

    Parameters
    ----------
    command : str
        The subcommand.
    leading : iterable of inspect.Parameter, optional
        Positional parameters before the options (e.g. the data files).

    Returns
    -------
    inspect.Signature
        The signature given to the entry point (``help()`` and completion show it).
    """
    params = list(leading)
    for o in python_options(command):
        kind = inspect.Parameter.KEYWORD_ONLY
        params.append(inspect.Parameter(o.name, kind, default=o.default,
                                        annotation=_PY_TYPES[o.kind]))  # fmt: skip
    return inspect.Signature(params)


def numpydoc(command: str, indent: str = "    ") -> str:
    """The options of ``command`` as numpydoc ``Parameters`` entries.

    Parameters
    ----------
    command : str
        The subcommand.
    indent : str, optional
        Prefix of each line.

    Returns
    -------
    str
        The entries (name, type, default and help of each option).
    """
    lines = []
    for o in python_options(command):
        lines.append(f"{indent}{o.name} : {_PY_TYPES[o.kind]}")
        text = o.help_text().replace("%%", "%")
        if o.unit:
            text += f" [{o.unit}]"
        text += f"; ``{o.spelled}`` on the command line"
        if o.column:
            text += ", a target-list column"
        if o.model_key:
            text += f"; model file {o.model_key}"
        lines.append(f"{indent}    {text}.")
    return "\n".join(lines)
