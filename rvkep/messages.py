"""What rvkep says on the terminal besides results: a progress line unless the run is
quiet, and the "did you mean" hint of an unknown name's one-line error."""

from __future__ import annotations

from collections.abc import Iterable
from typing import Any

__all__ = ["did_you_mean", "say"]


def did_you_mean(name: str, known: Iterable[str], cutoff: float = 0.6) -> str:
    """The hint an unknown name's error ends with.

    Parameters
    ----------
    name : str
        The name that was not recognised (an option, a column, a flag).
    known : iterable of str
        The names it may have been meant as.
    cutoff : float, optional
        How alike the two must be (:func:`difflib.get_close_matches`' ratio, 0 to 1).

    Returns
    -------
    str
        ``" (did you mean X?)"`` for the closest known name, or ``""`` when none is close.
    """
    import difflib

    close = difflib.get_close_matches(name, list(known), n=1, cutoff=cutoff)
    return f" (did you mean {close[0]}?)" if close else ""


def say(opts: Any, text: str) -> None:
    """Print one line of progress on the terminal unless the run is quiet.

    Parameters
    ----------
    opts : object
        The run's options (anything with a boolean ``quiet``).
    text : str
        The line to print.
    """
    if not opts.quiet:
        print(text, flush=True)
