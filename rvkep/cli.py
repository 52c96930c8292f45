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
import shlex
import sys
from collections.abc import Sequence

from rvkep import __version__
from rvkep.errors import RvkepError

__all__ = ["main", "build_parser", "BATCH_FAILED_EXIT", "demo_folder"]

#: Exit status of ``rvkep batch`` when one or more targets failed (the others ran and
#: the summary was written). 2 stays "a usage or input error", 130 "interrupted".
BATCH_FAILED_EXIT = 3


def build_parser() -> argparse.ArgumentParser:
    """The argument parser with every subcommand."""
    parser = argparse.ArgumentParser(
        prog="rvkep",
        description=(
            "Find, fit and sample Keplerian orbits in stellar radial-velocity data "
            "from one or several spectrographs."
        ),
    )
    parser.add_argument("--version", action="version", version=f"rvkep {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    for add in _SUBCOMMANDS:
        add(sub)
    return parser


def _add_data_args(p: argparse.ArgumentParser) -> None:
    p.add_argument(
        "files",
        nargs="+",
        metavar="FILE",
        help="RV tables (one per instrument, or with an instrument column)",
    )
    p.add_argument("--kms", action="store_true", help="velocities and errors are in km/s")
    _add_bin_arg(p)


def _add_bin_arg(p: argparse.ArgumentParser) -> None:
    p.add_argument(
        "--bin",
        type=float,
        default=None,
        metavar="DAYS",
        help="average each instrument's points in bins DAYS wide first (weighted by 1/err^2; "
        "needed above 20,000 points)",
    )


def _load(args: argparse.Namespace):
    """Read the data files, printing unit warnings as one line each."""
    import warnings

    from rvkep.data import DataWarning, load_rv

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


def _add_check(sub) -> None:
    p = sub.add_parser(
        "check",
        help="read and validate RV files, print a summary",
        description="Read and validate RV files; print per instrument the "
        "number of points, time span, median error and RMS.",
    )
    _add_data_args(p)
    p.set_defaults(run=_run_check)


def _run_periodogram(args: argparse.Namespace) -> int:
    from rvkep.errors import OptionError

    data = _load(args)
    from rvkep.data import check_size
    from rvkep.outputs import save_figure
    from rvkep.plots import plot_periodograms

    check_size(data)
    from rvkep.pipeline import check_bootstrap
    from rvkep.search import search

    check_bootstrap(args.bootstrap)

    try:
        result = search(
            data,
            min_period=args.min_period,
            max_period=args.max_period,
            fap_threshold=args.fap,
            max_signals=args.max_signals,
            trend=args.trend,
            kind=args.kind,
            n_bootstrap=args.bootstrap,
            rng=args.seed,
        )
    except ValueError as exc:
        raise OptionError(str(exc)) from None
    print(result.table())
    path = save_figure(plot_periodograms(result), f"{args.out}/periodogram.{args.format}")
    print(f"figure: {path}")
    return 0


def _add_periodogram(sub) -> None:
    p = sub.add_parser(
        "periodogram",
        help="search for periodic signals (iterative, with false-alarm levels)",
        description="Generalized Lomb-Scargle periodograms of the velocities and of the "
        "residuals after each signal found, Baluev false-alarm probabilities, the "
        "spectral window and alias flags.",
    )
    _add_data_args(p)
    _add_search_args(p)
    _add_trend_arg(p, auto=False)
    p.add_argument("--max-signals", type=int, default=5, help="most signals to look for")
    p.add_argument("--kind", default="sine", choices=("sine", "keplerian", "auto"),
                   help="sine (generalized Lomb-Scargle, Baluev false alarms; default), "
                   "keplerian (one eccentric orbit per period, bootstrap-calibrated false "
                   "alarms) or auto (sine, checked by the Keplerian periodogram)")  # fmt: skip
    _add_bootstrap_arg(p)
    p.add_argument("--seed", type=int, default=0, help="seed of the bootstrap redraws")
    p.add_argument("--out", default=".", metavar="DIR", help="folder for the figure")
    p.set_defaults(run=_run_periodogram)


def _add_bootstrap_arg(p: argparse.ArgumentParser) -> None:
    p.add_argument("--bootstrap", type=int, default=None, metavar="N",
                   help="redraws calibrating the Keplerian periodogram's false-alarm "
                   "probability (default 50, at least 10)")  # fmt: skip


def _add_search_args(p: argparse.ArgumentParser) -> None:
    """Options shared by the commands that search: period range, FAP, trend, format."""
    p.add_argument(
        "--min-period",
        type=float,
        default=None,
        metavar="DAYS",
        help="shortest period searched (default 1.2 d)",
    )
    p.add_argument(
        "--max-period",
        type=float,
        default=None,
        metavar="DAYS",
        help="longest period searched (default: the time span)",
    )
    p.add_argument(
        "--fap",
        type=float,
        default=1e-3,
        help="false-alarm probability below which a peak counts (default 0.001)",
    )
    p.add_argument("--format", default="png", choices=("png", "pdf"), help="figure format")


def _trend_value(text: str):
    from rvkep.defaults import parse_trend

    try:
        return parse_trend(text)
    except ValueError as exc:
        raise argparse.ArgumentTypeError(str(exc)) from None


def _add_trend_arg(p: argparse.ArgumentParser, auto: bool) -> None:
    if auto:
        p.add_argument(
            "--trend", type=_trend_value, default="auto", metavar="auto|0|1|2",
            help="polynomial trend degree; auto (default) lets 0, 1 and 2 compete by BIC "
            "like the companions (a model file's [trend] fixes it)",
        )  # fmt: skip
    else:
        p.add_argument(
            "--trend", type=int, default=0, choices=(0, 1, 2),
            help="polynomial trend degree fitted along the search (default 0)",
        )  # fmt: skip


def _add_noise_arg(p: argparse.ArgumentParser) -> None:
    p.add_argument(
        "--noise", default=None, metavar="white|gp",
        help="noise model: white (independent errors plus a jitter per instrument; the "
        "default) or gp (stellar activity as a quasi-periodic Gaussian process shared by "
        "the instruments, beside their jitters); default: the model file's [noise], else white",
    )  # fmt: skip


def _columns(text: str) -> tuple[str, ...]:
    names = tuple(c.strip() for c in text.split(","))
    if not all(names):
        raise argparse.ArgumentTypeError(f"need column names separated by commas, got {text!r}")
    return names


def _add_decorrelate_arg(p: argparse.ArgumentParser) -> None:
    p.add_argument(
        "--decorrelate", type=_columns, default=(), metavar="COL[,COL...]",
        help="decorrelate the velocities against these extra data columns (activity "
        "indicators such as fwhm,bis): one linear coefficient per column and instrument, "
        "marginalized like the offsets",
    )  # fmt: skip


def _add_evidence_args(p: argparse.ArgumentParser, choose: bool = True) -> None:
    p.add_argument(
        "--sampler", default="emcee", choices=("emcee", "nested"),
        help="the posterior's sampler: emcee (MCMC, default) or nested (dynesty; weighted "
        "samples and the evidence)",
    )  # fmt: skip
    p.add_argument(
        "--evidence", action="store_true",
        help="compute ln Z by nested sampling for the chosen number of companions and for "
        "one fewer and one more (results.json 'evidence')",
    )  # fmt: skip
    p.add_argument(
        "--circular", default="no", choices=("no", "auto"),
        help="auto: refit with a circular orbit every companion whose eccentricity is "
        "consistent with zero (Lucy & Sweeney p >= 0.05) and sample again",
    )  # fmt: skip
    if choose:
        p.add_argument(
            "--choose-by", default="bic", choices=("bic", "evidence"),
            help="choose the number of companions by BIC (default) or by evidence (a "
            "larger number must raise ln Z by more than 5; nested runs for every number)",
        )  # fmt: skip


def _add_figures_arg(p: argparse.ArgumentParser) -> None:
    p.add_argument("--figures", default="all", choices=("all", "summary", "none"),
                   help="all (default), summary (time series and phase curves: no corner "
                   "plots or periodograms) or none")  # fmt: skip


def _analyze_options(args: argparse.Namespace, out: str):
    from rvkep.pipeline import AnalyzeOptions

    return AnalyzeOptions(
        star_mass=args.star_mass,
        star_mass_err=args.star_mass_err,
        star_radius=getattr(args, "star_radius", None),
        star_radius_err=getattr(args, "star_radius_err", 0.0),
        star_teff=getattr(args, "star_teff", None),
        star_teff_err=getattr(args, "star_teff_err", 0.0),
        kms=getattr(args, "kms", False),
        planets=args.planets,
        max_planets=args.max_planets,
        model_file=getattr(args, "model", None),
        out=out,
        seed=args.seed,
        quiet=args.quiet,
        quick=args.quick,
        min_period=args.min_period,
        max_period=args.max_period,
        fap=args.fap,
        trend=args.trend,
        fig_format=args.format,
        max_steps=args.max_steps,
        bin_days=getattr(args, "bin", None),
        noise=getattr(args, "noise", None),
        decorrelate=getattr(args, "decorrelate", ()),
        sampler=getattr(args, "sampler", "emcee"),
        evidence=getattr(args, "evidence", False),
        choose_by=getattr(args, "choose_by", "bic"),
        circular=getattr(args, "circular", "no"),
        timings=getattr(args, "timings", False),
        figures=getattr(args, "figures", "all"),
        search=getattr(args, "search", "auto"),
        command=" ".join(["rvkep", *map(shlex.quote, getattr(args, "argv", []))]),
        bootstrap=getattr(args, "bootstrap", None),
    )


def _add_analysis_args(p: argparse.ArgumentParser, default_out: str) -> None:
    p.add_argument(
        "--star-mass",
        type=float,
        default=None,
        metavar="M",
        help="stellar mass in solar masses (default: the model file, else 1)",
    )
    p.add_argument(
        "--star-mass-err",
        type=float,
        default=0.0,
        metavar="S",
        help="its 1-sigma error, carried into every derived quantity",
    )
    p.add_argument(
        "--star-radius",
        type=float,
        default=None,
        metavar="R",
        help="stellar radius in solar radii (adds the transit probability)",
    )
    p.add_argument("--star-radius-err", type=float, default=0.0, metavar="S")
    p.add_argument(
        "--star-teff",
        type=float,
        default=None,
        metavar="T",
        help="effective temperature in K (adds T_eq and insolation; needs R)",
    )
    p.add_argument("--star-teff-err", type=float, default=0.0, metavar="S")
    group = p.add_mutually_exclusive_group()
    group.add_argument(
        "--planets", type=int, default=None, metavar="N", help="fit exactly N companions"
    )
    group.add_argument(
        "--max-planets",
        type=int,
        default=4,
        metavar="N",
        help="look for at most N companions (default 4)",
    )
    p.add_argument(
        "--out", default=default_out, metavar="DIR", help=f"output folder (default {default_out})"
    )
    p.add_argument(
        "--seed",
        type=int,
        default=None,
        help="random seed (default 0, or the model file's); results reproduce",
    )
    p.add_argument("--quiet", action="store_true", help="no progress bar or messages")
    p.add_argument("--timings", action="store_true",
                   help="print the seconds each stage took (always in results.json)")  # fmt: skip
    _add_figures_arg(p)
    p.add_argument(
        "--quick",
        action="store_true",
        help="short chains for a preview or tests (flagged in every output)",
    )
    _add_search_args(p)
    p.add_argument("--search", default="auto", choices=("sine", "keplerian", "auto"),
                   help="the search's periodogram: auto (default: sine, checked by the "
                   "Keplerian periodogram when an orbit comes out eccentric and when the "
                   "sine search stops), sine, or keplerian (every step)")  # fmt: skip
    _add_bootstrap_arg(p)
    _add_trend_arg(p, auto=True)
    _add_noise_arg(p)
    _add_decorrelate_arg(p)
    _add_evidence_args(p)
    p.add_argument("--max-steps", type=int, default=None, help="cap on sampler steps")


def _run_analyze(args: argparse.Namespace) -> int:
    from rvkep.pipeline import analyze

    analyze(args.files, _analyze_options(args, args.out))
    return 0


def _add_analyze(sub) -> None:
    p = sub.add_parser(
        "analyze",
        help="the whole job: search, fit, sample, derive masses; tables and figures",
        description="Read and validate the data, search for signals, decide the number of "
        "companions, fit, sample the posterior to convergence, derive minimum masses and "
        "orbit sizes, and write results.json, summary.md, LaTeX/CSV tables, samples and "
        "figures.",
    )
    p.add_argument("files", nargs="*", metavar="FILE", help="RV tables (or give them in --model)")
    p.add_argument("--kms", action="store_true", help="velocities and errors are in km/s")
    p.add_argument("--model", default=None, metavar="MODEL.toml", help="a model file")
    _add_bin_arg(p)
    _add_analysis_args(p, "rvkep_output")
    p.set_defaults(run=_run_analyze)


def _run_demo(args: argparse.Namespace) -> int:

    from rvkep.errors import DataError
    from rvkep.pipeline import analyze

    folder = demo_folder()
    if not (folder / "truth.json").exists():
        raise DataError(f"{folder}: demo data missing from this installation of rvkep")
    files = [str(folder / "kestrel.txt"), str(folder / "osprey.csv")]
    if args.star_mass is None:
        truth = json.loads((folder / "truth.json").read_text())
        args.star_mass = truth["star"]["mass_msun"]
        args.star_mass_err = truth["star"]["mass_err_msun"]
    if not args.quiet:
        print(
            "demo: the invented star Veyla, seen by two invented spectrographs "
            f"(kestrel, osprey); truth in {folder / 'truth.json'}"
        )
    analyze(files, _analyze_options(args, args.out))
    if not args.quiet:
        print(f"open {args.out}/report.html in a browser (or summary.md and the figures)")
    return 0


def demo_folder():
    """The bundled demo star's folder (package data, present in any install)."""
    from pathlib import Path

    return Path(__file__).resolve().parent / "demo_data"


def _add_demo(sub) -> None:
    p = sub.add_parser(
        "demo",
        help="run analyze on the bundled demo star",
        description="Run the whole job on the bundled invented demo star.",
    )
    _add_analysis_args(p, "rvkep-demo")
    p.set_defaults(run=_run_demo, kms=False)


def _run_sample(args: argparse.Namespace) -> int:
    args.planets, args.max_planets = None, 4
    args.min_period = args.max_period = None
    args.fap, args.trend, args.quick = 1e-3, 0, False  # the model file says; else none
    args.star_mass, args.star_mass_err = None, 0.0
    from rvkep.pipeline import analyze

    analyze(args.files, _analyze_options(args, args.out))
    return 0


def _add_sample(sub) -> None:
    p = sub.add_parser(
        "sample",
        help="sample the posterior of a hand-written model file",
        description="Best fit and posterior sampling of the companions a model file "
        "describes (no search decides their number); same outputs as analyze.",
    )
    p.add_argument("model", metavar="MODEL.toml")
    p.add_argument("files", nargs="*", metavar="DATA", help="RV tables (default: the model's)")
    p.add_argument("--kms", action="store_true", help="velocities and errors are in km/s")
    _add_bin_arg(p)
    p.add_argument("--out", required=True, metavar="DIR")
    p.add_argument("--seed", type=int, default=None, help="default: the model file's, else 0")
    p.add_argument("--max-steps", type=int, default=None, help="default: the model file's")
    _add_noise_arg(p)
    _add_decorrelate_arg(p)
    _add_evidence_args(p, choose=False)
    _add_figures_arg(p)
    p.add_argument("--quiet", action="store_true")
    p.add_argument("--format", default="png", choices=("png", "pdf"))
    p.set_defaults(run=_run_sample)


def _run_batch(args: argparse.Namespace) -> int:
    from rvkep.batch import run_batch

    if args.workers is not None and args.workers < 1:
        from rvkep.errors import OptionError

        raise OptionError("--workers must be at least 1")
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


def _add_batch(sub) -> None:
    p = sub.add_parser(
        "batch",
        help="run the whole job over a target list (local processes or a Dask cluster)",
        description="Run analyze for every target of a CSV list (columns name, data, "
        "star_mass, star_mass_err; optional max_planets, planets, model, kms, trend) into "
        "DIR/<name>/, skipping complete targets, and write DIR/summary.csv.",
    )
    p.add_argument("targets", metavar="TARGETS.csv")
    p.add_argument("--out", required=True, metavar="DIR")
    p.add_argument(
        "--workers",
        type=int,
        default=None,
        help="local worker processes (default: the number of cores)",
    )
    p.add_argument(
        "--scheduler",
        default=None,
        metavar="ADDRESS",
        help="run on an existing Dask cluster, e.g. tcp://10.0.0.5:8786",
    )
    p.add_argument("--seed", type=int, default=0)
    p.add_argument("--quiet", action="store_true")
    p.add_argument("--quick", action="store_true", help="short chains (previews, tests)")
    p.set_defaults(run=_run_batch)


#: The most prediction times one command writes (a year at 1-minute steps).
MAX_PREDICT_TIMES = 600_000


def _time_value(text: str, where: str):
    """A time as given: a number in the data's system, or an ISO calendar date (kept
    as text until the run's time system is known)."""
    from rvkep.errors import OptionError
    from rvkep.timeconv import looks_like_date

    text = text.strip()
    if looks_like_date(text):
        return text
    try:
        return float(text)
    except ValueError:
        raise OptionError(f"{where}: {text!r} is neither a time in the data's system nor an "
                          "ISO date (YYYY-MM-DD[THH:MM[:SS]], UTC)") from None  # fmt: skip


def _add_date_args(p: argparse.ArgumentParser) -> None:
    p.add_argument("--ra", type=float, default=None, metavar="DEG",
                   help="right ascension (ICRS, degrees), for calendar dates")  # fmt: skip
    p.add_argument("--dec", type=float, default=None, metavar="DEG",
                   help="declination (ICRS, degrees), for calendar dates")  # fmt: skip
    p.add_argument("--site", default=None, metavar="LAT,LON,HEIGHT",
                   help="the observatory (degrees north, degrees east, metres): for calendar "
                   "dates")  # fmt: skip
    p.add_argument("--time-offset", type=float, default=None, metavar="D",
                   help="BJD_TDB minus the data's times (needed for calendar dates unless the "
                   "data hold full BJDs)")  # fmt: skip


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
        try:
            lines = open(args.times, encoding="utf-8").read().splitlines()
        except OSError as exc:
            raise OptionError(f"--times {args.times}: cannot read ({exc.strerror})") from None
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
    if args.draws is not None and args.draws < 1:
        raise OptionError("--draws must be at least 1")
    pred = res.predict(t, instrument=args.instrument, draws=args.draws, rng=args.seed)
    rows = pred.rows()
    _write_csv(args.out, f"rvkep predict: {args.run_dir} ({res.run_label()}); times in the "
               f"data's system{note}; velocities in m/s; intervals 68.27% and 95.45%",
               list(rows[0]), rows)  # fmt: skip
    return 0


def _add_predict(sub) -> None:
    p = sub.add_parser(
        "predict",
        help="posterior predictions of a finished run at chosen times (CSV)",
        description="Read a finished run (results.json, samples.npz, data.csv) and write, "
        "for every time, the median and 68%/95% intervals of the total reflex velocity "
        "(companions and trend), of each companion, and with --instrument of what that "
        "instrument should measure (its offset, jitter and typical error folded in).",
    )
    p.add_argument("run_dir", metavar="RUN_DIR")
    p.add_argument("--times", metavar="FILE", help="one time per line, in the data's system")
    p.add_argument("--from", dest="start", metavar="T", help="a time or an ISO date (UTC)")
    p.add_argument("--to", dest="end", metavar="T")
    p.add_argument("--step", type=float, default=1.0, metavar="D", help="days (default 1)")
    _add_date_args(p)
    p.add_argument("--instrument", default=None, metavar="NAME")
    p.add_argument("--draws", type=int, default=None, help="posterior draws (default: all)")
    p.add_argument("--seed", type=int, default=0)
    p.add_argument("--out", default=None, metavar="FILE", help="default: standard output")
    p.set_defaults(run=_run_predict)


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
    _write_csv(args.out, f"rvkep events: {args.run_dir} ({res.run_label()}); times in the "
               f"data's system{note}; intervals 68.27% and 95.45% over the posterior",
               fields, rows)  # fmt: skip
    return 0


def _add_events(sub) -> None:
    p = sub.add_parser(
        "events",
        help="conjunctions, periastron passages and quadratures of a finished run (CSV)",
        description="Read a finished run and list, for each companion, every conjunction "
        "(transit, if the inclination allows), opposition, periastron and the two "
        "quadratures between two times, each with its median time and 68%/95% intervals "
        "from the posterior samples, and the a priori transit probability beside each "
        "conjunction when the stellar radius is known.",
    )
    p.add_argument("run_dir", metavar="RUN_DIR")
    p.add_argument("--from", dest="start", required=True, metavar="T",
                   help="a time in the data's system or an ISO date (UTC)")  # fmt: skip
    p.add_argument("--to", dest="end", required=True, metavar="T")
    _add_date_args(p)
    p.add_argument("--out", default=None, metavar="FILE", help="default: standard output")
    p.set_defaults(run=_run_events)


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
               f"{plan.time_offset:g})",
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


def _add_plan(sub) -> None:
    p = sub.add_parser(
        "plan",
        help="the nights and times where one more velocity would teach most (CSV, figure)",
        description="Read a finished run and choose observing epochs over a run of nights: "
        "candidate times are those with the Sun below -12 degrees and the star below the "
        "airmass limit at the site (astropy, no download); they are ranked by the share of "
        "the aimed parameter's posterior variance one more velocity there would remove "
        "(linear-Gaussian update from the posterior samples; Loredo 2004, Ford 2008), or "
        "with --aim all by the expected information gain about the whole orbit, and chosen "
        "greedily, each choice updating the next.",
    )
    p.add_argument("run_dir", metavar="RUN_DIR")
    p.add_argument("--site", required=True, metavar="LAT,LON,HEIGHT",
                   help="the observatory: degrees north, degrees east, metres (a southern "
                   "site: --site=-30.2,-70.7,2200)")  # fmt: skip
    p.add_argument("--ra", type=float, required=True, metavar="DEG", help="ICRS, degrees")
    p.add_argument("--dec", type=float, required=True, metavar="DEG", help="ICRS, degrees")
    p.add_argument("--start", required=True, metavar="DATE",
                   help="the first night's evening date (YYYY-MM-DD, local)")  # fmt: skip
    p.add_argument("--nights", type=int, required=True, metavar="N")
    p.add_argument("--per-night", type=int, default=1, metavar="K",
                   help="most epochs on one night (default 1)")  # fmt: skip
    p.add_argument("--epochs", type=int, default=None, metavar="N",
                   help="epochs to choose (default: --per-night on every usable "
                   "night)")  # fmt: skip
    p.add_argument("--max-airmass", type=float, default=2.0, metavar="X", help="default 2")
    p.add_argument("--aim", default=None, metavar="PARAM",
                   help="a posterior column such as b.K or c.period, or 'all' (default: the "
                   "least-constrained companion's period or K)")  # fmt: skip
    p.add_argument("--instrument", default=None, metavar="NAME",
                   help="the instrument that will observe (default: the one with most "
                   "points)")  # fmt: skip
    p.add_argument("--time-offset", type=float, default=None, metavar="D",
                   help="BJD_TDB minus the data's times (needed unless the data hold full "
                   "BJDs)")  # fmt: skip
    p.add_argument("--step", type=float, default=10.0, metavar="MIN",
                   help="spacing of candidate times, minutes (default 10)")  # fmt: skip
    p.add_argument("--seed", type=int, default=0, help="chooses the posterior draws")
    p.add_argument("--out", default=None, metavar="FILE", help="CSV (default: standard output)")
    p.add_argument("--figure", default=None, metavar="FILE",
                   help="the score over the window (default: beside --out, as .png)")  # fmt: skip
    p.set_defaults(run=_run_plan)


def _range(text: str | None, option: str) -> tuple[float, float] | None:
    """``MIN:MAX`` as two floats (None for None)."""
    from rvkep.errors import OptionError

    if text is None:
        return None
    try:
        lo, hi = (float(x) for x in text.split(":"))
    except ValueError:
        raise OptionError(f"{option} must be MIN:MAX, got {text!r}") from None
    return lo, hi


def _run_limits(args: argparse.Namespace) -> int:
    from pathlib import Path

    from rvkep.errors import OptionError
    from rvkep.limits import run_limits, setup_from_results, write_limits
    from rvkep.results import Results

    if args.injections < 1 or args.grid < 2 or args.workers < 1:
        raise OptionError("--injections and --workers must be at least 1, --grid at least 2")
    periods = _range(args.periods, "--periods")
    masses = _range(args.masses, "--masses")
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


def _add_limits(sub) -> None:
    p = sub.add_parser(
        "limits",
        help="detection limits of a finished run by injection and recovery",
        description="Inject companions into the residuals of a finished run's chosen model "
        "on a log-spaced grid of period and M sin i (random phases, eccentricities from "
        "Beta(0.867, 3.03)), put each through the search's acceptance rule (highest "
        "periodogram peak above the false-alarm level, within 1%% of the injected period) "
        "and write limits.csv, limits_curves.csv (50%% and 95%% completeness) and "
        "limits.png. Period rows run on local processes or a Dask cluster; a killed run "
        "resumes.",
    )
    p.add_argument("run_dir", metavar="RUN_DIR")
    p.add_argument("--injections", type=int, default=20, metavar="N",
                   help="injections per cell (default 20)")  # fmt: skip
    p.add_argument("--grid", type=int, default=30, metavar="N",
                   help="cells along each axis (default 30)")  # fmt: skip
    p.add_argument("--periods", default=None, metavar="MIN:MAX",
                   help="days (default: the search's range, 1.2 d to the baseline)")  # fmt: skip
    p.add_argument("--masses", default=None, metavar="MIN:MAX",
                   help="M sin i in Earth masses (default: around the white-noise "
                   "limit)")  # fmt: skip
    p.add_argument("--fap", type=float, default=1e-3, help="the search's threshold (0.001)")
    p.add_argument("--workers", type=int, default=1, metavar="N", help="local processes")
    p.add_argument("--scheduler", default=None, metavar="ADDRESS",
                   help="a Dask scheduler (tcp://HOST:PORT) instead of local "
                   "processes")  # fmt: skip
    p.add_argument("--seed", type=int, default=0)
    p.add_argument("--out", default=None, metavar="DIR", help="default: the run's folder")
    p.add_argument("--quiet", action="store_true")
    p.set_defaults(run=_run_limits)


def _run_report(args: argparse.Namespace) -> int:
    from rvkep.results import Results

    res = Results.load(args.run_dir)
    path = res.write_report(args.run_dir)
    if not args.quiet:
        print(f"report: {path}")
    return 0


def _add_report(sub) -> None:
    p = sub.add_parser(
        "report",
        help="write report.html for a finished run (one self-contained page)",
        description="Read a finished run and write RUN_DIR/report.html: the verdict, the "
        "warnings, the figures found in the folder (embedded), the parameter table, "
        "instruments, comparisons, search, sampler, priors, detection limits and how to "
        "make the run again, in one file with no outside requests.",
    )
    p.add_argument("run_dir", metavar="RUN_DIR")
    p.add_argument("--quiet", action="store_true")
    p.set_defaults(run=_run_report)


# each entry adds one subcommand: add(subparsers) -> None, setting defaults(run=...)
_SUBCOMMANDS: list = [
    _add_check, _add_periodogram, _add_analyze, _add_demo, _add_sample, _add_batch,
    _add_predict, _add_events, _add_plan, _add_limits, _add_report,
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
                   "limits": "out"}  # fmt: skip


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
    args = parser.parse_args(argv)
    args.argv = list(sys.argv[1:] if argv is None else argv)
    if not getattr(args, "run", None):
        parser.print_help()
        return 0
    try:
        _check_outputs(args)
        return int(args.run(args) or 0)
    except RvkepError as exc:
        print(f"rvkep {args.command}: error: {exc}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print(f"rvkep {args.command}: interrupted", file=sys.stderr)
        return 130
    except OSError as exc:
        if exc.errno not in _MACHINE_ERRORS:
            raise
        where = f"{exc.filename}: " if exc.filename else ""
        print(f"rvkep {args.command}: error: {where}{exc.strerror or exc}", file=sys.stderr)
        return 2
    except BrokenPipeError:  # output piped into a program that stopped reading
        import os

        os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())
        return 0


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
