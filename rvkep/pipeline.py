"""The whole job on one star: read, search, choose the number of companions, fit,
sample, derive, write tables and figures.

:func:`analyze` is the sequence of public stages: :func:`read_data`,
:func:`star_properties`, :func:`choose_model` (stage 3, in :mod:`rvkep.model_choice`:
how many companions, the trend degree, the dynamics, the evidence),
:func:`sample_posterior`, :func:`test_eccentricities` and :func:`write_outputs`.
"""

from __future__ import annotations

import inspect
import math
import time
import warnings
from dataclasses import field, replace
from pathlib import Path

import numpy as np

from rvkep import option_checks, options
from rvkep.data import MIN_POINTS, DataWarning, RVData, check_size
from rvkep.errors import OptionError, RvkepError
from rvkep.evidence import run_nested, run_seed
from rvkep.formatting import p_relation
from rvkep.kepler import prepare_kernels
from rvkep.messages import did_you_mean
from rvkep.messages import say as _say
from rvkep.model_choice import BIC_THRESHOLD, ModelChoice, choose_companions, choose_model
from rvkep.names import name_problem
from rvkep.nbody_fit import check_dynamics, fit_dynamics
from rvkep.outputs import (
    check_output_folder,
    clean_temporaries,
    folder_lock,
    make_output_folder,
    remove_if_empty,
)
from rvkep.physics import StarProperties
from rvkep.reading import load_rv

__all__ = ["AnalyzeOptions", "analyze", "BIC_THRESHOLD", "write_figures", "choose_companions",
           "choose_model", "ModelChoice"]


def _options_class():
    """AnalyzeOptions, made from the option table (:mod:`rvkep.options`): one field per
    option of ``rvkep analyze`` (the flag's name, dashes to underscores, and its
    default), plus ``command``, the command line that asked for the run (reports)."""
    from dataclasses import make_dataclass

    fields = [(o.name, object, field(default=o.default)) for o in options.python_options("analyze")]
    fields.append(("command", object, field(default=None)))
    cls = make_dataclass("AnalyzeOptions", fields, namespace={"__module__": __name__})
    cls.__doc__ = ("Options of :func:`analyze`, one field per option of ``rvkep analyze``.\n\n"
                   "Attributes\n----------\n" + options.numpydoc("analyze", indent="")
                   + "\ncommand : str | None\n    the command line that asked for the run.")
    return cls


AnalyzeOptions = _options_class()


def bin_data(data: RVData, days: float) -> tuple[RVData, str]:
    """``data`` averaged in bins ``days`` wide (:meth:`RVData.binned`), and the line
    that says so (printed, and kept in results.json's notes)."""
    if not (isinstance(days, (int, float)) and math.isfinite(days) and days > 0):
        raise OptionError(f"--bin must be a positive number of days, got {days!r}")
    binned = data.binned(days)
    if len(binned) < MIN_POINTS:
        raise OptionError(f"--bin {days:g}: leaves {len(binned)} points of {len(data):,}, "
                          f"fewer than the {MIN_POINTS} a fit needs; use narrower "
                          "bins")  # fmt: skip
    note = (f"data averaged in {days:g}-day bins per instrument: {len(data):,} -> "
            f"{len(binned):,} points")  # fmt: skip
    return binned, note


def validate_options(opts: AnalyzeOptions) -> dict:
    """Check every option value before any work (raises OptionError naming it); returns
    the checked values by name (:func:`rvkep.option_checks.check`)."""
    values = {name: getattr(opts, name) for name in _OPTION_NAMES}
    checked = option_checks.check(values, "analyze")
    check_output_folder(opts.out)
    return checked


_OPTION_NAMES = tuple(o.name for o in options.python_options("analyze"))


