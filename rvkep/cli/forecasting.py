"""``rvkep predict``, ``events`` and ``plan``: what a finished run says about other times
(velocities, orbital events, the best epochs to observe), and the times they take.
"""

from __future__ import annotations

import argparse
import math

from rvkep.cli.arguments import add_arguments
from rvkep.cli.common import (
    subcommand,
    write_table,
)

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
    write_table(args.out, f"rvkep predict: {args.run_dir} ({res.run_label()}); times in the "
               f"data's system{note}; velocities in m/s; intervals 68.27% and 95.45%",
               list(rows[0]), rows)  # fmt: skip
    return 0


def _add_predict(sub) -> argparse.ArgumentParser:
    p = subcommand(sub, "predict", "posterior predictions of a finished run at chosen times (CSV)",
                    "Read a finished run (results.json, samples.npz, data.csv) and write, "
                    "for every time, the median and 68%/95% intervals of the total reflex "
                    "velocity (companions and trend), of each companion, and with --instrument "
                    "of what that instrument should measure (its offset, jitter and typical "
                    "error folded in).", _run_predict)  # fmt: skip
    p.add_argument("run_dir", metavar="RUN_DIR")
    add_arguments(p, "predict")
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
    write_table(args.out, f"rvkep events: {args.run_dir} ({res.run_label()}); times in the "
               f"data's system{note}; intervals 68.27% and 95.45% over the posterior{dyn}",
               fields, rows)  # fmt: skip
    return 0


def _add_events(sub) -> argparse.ArgumentParser:
    p = subcommand(sub, "events",
                    "conjunctions, periastron passages and quadratures of a finished run (CSV)",
                    "Read a finished run and list, for each companion, every conjunction "
                    "(transit, if the inclination allows), opposition, periastron and the two "
                    "quadratures between two times, each with its median time and 68%/95% "
                    "intervals from the posterior samples, and the a priori transit "
                    "probability beside each conjunction when the stellar radius is known.",
                    _run_events)  # fmt: skip
    p.add_argument("run_dir", metavar="RUN_DIR")
    add_arguments(p, "events")
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
    write_table(args.out, f"rvkep plan: {args.run_dir} ({res.run_label()}); score: "
               f"{plan.criterion}; one velocity from {plan.instrument}, noise "
               f"{plan.noise_sd:.3g} m/s{gain}; site {args.site}, RA {args.ra:g}, Dec "
               f"{args.dec:g}, Sun below {plan.grid.sun_limit:g} deg, airmass <= "
               f"{args.max_airmass:g}; time in the data's system (BJD_TDB minus "
               f"{plan.time_offset:g})" + (f"; {res.dynamics_note}" if res.dynamics_note else ""),
               fields, rows)  # fmt: skip
    figure = args.figure or (str(Path(args.out).with_suffix(".png")) if args.out else None)
    if figure:
        from rvkep import __version__
        from rvkep.extra_plots import plan_figure
        from rvkep.outputs import save_figure

        fig = plan_figure(plan)
        fig.text(0.995, 0.003, f"rvkep {__version__} | {res.run_label()}", ha="right",
                 va="bottom", fontsize=6.5, color="0.45")  # fmt: skip
        save_figure(fig, figure)
    return 0


def _add_plan(sub) -> argparse.ArgumentParser:
    p = subcommand(sub, "plan",
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
    add_arguments(p, "plan")
    return p


#: this family's subcommands, each ``add(subparsers)`` returning its parser
SUBCOMMANDS = [_add_predict, _add_events, _add_plan]
