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

__all__ = ["atomic_write", "write_text", "save_figure", "clean_temporaries"]


@contextlib.contextmanager
def atomic_write(path: str | Path, mode: str = "w"):
    """Open a temporary file beside ``path``; rename it onto ``path`` on success."""
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.tmp-", dir=path.parent)
    try:
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
