"""The ``rvkep`` command.

A thin layer over the library: each subcommand parses its options, calls the same
functions a notebook would, and turns every :class:`rvkep.errors.RvkepError` into one
line on standard error with exit status 2. Heavy libraries are imported inside the
subcommands so that ``rvkep --help`` starts fast.
"""

from __future__ import annotations

import argparse
import errno
import json
import math
import shlex
import sys
from collections.abc import Sequence

from rvkep import __version__, options
from rvkep.errors import RvkepError

__all__ = ["main", "build_parser", "BATCH_FAILED_EXIT", "demo_folder", "demo_files"]

#: Exit status of ``rvkep batch`` when one or more targets failed (the others ran and
#: the summary was written). 2 stays "a usage or input error", 130 "interrupted".
BATCH_FAILED_EXIT = 3


def build_parser() -> argparse.ArgumentParser:
    """The argument parser with every subcommand (options from :mod:`rvkep.options`)."""
    parser = options.Parser(
        prog="rvkep",
        description=(
            "Find, fit and sample Keplerian orbits in stellar radial-velocity data "
            "from one or several spectrographs."
        ),
    )
    parser.add_argument("--version", action="version", version=f"rvkep {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    for add in _SUBCOMMANDS:
        p = add(sub)
        parser.subcommands[p.prog.split()[-1]] = p
    return parser


def _subcommand(sub, name: str, help: str, description: str, run) -> argparse.ArgumentParser:
    """A subcommand's parser, its options from the table."""
    p = sub.add_parser(name, help=help, description=description)
    p.set_defaults(run=run)
    return p


def _add_files(p: argparse.ArgumentParser, required: bool = True) -> None:
    p.add_argument("files", nargs="+" if required else "*", metavar="FILE",
                   help="RV tables (one per instrument, or with an instrument column)"
                   + ("" if required else "; default: the model file's"))  # fmt: skip


def _load(args: argparse.Namespace):
    """Read the data files, printing unit warnings as one line each."""
    import warnings

    from rvkep.data import DataWarning
    from rvkep.reading import load_rv

    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", DataWarning)
        data = load_rv(args.files, kms=args.kms)
    for w in caught:
        if issubclass(w.category, DataWarning):
            print(f"rvkep {args.command}: warning: {w.message}", file=sys.stderr)
    if getattr(args, "bin", None) is not None:
        from rvkep.pipeline import bin_data

        data, note = bin_data(data, args.bin)
        print(f"rvkep {args.command}: {note}", file=sys.stderr)
    return data


def _run_check(args: argparse.Namespace) -> int:
    data = _load(args)
    print(data.summary())
    print(f"reference epoch: {data.epoch:.1f} (same time system as the input)")
    if data.extra:
        print("extra columns: " + ", ".join(data.extra))
    return 0


def _add_check(sub) -> argparse.ArgumentParser:
    p = _subcommand(sub, "check", "read and validate RV files, print a summary",
                    "Read and validate RV files; print per instrument the number of points, "
                    "time span, median error and RMS.", _run_check)  # fmt: skip
    _add_files(p)
    options.add_arguments(p, "check")
    return p


def _run_periodogram(args: argparse.Namespace) -> int:
    from rvkep.errors import OptionError

    options.check({k: getattr(args, k) for k in ("min_period", "max_period")}, "periodogram")
    data = _load(args)
    from rvkep.data import check_size
    from rvkep.outputs import save_figure
    from rvkep.period_search import search
    from rvkep.plots import plot_periodograms

    check_size(data)
    try:
        result = search(
            data,
            min_period=args.min_period,
            max_period=args.max_period,
            fap_threshold=args.fap,
            max_signals=args.max_signals,
            trend=args.trend,
            kind=args.search,
            n_bootstrap=args.bootstrap,
            rng=args.seed,
        )
    except ValueError as exc:
        raise OptionError(str(exc)) from None
    print(result.table())
    path = save_figure(plot_periodograms(result), f"{args.out}/periodogram.{args.format}")
    print(f"figure: {path}")
    return 0


def _add_periodogram(sub) -> argparse.ArgumentParser:
    p = _subcommand(sub, "periodogram",
                    "search for periodic signals (iterative, with false-alarm levels)",
                    "Generalized Lomb-Scargle periodograms of the velocities and of the "
                    "residuals after each signal found, Baluev false-alarm probabilities, the "
                    "spectral window and alias flags.", _run_periodogram)  # fmt: skip
    _add_files(p)
    options.add_arguments(p, "periodogram")
    return p


def _analyze_options(args: argparse.Namespace, command: str, **fixed):
    """AnalyzeOptions from the parsed arguments of ``command`` (``fixed`` sets the
    options the command does not take)."""
    from rvkep.pipeline import AnalyzeOptions

    given = {o.name: getattr(args, o.name) for o in options.python_options(command)}
    line = " ".join(["rvkep", *map(shlex.quote, getattr(args, "argv", []))])
    return AnalyzeOptions(**{**given, **fixed}, command=line)


def _run_analyze(args: argparse.Namespace) -> int:
    from rvkep.pipeline import analyze

    analyze(args.files, _analyze_options(args, "analyze"))
    return 0


def _add_analyze(sub) -> argparse.ArgumentParser:
    p = _subcommand(sub, "analyze",
                    "the whole job: search, fit, sample, derive masses; tables and figures",
                    "Read and validate the data, search for signals, decide the number of "
                    "companions, fit, sample the posterior to convergence, derive minimum "
                    "masses and orbit sizes, and write results.json, summary.md, LaTeX/CSV "
                    "tables, samples and figures.", _run_analyze)  # fmt: skip
    _add_files(p, required=False)
    options.add_arguments(p, "analyze")
    return p


def _run_demo(args: argparse.Namespace) -> int:
    from rvkep.errors import DataError
    from rvkep.pipeline import analyze

    folder = demo_folder()
    if not (folder / "truth.json").exists():
        raise DataError(f"{folder}: demo data missing from this installation of rvkep")
    files = demo_files()
    truth = json.loads((folder / "truth.json").read_text())
    if args.star_mass is None:
        args.star_mass = truth["star"]["mass_msun"]
        args.star_mass_err = truth["star"]["mass_err_msun"]
    args.star_name = args.star_name or truth["star"].get("name", "Veyla")
    if not args.quiet:
        print(
            "demo: the invented star Veyla, seen by two invented spectrographs "
            f"(kestrel, osprey); truth in {folder / 'truth.json'}"
        )
    analyze(files, _analyze_options(args, "demo"))
    if not args.quiet:
        print(f"open {args.out}/report.html in a browser (or summary.md and the figures)")
    return 0


def demo_folder():
    """The bundled demo star's folder (package data, present in any install)."""
    from pathlib import Path

    return Path(__file__).resolve().parent / "demo_data"


def demo_files() -> list[str]:
    """The bundled demo star's two velocity files (kestrel.txt, osprey.csv), as paths
    that exist in any installation: ``rvkep.analyze(rvkep.demo_files(), ...)``."""
    folder = demo_folder()
    return [str(folder / "kestrel.txt"), str(folder / "osprey.csv")]


def _demo_star_text() -> str:
    try:
        star = json.loads((demo_folder() / "truth.json").read_text())["star"]
        return f"the demo star's, {star['mass_msun']:g} +- {star['mass_err_msun']:g}"
    except (OSError, ValueError, KeyError):
        return "the demo star's"


def _add_demo(sub) -> argparse.ArgumentParser:
    p = _subcommand(sub, "demo", "run analyze on the bundled demo star",
                    "Run the whole job on the bundled invented demo star.", _run_demo)
    options.add_arguments(p, "demo", shown_defaults={"star_mass": _demo_star_text(),
                                                     "seed": "0"})  # fmt: skip
    return p


def _run_sample(args: argparse.Namespace) -> int:
    from rvkep.errors import OptionError
    from rvkep.modelfile import read_model_file
    from rvkep.pipeline import analyze

    spec = read_model_file(args.model)
    if not spec.companions:
        raise OptionError(f"{args.model}: no [[companion]] table; rvkep sample fits the "
                          "companions a model file describes (rvkep analyze --model "
                          f"{args.model} searches for them)")  # fmt: skip
    analyze(args.files, _analyze_options(args, "sample", model=args.model, trend=0))
    return 0


def _add_sample(sub) -> argparse.ArgumentParser:
    p = _subcommand(sub, "sample", "sample the posterior of a hand-written model file",
                    "Best fit and posterior sampling of the companions a model file "
                    "describes (no search decides their number); same outputs as analyze.",
                    _run_sample)  # fmt: skip
    p.add_argument("model", metavar="MODEL.toml")
    p.add_argument("files", nargs="*", metavar="DATA", help="RV tables (default: the model's)")
    options.add_arguments(p, "sample")
    return p


def _run_batch(args: argparse.Namespace) -> int:
    from rvkep.batch import run_batch

    try:
        infos = run_batch(args.targets, args.out, workers=args.workers,
                          scheduler=args.scheduler, seed=args.seed, quiet=args.quiet,
                          quick=args.quick)  # fmt: skip
    except KeyboardInterrupt:
        print(f"rvkep batch: interrupted; what finished is in {args.out}/summary.csv "
              "(run the same command again to go on)", file=sys.stderr)  # fmt: skip
        return 130
    failed = [n for n, i in infos.items() if i["status"] == "failed"]
    if not args.quiet:
        done = sum(i["status"] in ("done", "skipped") for i in infos.values())
        print(f"{done} of {len(infos)} target(s) complete, {len(failed)} failed; "
              f"summary: {args.out}/summary.csv")  # fmt: skip
    if failed:
        print(f"rvkep batch: {len(failed)} target(s) failed: {', '.join(failed[:5])}"
              + (" ..." if len(failed) > 5 else ""), file=sys.stderr)  # fmt: skip
        return BATCH_FAILED_EXIT
    return 0


def _add_batch(sub) -> argparse.ArgumentParser:
    optional = ", ".join(o.name for o in options.columns()
                         if o.name not in options.TARGET_REQUIRED)  # fmt: skip
    p = _subcommand(sub, "batch",
                    "run the whole job over a target list (local processes or a Dask cluster)",
                    "Run analyze for every target of a CSV list into DIR/<name>/, skipping "
                    "complete targets, and write DIR/summary.csv. Columns: "
                    f"{', '.join(options.TARGET_REQUIRED)} (required); optional, one per "
                    f"analyze option (an empty cell keeps the default): {optional}.",
                    _run_batch)  # fmt: skip
    p.add_argument("targets", metavar="TARGETS.csv")
    options.add_arguments(p, "batch")
    return p


#: The most prediction times one command writes (a year at 1-minute steps).
MAX_PREDICT_TIMES = 600_000
#: The largest time a prediction or an event list takes, in days (any JD is below it).
MAX_TIME = 1e8


def _time_value(text: str, where: str):
    """A time as given: a number in the data's system, or an ISO calendar date (kept
    as text until the run's time system is known)."""
    from rvkep.errors import OptionError
    from rvkep.timeconv import looks_like_date

    text = text.strip()
    if looks_like_date(text):
        return text
    try:
        value = float(text)
    except ValueError:
        raise OptionError(f"{where}: {text[:40]!r} is neither a time in the data's system nor "
                          "an ISO date (YYYY-MM-DD[THH:MM[:SS]], UTC)") from None  # fmt: skip
    if not (math.isfinite(value) and abs(value) <= MAX_TIME):
        raise OptionError(f"{where}: {text[:40]!r} is not a time (a finite number of days, "
                          f"at most {MAX_TIME:.0e} in size)")  # fmt: skip
    return value


def _to_data_times(values: list, args: argparse.Namespace, data_time) -> tuple:
    """Numbers as they are; calendar dates (UTC) as BJD_TDB minus the data's offset.
    Returns (times, a phrase for the output's header)."""
    import numpy as np

    from rvkep.timeconv import check_request, data_offset, dates_to_bjd_tdb, parse_site

    dates = [v for v in values if isinstance(v, str)]
    if not dates:
        return np.array(values, float), ""
    site = parse_site(args.site) if args.site is not None else None
    check_request(dates, args.ra, args.dec, site)
    if data_time is None:  # the run's time system is not known yet: converted later
        return None, ""
    offset = data_offset(data_time, args.time_offset)
    bjd = iter(dates_to_bjd_tdb(dates, args.ra, args.dec, site) - offset)
    out = np.array([next(bjd) if isinstance(v, str) else v for v in values], float)
    note = (
        f"; calendar dates (UTC) converted to BJD_TDB toward RA {args.ra:g}, Dec "
        f"{args.dec:g} from {args.site}"
    )
    note += f", minus {offset:g}" if offset else ""
    return out, note


def _prediction_times(args: argparse.Namespace, data_time=None):
    """The times of ``rvkep predict``: one per line of --times FILE (``#`` comments),
    or --from/--to with --step; numbers in the data's own time system, or ISO dates
    (UTC; with --ra, --dec and --site, converted to BJD_TDB). Returns (times, note)."""
    import numpy as np

    from rvkep.errors import OptionError

    if (args.times is None) == (args.start is None):
        raise OptionError("give either --times FILE or --from T --to T [--step D]")
    if args.times is not None:
        values = []
        from rvkep.inputs import read_text

        lines = read_text(args.times, OptionError, "a list of times").splitlines()
        for k, line in enumerate(lines, 1):
            cell = line.split("#", 1)[0].strip()
            if cell:
                values.append(_time_value(cell, f"{args.times}, line {k}"))
        t, note = _to_data_times(values, args, data_time)
        if t is None:
            return None, ""
    else:
        given = [_time_value(args.start, "--from"), _time_value(args.end or "", "--to")]
        ends, note = _to_data_times(given, args, data_time)
        if ends is None:
            return None, ""
        start, end = ends
        if not end > start or not args.step > 0:
            raise OptionError("--from T --to T needs T(to) > T(from) and a positive --step")
        if all(isinstance(v, str) for v in given):  # between two dates: steps of UTC days
            t = _to_data_times(_utc_steps(given[0], given[1], args.step), args, data_time)[0]
        else:
            n = _step_count(end - start, args.step)
            t = start + args.step * np.arange(n)
    if t.size == 0 or not np.all(np.isfinite(t)):
        raise OptionError("no finite prediction times given")
    if t.size > MAX_PREDICT_TIMES:
        raise OptionError(f"{t.size:,} times: more than {MAX_PREDICT_TIMES:,}")
    return t, note


def _utc_steps(first: str, last: str, step: float) -> list[str]:
    """ISO instants from ``first`` to ``last`` (UTC dates) every ``step`` days of UTC,
    so that a daily grid keeps its clock time whatever the light time does."""
    import numpy as np
    from astropy.time import Time

    from rvkep.timeconv import offline_astropy

    with offline_astropy():
        a, b = (Time(x, format="isot", scale="utc").jd for x in (first, last))
        n = _step_count(b - a, step)
        return list(Time(a + step * np.arange(n), format="jd", scale="utc").isot)


def _step_count(span: float, step: float) -> int:
    """How many times from a start to ``span`` after it every ``step`` (both ends in),
    refused beyond MAX_PREDICT_TIMES."""
    from rvkep.errors import OptionError

    n = int(span / step + 1e-9) + 1
    if n > MAX_PREDICT_TIMES:
        raise OptionError(f"{n:,} times: more than {MAX_PREDICT_TIMES:,}; raise --step")
    return n


def _write_csv(out: str | None, comment: str, fields: list[str], rows: list[dict]) -> None:
    """The CSV of :func:`rvkep.outputs.write_csv` to ``out``, or to standard output."""
    from rvkep.outputs import check_output_file, write_csv

    if out:
        check_output_file(out)

    write_csv(out, comment, fields, rows, stream=sys.stdout)


def _run_predict(args: argparse.Namespace) -> int:
    from rvkep.errors import OptionError
    from rvkep.results import Results

    t, note = _prediction_times(args)  # checked before the run is read (dates: later)
    res = Results.load(args.run_dir)
    if t is None:
        t, note = _prediction_times(args, res.data.time)
    if args.instrument is not None and args.instrument not in res.instrument_names:
        raise OptionError(f"--instrument {args.instrument!r}: the run's instruments are "
                          f"{', '.join(res.instrument_names)}")  # fmt: skip
    pred = res.predict(t, instrument=args.instrument, draws=args.draws, rng=args.seed)
    rows = pred.rows()
    _write_csv(args.out, f"rvkep predict: {args.run_dir} ({res.run_label()}); times in the "
               f"data's system{note}; velocities in m/s; intervals 68.27% and 95.45%",
               list(rows[0]), rows)  # fmt: skip
    return 0


def _add_predict(sub) -> argparse.ArgumentParser:
    p = _subcommand(sub, "predict", "posterior predictions of a finished run at chosen times (CSV)",
                    "Read a finished run (results.json, samples.npz, data.csv) and write, "
                    "for every time, the median and 68%/95% intervals of the total reflex "
                    "velocity (companions and trend), of each companion, and with --instrument "
                    "of what that instrument should measure (its offset, jitter and typical "
                    "error folded in).", _run_predict)  # fmt: skip
    p.add_argument("run_dir", metavar="RUN_DIR")
    options.add_arguments(p, "predict")
    return p


def _run_events(args: argparse.Namespace) -> int:
    from rvkep.errors import OptionError
    from rvkep.results import Results

    res = Results.load(args.run_dir)
    given = [_time_value(args.start, "--from"), _time_value(args.end, "--to")]
    (start, end), note = _to_data_times(given, args, res.data.time)
    if not end > start:
        raise OptionError("--from T --to T needs T(to) > T(from)")
    if not res.labels:
        raise OptionError(f"{args.run_dir}: the run has no companion, so no orbital events")
    try:
        rows = res.events(start, end)
    except ValueError as exc:
        raise OptionError(str(exc)) from None
    fields = ["companion", "event", "time_median", "time_lo68", "time_hi68", "time_lo95",
              "time_hi95", "transit_probability"]  # fmt: skip
    dyn = f"; {res.dynamics_note}" if res.dynamics_note else ""
    _write_csv(args.out, f"rvkep events: {args.run_dir} ({res.run_label()}); times in the "
               f"data's system{note}; intervals 68.27% and 95.45% over the posterior{dyn}",
               fields, rows)  # fmt: skip
    return 0


def _add_events(sub) -> argparse.ArgumentParser:
    p = _subcommand(sub, "events",
                    "conjunctions, periastron passages and quadratures of a finished run (CSV)",
                    "Read a finished run and list, for each companion, every conjunction "
                    "(transit, if the inclination allows), opposition, periastron and the two "
                    "quadratures between two times, each with its median time and 68%/95% "
                    "intervals from the posterior samples, and the a priori transit "
                    "probability beside each conjunction when the stellar radius is known.",
                    _run_events)  # fmt: skip
    p.add_argument("run_dir", metavar="RUN_DIR")
    options.add_arguments(p, "events")
    return p


def _run_plan(args: argparse.Namespace) -> int:
    from pathlib import Path

    from rvkep.results import Results
    from rvkep.timeconv import parse_site

    site = parse_site(args.site)
    res = Results.load(args.run_dir)
    plan = res.plan(site=site, ra=args.ra, dec=args.dec, start=args.start, nights=args.nights,
                    per_night=args.per_night, count=args.epochs, max_airmass=args.max_airmass,
                    aim=args.aim, instrument=args.instrument, time_offset=args.time_offset,
                    step_minutes=args.step, rng=args.seed)  # fmt: skip
    rows = plan.rows()
    now, after = plan.aim_sd
    gain = "" if plan.aim == "all" else f"; sd of {plan.aim} {now:.4g} now, {after:.4g} after all"
    fields = ["night", "utc", "time", "sun_alt_deg", "target_alt_deg", "airmass",
              "velocity_sd_mps", "score", "rank", "aim_sd_after"]  # fmt: skip
    _write_csv(args.out, f"rvkep plan: {args.run_dir} ({res.run_label()}); score: "
               f"{plan.criterion}; one velocity from {plan.instrument}, noise "
               f"{plan.noise_sd:.3g} m/s{gain}; site {args.site}, RA {args.ra:g}, Dec "
               f"{args.dec:g}, Sun below {plan.grid.sun_limit:g} deg, airmass <= "
               f"{args.max_airmass:g}; time in the data's system (BJD_TDB minus "
               f"{plan.time_offset:g})" + (f"; {res.dynamics_note}" if res.dynamics_note else ""),
               fields, rows)  # fmt: skip
    figure = args.figure or (str(Path(args.out).with_suffix(".png")) if args.out else None)
    if figure:
        from rvkep import __version__
        from rvkep.outputs import save_figure
        from rvkep.plots import plan_figure

        fig = plan_figure(plan)
        fig.text(0.995, 0.003, f"rvkep {__version__} | {res.run_label()}", ha="right",
                 va="bottom", fontsize=6.5, color="0.45")  # fmt: skip
        save_figure(fig, figure)
    return 0


def _add_plan(sub) -> argparse.ArgumentParser:
    p = _subcommand(sub, "plan",
                    "the nights and times where one more velocity would teach most (CSV, figure)",
                    "Read a finished run and choose observing epochs over a run of nights: "
                    "candidate times are those with the Sun below -12 degrees and the star "
                    "below the airmass limit at the site (astropy, no download); they are "
                    "ranked by the share of the aimed parameter's posterior variance one more "
                    "velocity there would remove (linear-Gaussian update from the posterior "
                    "samples; Loredo 2004, Ford 2008), or with --aim all by the expected "
                    "information gain about the whole orbit, and chosen greedily, each choice "
                    "updating the next.", _run_plan)  # fmt: skip
    p.add_argument("run_dir", metavar="RUN_DIR")
    options.add_arguments(p, "plan")
    return p


def _run_limits(args: argparse.Namespace) -> int:
    from pathlib import Path

    from rvkep.limits import run_limits, setup_from_results, write_limits
    from rvkep.results import Results

    periods, masses = args.periods, args.masses
    res = Results.load(args.run_dir)
    setup = setup_from_results(res, n_injections=args.injections, periods=periods,
                               masses=masses, n_periods=args.grid, n_masses=args.grid,
                               seed=args.seed, fap=args.fap)  # fmt: skip
    out = Path(args.out or args.run_dir)
    if out.resolve() != Path(args.run_dir).resolve():
        import shutil

        from rvkep.outputs import make_output_folder

        make_output_folder(out)
        for name in ("results.json", "summary.md"):
            shutil.copyfile(Path(args.run_dir) / name, out / name)
    limits = run_limits(setup, out, workers=args.workers, scheduler=args.scheduler,
                        quiet=args.quiet)  # fmt: skip
    paths = write_limits(limits, res, out)
    if not args.quiet:
        cells = setup.shape[0] * setup.shape[1]
        print(f"limits: {cells} cells x {setup.n_injections} injections in "
              f"{limits.seconds:.1f} s; wrote {', '.join(str(p) for p in paths)}")  # fmt: skip
    return 0


def _add_limits(sub) -> argparse.ArgumentParser:
    p = _subcommand(sub, "limits", "detection limits of a finished run by injection and recovery",
                    "Inject companions into the residuals of a finished run's chosen model on a "
                    "log-spaced grid of period and M sin i (random phases, eccentricities from "
                    "Beta(0.867, 3.03)), put each through the search's acceptance rule "
                    "(highest periodogram peak above the false-alarm level, within 1% of the "
                    "injected period) and write limits.csv, limits_curves.csv (50% and 95% "
                    "completeness) and limits.png. Period rows run on local processes or a "
                    "Dask cluster; a killed run resumes.", _run_limits)  # fmt: skip
    p.add_argument("run_dir", metavar="RUN_DIR")
    options.add_arguments(p, "limits")
    return p


def _run_report(args: argparse.Namespace) -> int:
    from rvkep.results import Results

    res = Results.load(args.run_dir)
    path = res.write_report(args.run_dir)
    if not args.quiet:
        print(f"page: {path}")
    return 0


def _add_report(sub) -> argparse.ArgumentParser:
    p = _subcommand(sub, "page", "write report.html for a finished run (one self-contained page)",
                    "Read a finished run and write RUN_DIR/report.html: the verdict, the "
                    "warnings, the figures found in the folder (embedded), the parameter table, "
                    "instruments, comparisons, search, sampler, priors, detection limits and "
                    "how to make the run again, in one file with no outside requests.",
                    _run_report)  # fmt: skip
    p.add_argument("run_dir", metavar="RUN_DIR")
    options.add_arguments(p, "page")
    return p


def _run_stability(args: argparse.Namespace) -> int:
    from rvkep.chaos import run_stability

    out = run_stability(args.run_dir, draws=args.draws, orbits=args.orbits,
                        workers=args.workers, scheduler=args.scheduler, seed=args.seed,
                        quiet=args.quiet)  # fmt: skip
    if not args.quiet:
        frac = out["fraction_regular"]
        print(f"{out['draws']} draws over {out['orbits_of_outermost']:g} outer orbits: "
              f"{frac:.0%} regular (MEGNO <= {out['regular_if_megno_at_most']}), median MEGNO "
              f"{out['megno_median']:.3g}; wrote {args.run_dir}/stability.json and "
              "stability.csv")  # fmt: skip
    return 0


def _add_stability(sub) -> argparse.ArgumentParser:
    p = _subcommand(sub, "stability", "integrate posterior draws of a finished run and measure "
                    "their chaos (MEGNO)", "Integrate posterior draws of a finished "
                    "multi-companion run with REBOUND (the dynamics extra) for a number of "
                    "outer orbits, with the MEGNO chaos indicator (Cincotta & Simo 2000): "
                    "about 2 for a regular system, growing for a chaotic one. Writes "
                    "stability.json and stability.csv into RUN_DIR; draws run on local "
                    "processes or a Dask cluster.", _run_stability)  # fmt: skip
    p.add_argument("run_dir", metavar="RUN_DIR")
    options.add_arguments(p, "stability")
    return p


def _run_population(args: argparse.Namespace) -> int:
    from rvkep.hierarchy import run_population

    run_population(args.batch_dir, args.out, period_range=args.period_range,
                   mass_range=args.mass_range, seed=args.seed,
                   include_quick=args.include_quick, quiet=args.quiet)  # fmt: skip
    return 0


def _add_population(sub) -> argparse.ArgumentParser:
    p = _subcommand(sub, "population", "from a batch's stars to a population: eccentricities "
                    "and occurrence", "Read every finished target of a batch folder and infer "
                    "the eccentricity distribution (importance reweighting of each star's "
                    "samples with its prior divided out, Hogg, Myers & Bovy 2010: a Beta "
                    "population and a histogram) and the fraction of stars with a companion "
                    "in a period x m sin i box, each star's completeness from its rvkep "
                    "limits output; write population.json, population.md and figures.",
                    _run_population)  # fmt: skip
    p.add_argument("batch_dir", metavar="BATCH_DIR")
    options.add_arguments(p, "population")
    return p


# each entry adds one subcommand: add(subparsers) -> None, setting defaults(run=...)
_SUBCOMMANDS: list = [
    _add_check, _add_periodogram, _add_analyze, _add_demo, _add_sample, _add_batch,
    _add_predict, _add_events, _add_plan, _add_limits, _add_report, _add_population,
    _add_stability,
]  # fmt: skip


#: Failures of the machine rather than of rvkep (a full disk, a quota, a read-only or
#: failing file system): one line and exit status 2, like a bad input.
_MACHINE_ERRORS = {
    getattr(errno, name) for name in ("ENOSPC", "EDQUOT", "EFBIG", "EROFS", "EACCES", "EIO",
                                      "EPERM", "ENAMETOOLONG") if hasattr(errno, name)
}  # fmt: skip


#: Where each subcommand writes: options naming a file, options naming a folder. Both
#: are checked before any work (rvkep.outputs): a file's folder must exist, a folder must
#: be new (its parent existing), empty, or one rvkep wrote.
_FILE_OPTIONS = {"predict": ("out",), "events": ("out",), "plan": ("out", "figure")}
_FOLDER_OPTIONS = {"analyze": "out", "demo": "out", "sample": "out", "batch": "out",
                   "limits": "out", "population": "out"}  # fmt: skip


def _check_outputs(args: argparse.Namespace) -> None:
    from rvkep.outputs import check_output_file, check_output_folder

    for name in _FILE_OPTIONS.get(args.command, ()):
        if getattr(args, name, None):
            check_output_file(getattr(args, name), "--" + name)
    name = _FOLDER_OPTIONS.get(args.command)
    if name and getattr(args, name, None):
        check_output_folder(getattr(args, name), "--" + name)
    if args.command == "periodogram":  # one figure, into a folder made if its parent exists
        from pathlib import Path

        out = Path(args.out)
        check_output_file(out / "periodogram.png" if out.is_dir() else out, "--out")


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point of the ``rvkep`` console script; returns the exit status."""
    parser = build_parser()
    argv = list(sys.argv[1:] if argv is None else argv)
    try:
        args, extras = parser.parse_known_args(argv)
        if extras:  # named by the subcommand, with a close match
            sub = parser.subcommands.get(getattr(args, "command", None) or "", parser)
            sub.error(sub.unknown(extras))
    except SystemExit as exc:  # --help, --version (0) or a usage error (2, one line said)
        return int(exc.code or 0)
    args.argv = argv
    if not getattr(args, "run", None):
        parser.print_help(sys.stderr)
        print("rvkep: error: name a command (rvkep demo runs the bundled example)",
              file=sys.stderr)  # fmt: skip
        return 2
    try:
        _check_outputs(args)
        return int(args.run(args) or 0)
    except RvkepError as exc:
        print(f"rvkep {args.command}: error: {exc}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print(f"rvkep {args.command}: interrupted", file=sys.stderr)
        return 130
    except BrokenPipeError:  # output piped into a program that stopped reading
        import os

        os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())
        return 0
    except OSError as exc:
        if exc.errno not in _MACHINE_ERRORS:
            raise
        where = f"{exc.filename}: " if exc.filename else ""
        print(f"rvkep {args.command}: error: {where}{exc.strerror or exc}", file=sys.stderr)
        return 2


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
