"""Names that become file or folder names, and text that goes into other formats.

Target names become folders, companion labels become figure names
(``phase_<label>.png``): both pass :func:`name_problem` first, so no name can reach
outside the output folder. Text cells going into LaTeX, CSV or HTML links are made
inert by :func:`latex_escape`, :func:`csv_cell` and :func:`relative_link`.
"""

from __future__ import annotations

import re
import unicodedata
from urllib.parse import quote

__all__ = ["MAX_NAME", "name_problem", "shown", "latex_escape", "csv_cell", "relative_link"]

#: The longest name (characters) that becomes a file or folder name, which most file
#: systems cap at 255 bytes.
MAX_NAME = 100


def shown(name: str, width: int = 40) -> str:
    """A printable, bounded form of a name for messages and the summary.

    Parameters
    ----------
    name : str
        Any text.
    width : int
        Most characters kept (a longer name ends in "...").

    Returns
    -------
    str
        The escaped name, quoted.
    """
    text = name.encode("unicode_escape").decode("ascii")
    return repr(text if len(text) <= width else text[: width - 3] + "...")


def name_problem(name: str, what: str = "target name") -> str | None:
    """Why ``name`` cannot become a file or folder name, or None.

    Parameters
    ----------
    name : str
        The name.
    what : str
        What it names, for the message.

    Returns
    -------
    str or None
        The problem in a few words, or None for a good name.
    """
    if not name or not name.strip():
        return f"empty {what}"
    if len(name) > MAX_NAME or len(name.encode("utf-8")) > 200:
        return f"{what} of {len(name)} characters (at most {MAX_NAME})"
    bad = [c for c in name if unicodedata.category(c).startswith("C")]
    if bad:
        return f"{what} {shown(name)} holds a control character ({bad[0]!r})"
    if "/" in name or "\\" in name:
        return f"{what} {shown(name)} holds a path separator"
    if name.startswith("."):
        return f"{what} {shown(name)} starts with a dot"
    return None


_LATEX = {"\\": r"\textbackslash{}", "{": r"\{", "}": r"\}", "%": r"\%", "_": r"\_",
          "&": r"\&", "#": r"\#", "$": r"\$", "~": r"\textasciitilde{}",
          "^": r"\textasciicircum{}"}  # fmt: skip
_LATEX_RE = re.compile("|".join(re.escape(k) for k in _LATEX))


def latex_escape(text: str) -> str:
    r"""Text as LaTeX prints it literally: every special character escaped in one pass.

    Parameters
    ----------
    text : str
        Any text.

    Returns
    -------
    str
        LaTeX source that prints ``text``.

    Examples
    --------
    >>> latex_escape(r"\input{/etc/passwd} osprey_2 50%")
    '\\textbackslash{}input\\{/etc/passwd\\} osprey\\_2 50\\%'
    """
    return _LATEX_RE.sub(lambda m: _LATEX[m.group()], str(text))


def csv_cell(value):
    """A text cell that a spreadsheet will not run as a formula: one starting with
    ``= + - @`` (or a tab or carriage return) gets a leading apostrophe (the usual
    CSV-injection guard, OWASP; common practice, no source). Numbers, and text that
    reads as a number (``-12.5``), pass unchanged.

    Parameters
    ----------
    value : object
        A cell's value.

    Returns
    -------
    object
        ``value``, or the guarded text.
    """
    if not isinstance(value, str) or not value or value[0] not in "=+-@\t\r":
        return value
    try:
        float(value)
        return value
    except ValueError:
        return "'" + value


def relative_link(folder_name: str, file_name: str) -> str:
    """A relative link ``./<folder>/<file>`` with the folder name percent-encoded, so that
    no name (``javascript:...``, ``//host``) can become a scheme or another host.

    Parameters
    ----------
    folder_name, file_name : str
        The target's folder and the file in it.

    Returns
    -------
    str
        The link.
    """
    return f"./{quote(folder_name, safe='')}/{quote(file_name)}"
