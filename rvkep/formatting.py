"""Rounding of values with uncertainties for tables, figures and messages."""

from __future__ import annotations

import math

import numpy as np

__all__ = [
    "format_uncertain",
    "scaled_uncertain",
    "latex_value",
    "text_value",
    "text_estimate",
    "SMALL",
    "p_text",
    "p_relation",
]

#: Values smaller than this (in magnitude, not zero) are written as a mantissa times a
#: power of ten in tables and reports, not as 0.000000000259.
SMALL = 1e-3


#: p-values below this are written "< 1e-06": smaller ones differ between machines in
#: the last bits of a tail integral and decide nothing more
P_FLOOR = 1e-6


def p_text(p: float) -> str:
    """A p-value for text: three significant digits, or "< 1e-06".

    Parameters
    ----------
    p : float
        The p-value.

    Returns
    -------
    str
        Its text.
    """
    return f"< {P_FLOOR:.0e}" if p < P_FLOOR else f"{p:.3g}"


def p_relation(p: float) -> str:
    """A p-value after "p": "= 0.0191", or "< 1e-06" (:func:`p_text`).

    Parameters
    ----------
    p : float
        The p-value.

    Returns
    -------
    str
        The relation and the value.
    """
    text = p_text(p)
    return text if text.startswith("<") else f"= {text}"


def _sig_round(x: float, sig: int = 2) -> int:
    """Decimal place (as for round()) that keeps ``sig`` significant digits of x."""
    if not np.isfinite(x) or x == 0:
        return 2
    return sig - 1 - int(math.floor(math.log10(abs(x))))


def format_uncertain(value: float, minus: float, plus: float) -> tuple[str, str, str]:
    """Value and errors rounded by the usual convention: two significant digits on the
    smaller uncertainty, the value and the other error to the same decimal place
    (common practice, no source).

    Parameters
    ----------
    value, minus, plus : float
        The value and its lower and upper errors (positive numbers).

    Returns
    -------
    tuple of str
        The rounded value, minus and plus.
    """
    err = min(e for e in (minus, plus) if e > 0) if (minus > 0 or plus > 0) else 0.0
    places = _sig_round(err) if err > 0 else _sig_round(value, 6)

    def fmt(x):
        if places > 0:
            return f"{x:.{places}f}"
        return f"{round(x, places):.0f}"

    return fmt(value), fmt(minus), fmt(plus)


def scaled_uncertain(value: float, minus: float, plus: float) -> tuple[str, str, str, int | None]:
    """:func:`format_uncertain`, with a value smaller than :data:`SMALL` (and its
    errors) first divided by its power of ten, returned as the fourth item (None when
    not scaled).

    Parameters
    ----------
    value, minus, plus : float
        The value and its lower and upper errors (positive numbers).

    Returns
    -------
    tuple
        The rounded value, minus and plus (str) and the power of ten or None.
    """
    if value != 0 and np.isfinite(value) and abs(value) < SMALL:
        k = int(math.floor(math.log10(abs(value))))
        scale = 10.0**k
        return (*format_uncertain(value / scale, minus / scale, plus / scale), k)
    return (*format_uncertain(value, minus, plus), None)


def latex_value(value: float, minus: float, plus: float) -> str:
    """``$v^{+p}_{-m}$`` or ``$v \\pm e$`` when both round to the same; a tiny value as
    ``$(v^{+p}_{-m}) \\times 10^{k}$``.

    Parameters
    ----------
    value, minus, plus : float
        The value and its lower and upper errors (positive numbers).

    Returns
    -------
    str
        LaTeX math.
    """
    v, m, p, k = scaled_uncertain(value, minus, plus)
    body = rf"{v} \pm {m}" if m == p else rf"{v}^{{+{p}}}_{{-{m}}}"
    return f"${body}$" if k is None else rf"$({body}) \times 10^{{{k}}}$"


def text_value(value: float, minus: float, plus: float) -> str:
    """``v +- e`` or ``v +p -m`` for plain text; a tiny value as ``(v +- e)e-10``.

    Parameters
    ----------
    value, minus, plus : float
        The value and its lower and upper errors (positive numbers).

    Returns
    -------
    str
        Plain text.
    """
    v, m, p, k = scaled_uncertain(value, minus, plus)
    body = f"{v} +- {m}" if m == p else f"{v} +{p} -{m}"
    return body if k is None else f"({body})e{k}"


def text_estimate(estimate: dict) -> str:
    """:func:`text_value` of an estimate ``{"median", "minus", "plus"}``.

    Parameters
    ----------
    estimate : dict
        With ``median``, ``minus`` and ``plus``.

    Returns
    -------
    str
        Plain text.
    """
    return text_value(estimate["median"], estimate["minus"], estimate["plus"])
