"""The whole job over a target list, on local processes or a Dask cluster, resumable.

The target list is a CSV file with the columns

* ``name``: the target's name (its output folder ``DIR/<name>/``);
* ``data``: a path or glob pattern, relative to the list's folder (several separated
  by ``;``);
* ``star_mass``, ``star_mass_err``: solar masses;
* optional: one column per option of ``rvkep analyze`` that a target may set, named
  as the option with dashes turned to underscores (``max_companions``, ``model``,
  ``kms``, ``trend``, ``noise``, ``bin``, ``min_period``, ...; the list is
  :func:`rvkep.options.columns`), written as on the command line (true/false for a
  switch; ``decorrelate`` separated by ``;``); an empty cell keeps the default. A
  ``model`` path is relative to the list's folder. The batch's own ``--seed``,
  ``--quick`` and ``--quiet`` apply to every target.

Each target runs :func:`rvkep.pipeline.analyze` into its own folder with its own log
file (``log.txt``); a failure (bad file, failed fit) is recorded as one line in
``error.txt`` and in the summary, and does not stop the others. A target is complete
when ``done.json`` exists: it is written, atomically, after every other output, so a
run killed at any moment never leaves a folder that looks complete but is not; a
rerun skips complete targets, clears temporary files of interrupted ones and resumes
their sampler checkpoints, then rebuilds ``DIR/summary.csv``: one ``target`` row per
target (status, number of companions, seconds, error) and one ``companion`` row per
companion (period, K, e, m sin i with their errors).

Execution goes through any object with ``submit(fn, *args)`` returning futures: a
:class:`concurrent.futures.ProcessPoolExecutor` by default, or a
``dask.distributed.Client`` connected to an existing scheduler (``--scheduler
tcp://HOST:PORT``; ``pip install "rvkep[cluster]"``).
"""

from __future__ import annotations

import contextlib
import csv
import glob
import hashlib
import json
import os
import sys
import time
from dataclasses import dataclass, field, replace
from pathlib import Path

from rvkep.errors import DataError, OptionError, RvkepError
from rvkep.messages import did_you_mean
from rvkep.names import csv_cell, name_problem, shown
from rvkep.option_checks import check as check_options
from rvkep.option_checks import from_cell
from rvkep.options import TARGET_REQUIRED, columns, option
from rvkep.outputs import LOCK_NAME, clean_temporaries, write_text
from rvkep.workers import INTERRUPTED, run_tasks

__all__ = ["Target", "read_targets", "run_target", "run_batch", "write_summary", "SUMMARY_FIELDS"]

_REQUIRED = TARGET_REQUIRED
SUMMARY_FIELDS = [
    "row", "name", "status", "n_planets", "seconds", "error", "run_kind", "converged",
    "quick", "star_mass_assumed", "label",
    "period_d", "period_minus", "period_plus", "K_mps", "K_minus", "K_plus",
    "ecc", "ecc_minus", "ecc_plus", "msini_mjup", "msini_minus", "msini_plus",
]  # fmt: skip


@dataclass(frozen=True)
class Target:
    """One line of the target list, paths resolved; ``options`` holds the analyze
    options its cells set (checked, by name)."""

    name: str
    files: tuple[str, ...]
    options: dict = field(default_factory=dict)
    line: int = 0
    problem: str = ""  # why this target cannot run (it fails alone; see read_targets)

    def get(self, name: str):
        """The value of analyze option ``name`` for this target (its cell, else the
        option's default)."""
        return self.options[name] if name in self.options else option("analyze", name).default


def _name_problem(name: str) -> str | None:
    """Why ``name`` cannot name a target's folder, or None."""
    return name_problem(name, "target name")


def read_targets(path: str | Path) -> list[Target]:
    """Read and check a target list; errors name the file, line and problem.

    A problem of the list itself (unreadable, missing or unknown columns, a row with
    the wrong number of cells) raises :class:`DataError`. A problem of one target (its
    name, its numbers, listed twice) only makes that target fail: it comes back with
    ``problem`` set, and the batch runs the others. Data patterns that match no file
    are not checked here either: that target fails when it runs.

    Parameters
    ----------
    path : str or Path
        The target list (CSV with ``name``, ``data``, ``star_mass``, ``star_mass_err`` and
        any analyze option as a column).

    Returns
    -------
    list of Target
        One per row, in the list's order (paths resolved against the list's folder).

    Raises
    ------
    DataError
        When the list itself cannot be read or its header is wrong.
    """
    path = Path(path)
    rows = _list_rows(path)
    header = _checked_header(path, rows[0])
    targets, names = [], set()
    for line, row in rows[1:]:
        where = f"{path}, line {line}"
        if len(row) != len(header):
            raise DataError(f"{where}: {len(row)} cells where the header has {len(header)}")
        rec = {h: c.strip() for h, c in zip(header, row, strict=True)}
        name, problem = _unique_name(rec["name"], names, line)
        names.add(name)
        try:
            target = _target_from(rec, name, path.parent, line)
        except DataError as exc:
            target = Target(name, (), line=line)
            problem = problem or str(exc)
        if problem is not None:
            target = replace(target, problem=f"{where}: {problem}")
        targets.append(target)
    if not targets:
        raise DataError(f"{path}: no targets")
    return targets


