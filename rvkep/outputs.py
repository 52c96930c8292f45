"""Writing output files safely: to a temporary name in the same folder, then renamed.

A crash or kill at any moment leaves either the old file, the complete new one, or a
temporary file named ``.<name>.tmp-*`` that :func:`clean_temporaries` removes; never a
half-written file under the final name.
"""

from __future__ import annotations

import contextlib
import fnmatch
import os
import tempfile
from pathlib import Path

from rvkep.errors import FolderBusyError, OptionError

__all__ = [
    "atomic_write", "write_text", "write_csv", "save_figure", "clean_temporaries", "current_umask",
    "folder_lock", "LOCK_NAME", "RUN_MARKERS", "check_output_folder", "make_output_folder",
    "check_output_file",
]  # fmt: skip

#: The lock file of an output folder (see :func:`folder_lock`).
LOCK_NAME = ".rvkep.lock"


#: Files that mark a folder as rvkep's own (a run, a batch or a limits folder): an
#: existing folder given as ``--out`` must be empty or hold one of them.
#: The names of the temporary files of :func:`atomic_write` (``.<name>.tmp-*``).
TEMPORARY_PATTERN = ".*.tmp-*"

RUN_MARKERS = (LOCK_NAME, "results.json", "model.json", "chain.h5", "summary.md",
               "summary.csv", "index.html", "limits.csv", "population.json")  # fmt: skip


def check_output_folder(path: str | Path, option: str = "--out") -> Path:
    """Refuse an output folder that rvkep should not write into, before any work.

    An existing folder must be empty or one of rvkep's own (holding one of
    :data:`RUN_MARKERS`), so that ``--out /`` or ``--out ~`` cannot scatter files among
    others; a new folder is created later as the last component of the path only, so
    its parent must exist. Raises :class:`~rvkep.errors.OptionError` naming the option.

    Parameters
    ----------
    path : str or Path
        The folder.
    option : str
        The option that named it, for the message.

    Returns
    -------
    Path
        The folder.
    """
    p = Path(path)
    if p.exists():
        if not p.is_dir():
            raise OptionError(f"{option} {p}: exists and is not a folder")
        try:
            names = set(os.listdir(p))
        except OSError as exc:
            raise OptionError(f"{option} {p}: cannot read the folder ({exc.strerror})") from None
        ours = names & set(RUN_MARKERS) or fnmatch.filter(names, TEMPORARY_PATTERN)
        if names and not ours:
            raise OptionError(
                f"{option} {p}: the folder holds other files and no rvkep output; give a "
                "new or empty folder, or one that rvkep wrote"
            )
        probe = p
    else:
        probe = p.absolute().parent
        if not probe.is_dir():
            raise OptionError(f"{option} {p}: the folder {probe} does not exist (rvkep "
                              "creates only the last folder of the path)")  # fmt: skip
    if not os.access(probe, os.W_OK | os.X_OK):
        raise OptionError(f"{option} {p}: cannot write there ({probe} is not writable)")
    return p


def make_output_folder(path: str | Path, option: str = "--out") -> bool:
    """Create the output folder checked by :func:`check_output_folder` (its last
    component only).

    Parameters
    ----------
    path : str or Path
        The folder.
    option : str
        The option that named it, for the message.

    Returns
    -------
    bool
        Whether it was created (so a refused run can remove it).
    """
    p = Path(check_output_folder(path, option))
    try:
        p.mkdir()
    except FileExistsError:
        return False
    except OSError as exc:
        raise OptionError(f"{option} {p}: cannot create the folder ({exc.strerror})") from None
    return True


def remove_if_empty(path: str | Path) -> None:
    """Remove a folder a refused run created, if nothing but its lock is left in it."""
    p = Path(path)
    with contextlib.suppress(OSError):
        if set(os.listdir(p)) <= {LOCK_NAME}:
            with contextlib.suppress(FileNotFoundError):
                (p / LOCK_NAME).unlink()
            p.rmdir()


def check_output_file(path: str | Path, option: str = "--out") -> Path:
    """Refuse an output file whose folder does not exist or that names a folder.

    Parameters
    ----------
    path : str or Path
        The file.
    option : str
        The option that named it, for the message.

    Returns
    -------
    Path
        The file's path.
    """
    p = Path(path)
    if p.is_dir():
        raise OptionError(f"{option} {p}: is a folder; give a file name")
    parent = p.absolute().parent
    if not parent.is_dir():
        raise OptionError(f"{option} {p}: the folder {parent} does not exist")
    if not os.access(parent, os.W_OK | os.X_OK):
        raise OptionError(f"{option} {p}: cannot write there ({parent} is not writable)")
    return p


def current_umask() -> int:
    """The process's file-creation mask (read without changing it where possible).

    Returns
    -------
    int
        The umask, e.g. 0o022.
    """
    try:
        with open("/proc/self/status") as fh:
            for line in fh:
                if line.startswith("Umask:"):
                    return int(line.split()[1], 8)
    except OSError:
        pass
    mask = os.umask(0o022)  # no /proc: the classic read-by-setting, restored at once
    os.umask(mask)
    return mask


@contextlib.contextmanager
def atomic_write(path: str | Path, mode: str = "w"):
    """Open a temporary file beside ``path``; rename it onto ``path`` on success.

    The file gets the permissions the umask gives any new file (not mkstemp's 0600).

    Parameters
    ----------
    path : str or Path
        The file to write.
    mode : str
        The open mode (``"w"`` or ``"wb"``).

    Yields
    ------
    file
        The temporary file, open for writing.
    """
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.tmp-", dir=path.parent)
    try:
        # mkstemp creates the file with mode 0600; the final file follows the umask like
        # any file a program creates (0644 under the usual 022, group-readable under 002)
        os.fchmod(fd, 0o666 & ~current_umask())
        with os.fdopen(fd, mode) as fh:
            yield fh
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, path)
    except BaseException:
        with contextlib.suppress(FileNotFoundError):
            os.unlink(tmp)
        raise


