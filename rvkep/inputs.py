"""Reading an input file, or one line saying why not.

Every file rvkep reads (data tables, model files, target lists, lists of times) goes
through :func:`read_bytes`, so each refuses the same things the same way: a missing
path, a folder, and anything that is not a regular file (a FIFO or a device would block
or never end), each as one line naming the file.
"""

from __future__ import annotations

import os
import stat
from pathlib import Path

from rvkep.errors import DataError, RvkepError

__all__ = ["read_bytes", "read_text"]


def read_bytes(path: str | Path, error: type[RvkepError] = DataError,
               what: str = "a data file") -> bytes:  # fmt: skip
    """The bytes of ``path``; ``error`` (a RvkepError class) naming the path and the
    problem otherwise. ``what`` names the kind of file in the message.

    Parameters
    ----------
    path : str or Path
        The file.
    error : type, optional
        The exception raised.
    what : str, optional
        The kind of file, for the message.

    Returns
    -------
    bytes
        The file's contents.
    """
    path = Path(path)
    try:
        info = os.stat(path)
    except FileNotFoundError:
        raise error(f"{path}: no such file") from None
    except OSError as exc:
        raise error(f"{path}: cannot read ({exc.strerror})") from None
    if stat.S_ISDIR(info.st_mode):
        raise error(f"{path}: is a folder, not {what}") from None
    if not stat.S_ISREG(info.st_mode):
        raise error(f"{path}: not a regular file (a pipe or a device), not {what}") from None
    try:
        return path.read_bytes()
    except OSError as exc:
        raise error(f"{path}: cannot read ({exc.strerror})") from None


def read_text(path: str | Path, error: type[RvkepError] = DataError,
              what: str = "a text file") -> str:  # fmt: skip
    """The UTF-8 text of ``path`` (a byte-order mark dropped); ``error`` otherwise.

    Parameters
    ----------
    path : str or Path
        The file.
    error : type, optional
        The exception raised (also for text that is not UTF-8).
    what : str, optional
        The kind of file, for the message.

    Returns
    -------
    str
        The text.
    """
    raw = read_bytes(path, error, what)
    try:
        return raw.decode("utf-8-sig")
    except UnicodeDecodeError:
        raise error(f"{Path(path)}: not a UTF-8 text file") from None