def _list_rows(path: Path) -> list[tuple[int, list[str]]]:
    """The list's rows that are not blank or comments, each with its first line."""
    import io

    from rvkep.inputs import read_text

    text = read_text(path, DataError, "a target list")
    rows: list[tuple[int, list[str]]] = []
    reader = csv.reader(io.StringIO(text, newline=""))
    last = 0
    try:
        for row in reader:
            first, last = last + 1, reader.line_num
            if not row or not "".join(row).strip() or row[0].lstrip().startswith("#"):
                continue
            rows.append((first, row))
    except csv.Error as exc:
        raise DataError(f"{path}, line {reader.line_num}: {exc}") from None
    if not rows:
        raise DataError(f"{path}: empty target list")
    return rows


def _checked_header(path: Path, first: tuple[int, list[str]]) -> list[str]:
    """The header's column names, lower case, after checking that the required ones are
    there and every other is an option's column (with "did you mean" for a near miss)."""
    line, cells = first
    header = [h.strip().lower() for h in cells]
    missing = [c for c in _REQUIRED if c not in header]
    if missing:
        raise DataError(f"{path}, line {line}: missing column(s) {', '.join(missing)}")
    known = ["name", "data", *(o.name for o in columns())]
    unknown = [c for c in header if c not in known]
    if unknown:
        raise DataError(f"{path}, line {line}: unknown column(s) "
                        f"{', '.join(unknown)}{did_you_mean(unknown[0], known)}")  # fmt: skip
    return header


def _unique_name(name: str, names: set, line: int) -> tuple[str, str | None]:
    """A target's folder name and its problem (a bad name or one listed twice): a name
    with a problem is replaced by a safe one, unique in ``names``, so the target can
    fail in a folder of its own."""
    problem = _name_problem(name)
    if problem is None and name in names:
        problem = f"target {name!r} listed twice"
    if problem is None:
        return name, None
    safe = shown(name).strip("'").replace("/", "_").replace("\\", "_").lstrip(".")
    safe = safe or f"line-{line}"
    while safe in names:
        safe += f"@line{line}"
    return safe, problem


def _target_from(rec: dict[str, str], name: str, base: Path, line: int) -> Target:
    """One target from its row's cells (raises DataError with the problem)."""
    files: list[str] = []
    for pattern in rec["data"].split(";"):
        pattern = pattern.strip()
        if pattern:
            full = str(base / pattern)
            matches = sorted(glob.glob(full))
            files.extend(matches or [full])
    values = {}
    try:
        for opt in columns():
            if not rec.get(opt.name, "").strip():  # an empty cell keeps the default
                if opt.name in _REQUIRED:
                    raise OptionError(f"{opt.name}: empty (the column is required)")
                continue
            values[opt.name] = from_cell(opt, rec[opt.name])
        if values.get("model"):
            values["model"] = str(base / values["model"])
        check_options(values, "analyze")  # the rules between options, as analyze's
    except OptionError as exc:
        raise DataError(str(exc)) from None
    return Target(name, tuple(files), values, line=line)


def _target_seed(seed: int, name: str) -> int:
    return (seed + int(hashlib.sha256(name.encode()).hexdigest()[:8], 16)) % (2**31)