def write_text(path: str | Path, text: str) -> Path:
    """Write ``text`` to ``path`` atomically (:func:`atomic_write`).

    Parameters
    ----------
    path : str or Path
        The file.
    text : str
        Its whole content.

    Returns
    -------
    Path
        The file's path.
    """
    with atomic_write(path) as fh:
        fh.write(text)
    return Path(path)


def write_csv(path: str | Path | None, comment: str, fields: list[str], rows: list[dict],
              stream=None) -> Path | None:  # fmt: skip
    """A ``#`` comment line, then a CSV of ``rows`` (floats to 12 significant digits,
    a full Julian date to the second; None as an empty cell) to ``path`` (atomically),
    or to ``stream`` when ``path`` is None.

    Parameters
    ----------
    path : str or Path or None
        The file, or None to write to ``stream``.
    comment : str
        The first line's text (after ``#``).
    fields : list of str
        The columns.
    rows : list of dict
        One dict per row, keyed by column.
    stream : file, optional
        Where to write without a path.

    Returns
    -------
    Path or None
        The file's path, or None when written to ``stream``.
    """
    import csv
    import io

    buf = io.StringIO()
    buf.write(f"# {comment}\n")
    w = csv.DictWriter(buf, fieldnames=fields, lineterminator="\n")
    w.writeheader()
    for row in rows:
        w.writerow({k: (f"{v:.12g}" if isinstance(v, float) else ("" if v is None else v))
                    for k, v in row.items()})  # fmt: skip
    if path:
        return write_text(path, buf.getvalue())
    stream.write(buf.getvalue())
    return None


def save_figure(fig, path: str | Path, **kwargs) -> Path:
    """Save a matplotlib figure atomically (format from the suffix) and close it.

    Parameters
    ----------
    fig : Figure
        The figure.
    path : str or Path
        The file (its suffix gives the format).
    **kwargs
        Passed to ``savefig`` (``dpi`` defaults to 150).

    Returns
    -------
    Path
        The file's path.
    """
    import matplotlib.pyplot as plt

    path = Path(path)
    fmt = path.suffix.lstrip(".") or "png"
    with atomic_write(path, "wb") as fh:
        fig.savefig(fh, format=fmt, dpi=kwargs.pop("dpi", 150), **kwargs)
    plt.close(fig)
    return path


def clean_temporaries(folder: str | Path) -> int:
    """Remove temporary files left by an interrupted run.

    Parameters
    ----------
    folder : str or Path
        The run's folder.

    Returns
    -------
    int
        How many were removed.
    """
    n = 0
    for p in Path(folder).glob(TEMPORARY_PATTERN):
        with contextlib.suppress(OSError):
            p.unlink()
            n += 1
    return n


def _take_lock(fcntl, folder: Path, path: Path) -> int:
    """An open descriptor of ``path`` holding its exclusive lock, or
    :class:`FolderBusyError` naming the holder when another process has it."""
    while True:
        fd = os.open(path, os.O_RDWR | os.O_CREAT, 0o666 & ~current_umask())
        try:
            fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except OSError:
            holder = os.pread(fd, 4096, 0).decode("utf-8", "replace").strip() or "unknown"
            os.close(fd)
            raise FolderBusyError(
                f"{folder}: another rvkep run is writing there ({holder}); wait for it to "
                "finish or choose another --out"
            ) from None
        # the run before may have removed the file between our open and our lock: then
        # the lock is on a file nobody else sees, so take the one on disk instead
        try:
            same = os.stat(path).st_ino == os.fstat(fd).st_ino
        except FileNotFoundError:
            same = False
        if same:
            return fd
        os.close(fd)


@contextlib.contextmanager
def folder_lock(folder: str | Path):
    """Hold an advisory lock on an output folder for the length of a run.

    The lock is :func:`fcntl.flock` on ``<folder>/.rvkep.lock``, which also records the
    holder (process id, host, start time, command). The kernel releases it when the
    process ends, however it ends, so a killed run never leaves a stale lock. A second
    run into the same folder raises :class:`rvkep.errors.FolderBusyError` naming the
    folder and the running process. The file is removed when the run ends. Where
    ``fcntl`` does not exist (Windows) no lock is taken.

    Parameters
    ----------
    folder : str or Path
        The output folder.

    Yields
    ------
    None
        While the lock is held.
    """
    try:
        import fcntl
    except ImportError:  # pragma: no cover - not on POSIX systems
        yield
        return
    import socket
    import sys
    import time

    folder = Path(folder)
    path = folder / LOCK_NAME
    fd = _take_lock(fcntl, folder, path)
    try:
        command = " ".join(["rvkep", *sys.argv[1:]])[:300]
        stamp = time.strftime("%Y-%m-%d %H:%M:%S")
        note = f"pid {os.getpid()} on {socket.gethostname()} since {stamp}: {command}\n"
        os.ftruncate(fd, 0)
        os.pwrite(fd, note.encode(), 0)
        try:
            yield
        finally:
            # removed while still held, so no run is left holding a lock on a removed
            # file; no empty lock file stays behind in the folder
            with contextlib.suppress(OSError):
                os.unlink(path)
            fcntl.flock(fd, fcntl.LOCK_UN)
    finally:
        os.close(fd)