def analyze(files=None, opts: AnalyzeOptions | None = None, **keywords):
    """Run the whole job on one star; returns :class:`rvkep.results.Results` (also
    written to ``out``). Raises RvkepError subclasses for bad input before anything is
    written.

    The options come by keyword, spelled as the command line's flags with dashes
    turned to underscores: ``analyze(files, star_mass=0.92, star_mass_err=0.04,
    out="veyla")`` runs ``rvkep analyze FILES --star-mass 0.92 --star-mass-err 0.04
    --out veyla``; or all together as an :class:`AnalyzeOptions`. The job is the
    sequence of public stages :func:`read_data`, :func:`star_properties`,
    :func:`choose_model`, :func:`sample_posterior` and :func:`write_outputs`.

    Parameters
    ----------
    files : str | Path | list of them, optional
        RV tables (one per instrument, or with an instrument column); default the model
        file's.
    opts : AnalyzeOptions, optional
        every option at once (not together with keywords).
{OPTIONS}

    Returns
    -------
    Results
        the run's summaries, derived quantities and outputs' paths.
    """
    opts = _options_from(opts, keywords)
    if isinstance(files, (str, Path)):
        files = [files]
    from rvkep.modelfile import read_model_file

    opts = opts or AnalyzeOptions()
    t_start = time.perf_counter()
    validate_options(opts)
    spec = read_model_file(opts.model) if opts.model else None
    check_against_model_file(opts, spec)
    data, data_notes = read_data(files, opts, spec)
    star = star_properties(opts, spec)
    check_dynamics(opts, spec, star)
    prepare_kernels(quiet=opts.quiet)  # the first run after an install compiles them
    timings = {"read": time.perf_counter() - t_start}
    out = Path(opts.out)
    created = make_output_folder(out)
    try:
        results, paths = _run_in_folder(files, opts, spec, data, data_notes, star, out, timings)
    except RvkepError:
        if created:  # a refused run leaves no empty folder behind
            remove_if_empty(out)
        raise
    _report_done(results, paths, opts, out, time.perf_counter() - t_start)
    return results


def _options_from(opts: AnalyzeOptions | None, keywords: dict) -> AnalyzeOptions | None:
    """The options given by keyword as AnalyzeOptions (an unknown keyword is a
    TypeError with "did you mean"), or ``opts`` as given."""
    if not keywords:
        return opts
    if opts is not None:
        raise TypeError("give the options as AnalyzeOptions or as keywords, not both")
    unknown = [k for k in keywords if k not in _OPTION_NAMES]
    if unknown:
        raise TypeError(f"analyze() got an unexpected keyword argument {unknown[0]!r}"
                        f"{did_you_mean(unknown[0], _OPTION_NAMES)}")  # fmt: skip
    return AnalyzeOptions(**keywords)


def _report_done(results, paths: dict, opts: AnalyzeOptions, out: Path, seconds: float):
    """The terminal's end of a run: the results, the timings if asked, where the files
    are and what kind of run made them."""
    _say(opts, str(results))
    if opts.timings:
        print("timings: " + ", ".join(f"{k.replace('_', ' ')} {v:.2f} s"
                                      for k, v in results.timings.items()), flush=True)  # fmt: skip
    figures = "" if figure_set(opts.figures) == "none" else ", figures"
    _say(opts, f"done in {seconds:.1f} s; results in {out}/ "
               f"({paths['report'].name}, {paths['json'].name}, {paths['summary'].name}, "
               f"{paths['latex'].name}{figures}); kind of run: {results.run_label()}")  # fmt: skip


analyze.__doc__ = analyze.__doc__.replace("{OPTIONS}", options.numpydoc("analyze"))
analyze.__signature__ = options.signature("analyze", [
    inspect.Parameter("files", inspect.Parameter.POSITIONAL_OR_KEYWORD, default=None),
    inspect.Parameter("opts", inspect.Parameter.POSITIONAL_OR_KEYWORD, default=None),
])  # fmt: skip


def check_against_model_file(opts: AnalyzeOptions, spec) -> None:
    """Refuse options that a model file's companions would silently override."""
    if spec is None or not spec.companions:
        return
    n = len(spec.companions)
    if opts.companions is not None and opts.companions != n:
        raise OptionError(f"--companions {opts.companions}: the model file {opts.model} "
                          f"describes {n} companion(s); give one or the other")  # fmt: skip
    if opts.max_companions != options.option("analyze", "max_companions").default:
        raise OptionError(f"--max-companions: the model file {opts.model} fixes the "
                          f"companions ({n}); no search decides their number")  # fmt: skip


