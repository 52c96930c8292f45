"""Writing output files safely: to a temporary name in the same folder, then renamed.

A crash or kill at any moment leaves either the old file, the complete new one, or a
temporary file named ``.<name>.tmp-*`` that :func:`clean_temporaries` removes; never a
half-written file under the final name.
"""

from __future__ import annotations

import contextlib
import os
import tempfile
from pathlib import Path

from rvkep.errors import FolderBusyError

__all__ = [
    "atomic_write", "write_text", "write_csv", "save_figure", "clean_temporaries", "current_umask",
    "folder_lock", "LOCK_NAME",
]  # fmt: skip

#: The lock file of an output folder (see :func:`folder_lock`).
LOCK_NAME = ".rvkep.lock"


def current_umask() -> int:
    """The process's file-creation mask (read without changing it where possible)."""
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
    with atomic_write(path) as fh:
        fh.write(text)
    return Path(path)


def write_csv(path: str | Path | None, comment: str, fields: list[str], rows: list[dict],
              stream=None) -> Path | None:  # fmt: skip
    """A ``#`` comment line, then a CSV of ``rows`` (floats to 12 significant digits,
    a full Julian date to the second; None as an empty cell) to ``path`` (atomically),
    or to ``stream`` when ``path`` is None."""
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
    """Save a matplotlib figure atomically (format from the suffix) and close it."""
    import matplotlib.pyplot as plt

    path = Path(path)
    fmt = path.suffix.lstrip(".") or "png"
    with atomic_write(path, "wb") as fh:
        fig.savefig(fh, format=fmt, dpi=kwargs.pop("dpi", 150), **kwargs)
    plt.close(fig)
    return path


def clean_temporaries(folder: str | Path) -> int:
    """Remove temporary files left by an interrupted run; returns how many."""
    n = 0
    for p in Path(folder).glob(".*.tmp-*"):
        with contextlib.suppress(OSError):
            p.unlink()
            n += 1
    return n


@contextlib.contextmanager
def folder_lock(folder: str | Path):
    """Hold an advisory lock on an output folder for the length of a run.

    The lock is :func:`fcntl.flock` on ``<folder>/.rvkep.lock``, which also records the
    holder (process id, host, start time, command). The kernel releases it when the
    process ends, however it ends, so a killed run never leaves a stale lock. A second
    run into the same folder raises :class:`rvkep.errors.FolderBusyError` naming the
    folder and the running process. Where ``fcntl`` does not exist (Windows) no lock
    is taken.
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
    fd = os.open(path, os.O_RDWR | os.O_CREAT, 0o666 & ~current_umask())
    try:
        try:
            fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except OSError:
            holder = os.pread(fd, 4096, 0).decode("utf-8", "replace").strip() or "unknown"
            raise FolderBusyError(
                f"{folder}: another rvkep run is writing there ({holder}); wait for it to "
                "finish or choose another --out"
            ) from None
        command = " ".join(["rvkep", *sys.argv[1:]])[:300]
        stamp = time.strftime("%Y-%m-%d %H:%M:%S")
        note = f"pid {os.getpid()} on {socket.gethostname()} since {stamp}: {command}\n"
        os.ftruncate(fd, 0)
        os.pwrite(fd, note.encode(), 0)
        try:
            yield
        finally:
            with contextlib.suppress(OSError):
                os.ftruncate(fd, 0)
            fcntl.flock(fd, fcntl.LOCK_UN)
    finally:
        os.close(fd)