def run_target(target: Target, out: str, seed: int = 0, quick: bool = False) -> dict:
    """Run one target into ``out/<name>/``; never raises for the target's own faults.

    Returns {"name", "status" ("done", "failed", "skipped", "interrupted"), "seconds",
    "error"}. A KeyboardInterrupt while the target runs leaves its checkpoint flushed
    and returns status "interrupted" (the next run resumes it).

    Parameters
    ----------
    target : Target
        The row to run.
    out : str
        The batch's output folder.
    seed : int, optional
        The target's seed.
    quick : bool, optional
        A quick run (short chains, marked as such in every output).

    Returns
    -------
    dict
        The target's info (see above).
    """
    for var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
        os.environ.setdefault(var, "1")
    folder = Path(out) / target.name
    done = folder / "done.json"
    info = _read_done(folder)
    if info is not None:
        return {**info, "status": "skipped"}
    folder.mkdir(parents=True, exist_ok=True)
    # the lock file marks the folder as an rvkep run's before the log is written into it
    # (analyze takes the lock and removes the file when it ends)
    (folder / LOCK_NAME).touch()
    with contextlib.suppress(FileNotFoundError):
        (folder / "error.txt").unlink()
    t0 = time.perf_counter()
    status, error = "done", ""
    with (
        open(folder / "log.txt", "a") as log,
        contextlib.redirect_stdout(log),
        contextlib.redirect_stderr(log),
    ):
        stamp = time.strftime("%Y-%m-%d %H:%M:%S")
        print(f"--- {stamp} target {target.name}: {', '.join(target.files)}")
        try:
            import matplotlib

            matplotlib.use("Agg")
            from rvkep.pipeline import AnalyzeOptions, analyze

            opts = AnalyzeOptions(
                **target.options, out=str(folder), seed=_target_seed(seed, target.name),
                star_name=target.name,
                quiet=False, quick=quick,
                command=f"rvkep batch: target {target.name} (line {target.line} of the list)",
            )  # fmt: skip
            analyze(list(target.files), opts)
        except KeyboardInterrupt:
            status, error = "interrupted", "interrupted"
        except RvkepError as exc:
            status, error = "failed", str(exc)
        except Exception as exc:  # a failed fit must not stop the batch
            status, error = "failed", f"{type(exc).__name__}: {exc}"
            import traceback

            traceback.print_exc()
        print(f"--- status {status}" + (f": {error}" if error else ""))
    seconds = time.perf_counter() - t0
    info = {"name": target.name, "status": status, "seconds": seconds, "error": error}
    if status == "done":
        write_text(done, json.dumps(info) + "\n")  # last: marks the folder complete
    elif status == "failed":
        write_text(folder / "error.txt", error.replace("\n", " ") + "\n")
    return info


def _read_json(path: Path) -> dict | None:
    """A JSON object from ``path``; None if it is missing, unreadable or not an object."""
    try:
        doc = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None
    return doc if isinstance(doc, dict) else None


def _read_done(folder: Path) -> dict | None:
    """The completion record of a target folder, or None if it is not complete. A
    damaged record (a disk that filled up, a hand edit) makes the target run again."""
    info = _read_json(folder / "done.json")
    if info is None or not {"name", "status", "seconds", "error"} <= set(info):
        with contextlib.suppress(OSError):
            (folder / "done.json").unlink()
        return None
    return info


def _run_kind_cells(res: dict) -> dict:
    """The kind of run of one target's results (empty cells when it has none)."""
    if not res:
        return {}
    kind = res.get("run_kind", {})
    yes_no = {True: "yes", False: "no"}
    return {
        "run_kind": kind.get("label", ""),
        "converged": yes_no[bool(res.get("sampler", {}).get("converged", False))],
        "quick": yes_no[bool(res.get("sampler", {}).get("quick_mode", False))],
        "star_mass_assumed": yes_no[bool(res.get("star", {}).get("assumed", False))],
    }


def _summary_rows(targets: list[Target], out: Path, infos: dict[str, dict]) -> list[dict]:
    rows = []
    for t in targets:
        info = infos.get(t.name, {})
        folder = out / t.name
        status = info.get("status", "not started")
        if status == "skipped":
            status = "done"
        res = (_read_json(folder / "results.json") or {}) if status == "done" else {}
        kind = _run_kind_cells(res)
        rows.append(
            {
                "row": "target",
                "name": t.name,
                "status": status,
                "n_planets": res.get("n_planets", ""),
                "seconds": f"{info.get('seconds', 0):.1f}",
                "error": info.get("error", ""),
                **kind,
            }
        )
        for p in res.get("planets", []):
            row = {"row": "companion", "name": t.name, "status": status, "label": p["label"],
                   **kind}  # fmt: skip
            for key, col in (
                ("period_d", "period"),
                ("K_mps", "K"),
                ("ecc", "ecc"),
                ("msini_mjup", "msini"),
            ):
                e = p[key]
                row[key] = f"{e['median']:.8g}"
                row[f"{col}_minus"] = f"{e['minus']:.4g}"
                row[f"{col}_plus"] = f"{e['plus']:.4g}"
            rows.append(row)
    return rows