def _run_in_folder(files, opts, spec, data, data_notes, star, out: Path, timings: dict):
    """The stages that write into ``out``, under its lock; returns (results, paths)."""
    with folder_lock(out):  # one run per output folder
        clean_temporaries(out)  # left by a run that was killed
        _say(opts, f"read {len(data)} velocities from {len(data.instruments)} instrument(s): "
                   f"{', '.join(data.instruments)}")  # fmt: skip
        chosen = choose_model(data, opts, spec, folder=out)
        t0 = time.perf_counter()
        chosen = fit_dynamics(chosen, opts, spec, star)
        timings.update(chosen.timings)
        if chosen.dynamics_rows:
            timings["nbody_fit"] = time.perf_counter() - t0
        t0 = time.perf_counter()
        sampled, sample_notes, seed = sample_posterior(chosen.fit, opts, spec, out / "chain.h5",
                                                       nested=chosen.nested)  # fmt: skip
        t1 = time.perf_counter()
        results = _build_results(data, chosen, sampled, star, opts, seed,
                                 data_notes + chosen.notes + sample_notes)  # fmt: skip
        t2 = time.perf_counter()
        results = test_eccentricities(results, chosen, opts, spec, star, seed, out,
                                      data_notes + chosen.notes + sample_notes)  # fmt: skip
        t3 = time.perf_counter()
        timings.update(sampling=t1 - t0, derived=t2 - t1, eccentricity=t3 - t2)
        results.timings = timings
        results.provenance = provenance(files or (spec.files if spec else []), opts, seed)
        results.star_name = star_name(files or (spec.files if spec else []), opts, spec)
        paths = write_outputs(results, out, opts)
    return results, paths


def star_name(files, opts: AnalyzeOptions, spec=None) -> str:
    """The star's name: ``--star-name``, else the model file's ``[star] name``, else the
    first data file's name without its suffix."""
    if opts.star_name:
        return opts.star_name
    if spec is not None and getattr(spec, "star_name", ""):
        return spec.star_name
    return Path(files[0]).stem if files else "rvkep run"


def provenance(files, opts: AnalyzeOptions, seed: int) -> dict:
    """How to make the run again: the command (or the Python call), the seed, and each
    input file's SHA-256 (and the model file's)."""
    import hashlib

    def digest(path) -> dict:
        try:
            return {
                "file": str(path),
                "sha256": hashlib.sha256(Path(path).read_bytes()).hexdigest(),
            }
        except OSError:
            return {"file": str(path), "sha256": None}

    inputs = [digest(f) for f in files]
    if opts.model:
        inputs.append(digest(opts.model))
    values = {name: getattr(opts, name) for name in _OPTION_NAMES}
    flags = options.as_flags(values)
    command = opts.command or ("Python: rvkep.analyze" + (f" (as flags: {flags})" if flags else ""))
    shown = {k: (str(v) if isinstance(v, Path) else list(v) if isinstance(v, tuple) else v)
             for k, v in values.items()}  # fmt: skip
    return {"command": command, "seed": seed, "options": shown, "inputs": inputs}


def read_data(files, opts: AnalyzeOptions, spec=None) -> tuple[RVData, list[str]]:
    """Stage 1: the data (command-line files, else the model file's), binned if asked,
    within the size limit; and the notes about them (unit warnings, binning)."""
    files = list(files or (spec.files if spec else []))
    if not files:
        raise OptionError("no data files given (on the command line or in the model file)")
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", DataWarning)
        data = load_rv(files, kms=opts.kms or (spec.kms if spec else False))
    notes = [f"data: {w.message}" for w in caught if issubclass(w.category, DataWarning)]
    for note in notes:  # printed now, and kept in results.json and the summary
        _say(opts, f"warning: {note.removeprefix('data: ')}")
    if opts.bin is not None:
        data, note = bin_data(data, opts.bin)
        notes.append(note)
        _say(opts, note)
    check_size(data)
    return data, notes


def star_properties(opts: AnalyzeOptions, spec=None) -> StarProperties | None:
    """Stage 2: the star from the options over the model file's ``[star]`` (None when
    neither gives a mass: 1 M_sun is then assumed, and said)."""
    star = spec.star if spec and spec.star else None
    if opts.star_mass is not None:
        if not opts.star_mass > 0 or opts.star_mass_err < 0:
            raise OptionError("--star-mass must be positive and --star-mass-err not negative")
        given = {"mass": opts.star_mass, "mass_err": opts.star_mass_err}
        star = replace(star, **given) if star else StarProperties(**given)
    for name, value, err in (
        ("radius", opts.star_radius, opts.star_radius_err),
        ("teff", opts.star_teff, opts.star_teff_err),
    ):
        if value is None:
            continue
        if star is None:
            raise OptionError(f"--star-{name} needs --star-mass (or a model file's [star])")
        if not value > 0 or err < 0:
            raise OptionError(f"--star-{name} must be positive and its error not negative")
        star = replace(star, **{name: value, f"{name}_err": err})
    if star is not None and star.teff is not None and star.radius is None:
        raise OptionError("--star-teff needs --star-radius as well")
    return star


def test_eccentricities(results, chosen: ModelChoice, opts: AnalyzeOptions, spec, star,
                        seed: int, out: Path, notes: list[str]):  # fmt: skip
    """Stage 4b: the Lucy & Sweeney test and a circular refit for each eccentric
    companion (:mod:`rvkep.eccentricity`), kept in ``results.ecc_tests``; with
    ``opts.circular == "auto"`` the companions consistent with circular are refitted
    circular and the posterior sampled again (the results of that model are returned,
    saying so)."""
    from rvkep.eccentricity import circular_model, eccentricity_tests
    from rvkep.optimize import fit as refit

    tests = eccentricity_tests(chosen.fit, results.posterior)
    results.ecc_tests = tests
    for L, t in tests.items():
        verdict = "consistent with circular" if t["consistent_with_circular"] else "eccentric"
        _say(opts, f"eccentricity of {L}: {verdict} (Lucy & Sweeney p "
                   f"{p_relation(t['lucy_sweeney_p'])}; BIC circular - eccentric = "
                   f"{t['delta_bic_circular_minus_eccentric']:.1f})")  # fmt: skip
    circular = sorted(L for L, t in tests.items() if t["consistent_with_circular"])
    if opts.circular != "auto" or not circular:
        return results
    model = circular_model(chosen.fit.model, set(circular))
    start = {**chosen.fit.params, **{f"{L}.ecc": 0.0 for L in circular}}
    fit = refit(model, [model.from_physical(start)[0]])
    note = (
        f"--circular auto: {', '.join(circular)} refitted with a circular orbit "
        "(consistent with circular by the Lucy & Sweeney test) and sampled again"
    )
    _say(opts, note)
    chosen = replace(chosen, fit=fit, nested=None)
    sampled, more, seed = sample_posterior(fit, opts, spec, out / "chain.h5")
    again = _build_results(results.data, chosen, sampled, star, opts, seed, notes + more + [note])
    again.ecc_tests = {L: {**t, "refitted_circular": L in circular} for L, t in tests.items()}
    return again