def write_summary(targets: list[Target], out: str | Path, infos: dict[str, dict]) -> Path:
    """Write DIR/summary.csv and DIR/index.html (each atomically) from every target's
    outputs.

    Parameters
    ----------
    targets : list of Target
        Every target of the list, in order.
    out : str or Path
        The batch's output folder.
    infos : dict
        {name: info} as :func:`run_target` returns.

    Returns
    -------
    Path
        The summary.csv written.
    """
    import io

    out = Path(out)
    buf = io.StringIO()
    w = csv.DictWriter(buf, fieldnames=SUMMARY_FIELDS, extrasaction="ignore")
    w.writeheader()
    rows = _summary_rows(targets, out, infos)
    for row in rows:  # no name or error text of a target runs as a spreadsheet formula
        w.writerow({k: csv_cell(v) for k, v in row.items()})
    from rvkep.report.index import render_index

    path = write_text(out / "summary.csv", buf.getvalue())
    write_text(out / "index.html", render_index(out, rows))
    return path


def run_batch(
    targets_file: str | Path,
    out: str | Path,
    workers: int | None = None,
    scheduler: str | None = None,
    seed: int = 0,
    quiet: bool = False,
    quick: bool = False,
    executor=None,
) -> dict[str, dict]:
    """Run every target (see the module text); returns {name: info} and writes the
    summary. ``executor`` may be any object with ``submit`` (e.g. a Dask Client).

    On KeyboardInterrupt (Ctrl-C, or SIGINT to this process alone) no further target
    starts, running targets on local workers are interrupted (their checkpoints
    flushed, status "interrupted"), the summary of what finished is written and the
    KeyboardInterrupt is re-raised. Tasks already running on a Dask cluster finish
    there; queued ones are cancelled.

    Parameters
    ----------
    targets_file : str or Path
        The target list (:func:`read_targets`).
    out : str or Path
        Output folder; each target gets ``out/<name>/``.
    workers : int, optional
        Local worker processes (default: one per core; 1 runs in this process).
    scheduler : str, optional
        A Dask scheduler address; the targets then run on that cluster.
    seed : int, optional
        Base seed; each target's seed is derived from it and the target's name.
    quiet : bool, optional
        No progress on the terminal.
    quick : bool, optional
        Quick runs for every target.
    executor : object, optional
        Anything with ``submit`` in place of the local pool or the Dask client.

    Returns
    -------
    dict
        {name: info} (see :func:`run_target`).
    """
    from rvkep.outputs import check_output_folder, folder_lock, make_output_folder

    check_output_folder(out)
    targets = read_targets(targets_file)
    out = Path(out)
    make_output_folder(out)
    with folder_lock(out):
        clean_temporaries(out)
        infos = _run_targets(targets, out, workers, scheduler, seed, quiet, quick, executor)
    return infos


def _run_targets(targets, out, workers, scheduler, seed, quiet, quick, executor):
    infos: dict[str, dict] = {}
    pending = []
    for t in targets:
        if t.problem:
            infos[t.name] = {"name": t.name, "status": "failed", "seconds": 0.0,
                             "error": t.problem}  # fmt: skip
            continue
        info = _read_done(out / t.name)
        if info is not None:
            infos[t.name] = {**info, "status": "skipped"}
        else:
            pending.append(t)
    bar = None
    if not quiet and sys.stderr.isatty():
        from tqdm.auto import tqdm

        bar = tqdm(
            total=len(targets), initial=len(targets) - len(pending), desc="targets", unit="star"
        )
    by_name = {t.name: t for t in pending}

    def record(name, value):
        if value == INTERRUPTED:
            value = {"name": name, "status": "interrupted", "seconds": 0.0,
                     "error": "interrupted"}  # fmt: skip
        elif isinstance(value, BaseException):  # the worker itself died
            value = {"name": name, "status": "failed", "seconds": 0.0,
                     "error": f"worker failed: {value}"}  # fmt: skip
        infos[name] = value
        if bar is not None:
            bar.update(1)
            bar.set_postfix(last=f"{name}: {value['status']}")
        elif not quiet:
            msg = f"{name}: {value['status']} ({value['seconds']:.1f} s)"
            print(msg + (f" - {value['error']}" if value["error"] else ""), flush=True)

    tasks = [(t.name, (by_name[t.name], str(out), seed, quick)) for t in pending]
    try:
        run_tasks(run_target, tasks, record, workers=workers, scheduler=scheduler,
                  executor=executor, in_process=False)  # fmt: skip
    finally:
        if bar is not None:
            bar.close()
        write_summary(targets, out, infos)
    return infos