def sample_posterior(fit, opts: AnalyzeOptions, spec=None, checkpoint: Path | None = None,
                     nested=None):  # fmt: skip
    """Stage 4: sample the chosen model's posterior (resumable through ``checkpoint``),
    with emcee or, with ``opts.sampler == "nested"``, by nested sampling (``nested``:
    a run of the same model already made for its evidence, reused).

    Returns (sample set, notes, seed): the notes say what was not a plain fresh run
    (a checkpoint that could not be resumed)."""
    from rvkep.likelihood import LogPosterior
    from rvkep.samplers import get_sampler
    from rvkep.sampling import CheckpointNotice, SamplerOptions, UnconvergedWarning

    sampling_spec = spec.sampling if spec else {}
    seed = run_seed(opts, spec)
    max_steps = opts.max_steps or sampling_spec.get("max_steps") or (1500 if opts.quick else 40000)
    if fit.model.ndim == 0:
        raise RvkepError("nothing to sample: every parameter is fixed")
    if opts.sampler == "nested":
        if nested is None or nested.model is not fit.model:
            saved = checkpoint.with_name("nested_posterior.save") if checkpoint else None
            notes: list[str] = []
            nested = run_nested(fit, opts, seed, saved, notes)
        else:
            notes = []
        return nested, notes + ["posterior by nested sampling (dynesty): weighted samples, "
                                "resampled to equal weights for the outputs"], seed  # fmt: skip
    sopts = SamplerOptions(walkers=sampling_spec.get("walkers"), max_steps=max_steps, seed=seed,
                           progress=None if not opts.quiet else False, checkpoint=checkpoint,
                           check_every=250 if opts.quick else 500)  # fmt: skip
    quick = " (QUICK MODE: short chains, preview only)" if opts.quick else ""
    _say(opts, f"sampling {fit.model.ndim} parameters with {sopts.n_walkers(fit.model.ndim)} "
               f"walkers{quick}")  # fmt: skip
    notes = []
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", UnconvergedWarning)
        warnings.simplefilter("always", CheckpointNotice)
        # the posterior is built once and handed to the sampler (rvkep.samplers)
        sampled = get_sampler("emcee").run(LogPosterior(fit.model), fit.theta, sopts)
    for w in caught:
        if issubclass(w.category, UnconvergedWarning):
            _say(opts, f"WARNING: {w.message}")
        elif issubclass(w.category, CheckpointNotice):
            _say(opts, f"note: {w.message}")
            notes.append(str(w.message))  # kept in results.json: it says what ran
    return sampled, notes, seed


def _build_results(data, chosen: ModelChoice, sampled, star, opts, seed: int, notes: list[str]):
    from rvkep.posterior import PosteriorSamples
    from rvkep.results import Results

    fit = chosen.fit
    theta, log_prob = sampled.equal_weight(rng=seed)  # as they are for MCMC
    posterior = PosteriorSamples.from_chain(fit.model, theta, log_prob, rng=seed)
    results = Results.build(
        data, fit, sampled, posterior, star, rng=seed + 1, search=chosen.search,
        comparison=chosen.comparison, quick=opts.quick, seed=seed,
        trend_comparison=chosen.trend_rows, evidence=chosen.evidence,
        dynamics_comparison=chosen.dynamics_rows, harmonic_checks=chosen.harmonic_checks,
    )  # fmt: skip
    results.notes.extend(notes)
    from rvkep.constraint import prior_notes

    for note in prior_notes(fit.model, posterior.columns) + window_notes(data, posterior):
        _say(opts, f"note: {note}")
        results.notes.append(note)
    if opts.quick:
        results.notes.append("quick mode: short chains for a preview, not for publication")
    return results


#: a window peak this high (the spectral window is 1 at zero frequency) makes a GP
#: rotation period near it suspect
WINDOW_SUSPECT = 0.2


def window_notes(data, posterior) -> list[str]:
    """A note when the GP's rotation period lies within 10% of a strong peak of the
    spectral window (Deeming 1975): the sampling's own period, not the star's."""
    if "noise.rotation_period" not in posterior:
        return []
    from rvkep.periodogram import frequency_grid, spectral_window

    rot = float(np.median(posterior["noise.rotation_period"]))
    f = frequency_grid(data.time, 0.9 * rot, 1.1 * rot, 10.0)
    if f.size == 0:
        return []
    w = spectral_window(data.time, f)
    k = int(np.argmax(w))
    if w[k] < WINDOW_SUSPECT:
        return []
    return [f"the activity's rotation period ({rot:.4g} d) lies within 10% of a peak of the "
            f"spectral window at {1 / f[k]:.4g} d (height {w[k]:.2f}): it may be the "
            "sampling's period rather than the star's; give --star-rotation if photometry "
            "knows it"]


def write_outputs(results, out: Path, opts: AnalyzeOptions) -> dict[str, Path]:
    """Stage 5: (unless ``opts.figures`` is false) the figures, then the summary, the
    tables, the samples, data.csv, model.json and, last, results.json (whose presence
    marks a complete folder, and which records the figures' and tables' times)."""
    which = figure_set(opts.figures)
    if which != "none":
        t0 = time.perf_counter()
        write_figures(results, out, opts.format, which)
        results.timings["figures"] = time.perf_counter() - t0
    return results.write(out)


#: which figures each choice of ``--figures`` draws
FIGURE_SETS = {"all": ("timeseries", "phase", "corner", "periodogram"),
               "summary": ("timeseries", "phase"), "none": ()}  # fmt: skip


def figure_set(choice: bool | str) -> str:
    """The name in FIGURE_SETS of an ``AnalyzeOptions.figures`` value."""
    if choice is True:
        return "all"
    if choice is False:
        return "none"
    if choice not in FIGURE_SETS:
        raise OptionError(f"--figures must be one of {', '.join(FIGURE_SETS)}, got {choice!r}")
    return choice


def write_figures(results, out: str | Path, fmt: str = "png", which: str = "all") -> list[Path]:
    """Save the time series, phase curves, periodograms and corner plots of a result
    (drawn by the figure functions of :mod:`rvkep.plots` from the Results); ``which``
    names a set of :data:`FIGURE_SETS` (``summary``: time series and phase curves).

    Parameters
    ----------
    results : Results
        A finished run.
    out : str or Path
        The folder.
    fmt : str, optional
        File format (``png``, ``pdf``, ``svg``).
    which : str, optional
        The set of figures.

    Returns
    -------
    list of Path
        The files written.
    """
    from rvkep import __version__
    from rvkep.outputs import save_figure as _save
    from rvkep.plots import corner_figure, phase_figure, plot_periodograms, timeseries_figure

    out = Path(out)
    footer = f"rvkep {__version__} | {results.run_label()}"
    marked = bool(results.run_marks())

    def save_figure(fig, path):  # every figure says what kind of run drew it
        engine = fig.get_layout_engine()
        if engine is not None and hasattr(engine, "set"):  # room for the footer line
            engine.set(rect=(0, 0.022, 1, 0.978))
        else:
            fig.subplots_adjust(bottom=max(fig.subplotpars.bottom, 0.09))
        fig.text(0.995, 0.003, footer, ha="right", va="bottom", fontsize=6.5,
                 color="#b2182b" if marked else "0.45")  # fmt: skip
        key = "Subject" if str(path).endswith(".pdf") else "Description"
        return _save(fig, path, metadata={key: footer})

    kinds = FIGURE_SETS[which]
    for L in results.labels:  # labels become file names: none may leave the folder
        problem = name_problem(L, "companion name")
        if problem:
            raise OptionError(f"{out}: cannot name a figure after it: {problem}")
    written = []
    if "timeseries" in kinds:
        written.append(save_figure(timeseries_figure(results), out / f"timeseries.{fmt}"))
    for L in results.labels:
        if "phase" in kinds:
            written.append(save_figure(phase_figure(results, L), out / f"phase_{L}.{fmt}"))
        if "corner" in kinds:
            written.append(save_figure(corner_figure(results, L), out / f"corner_{L}.{fmt}"))
    if "periodogram" in kinds and results.search is not None:
        written.append(save_figure(plot_periodograms(results.search), out / f"periodogram.{fmt}"))
    if "periodogram" in kinds and results.labels and results.fit is not None:
        from rvkep.extra_plots import stacked_figure

        written.append(save_figure(stacked_figure(results), out / f"stacked.{fmt}"))
    if "timeseries" in kinds and results.trend_degree >= 1:
        from rvkep.extra_plots import trend_companion_figure

        written.append(save_figure(trend_companion_figure(results),
                                   out / f"trend_companion.{fmt}"))  # fmt: skip
    return written
