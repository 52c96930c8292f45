"""Rounding of values with uncertainties for tables, figures and messages."""

from __future__ import annotations

import math

import numpy as np

__all__ = ["format_uncertain", "latex_value", "text_value", "text_estimate"]


def _sig_round(x: float, sig: int = 2) -> int:
    """Decimal place (as for round()) that keeps ``sig`` significant digits of x."""
    if not np.isfinite(x) or x == 0:
        return 2
    return sig - 1 - int(math.floor(math.log10(abs(x))))


def format_uncertain(value: float, minus: float, plus: float) -> tuple[str, str, str]:
    """Value and errors rounded by the usual convention: two significant digits on the
    smaller uncertainty, the value and the other error to the same decimal place
    (common practice, no source)."""
    err = min(e for e in (minus, plus) if e > 0) if (minus > 0 or plus > 0) else 0.0
    places = _sig_round(err) if err > 0 else _sig_round(value, 6)

    def fmt(x):
        if places > 0:
            return f"{x:.{places}f}"
        return f"{round(x, places):.0f}"

    return fmt(value), fmt(minus), fmt(plus)


def latex_value(value: float, minus: float, plus: float) -> str:
    """``$v^{+p}_{-m}$`` or ``$v \\pm e$`` when both round to the same."""
    v, m, p = format_uncertain(value, minus, plus)
    if m == p:
        return rf"${v} \pm {m}$"
    return rf"${v}^{{+{p}}}_{{-{m}}}$"


def text_value(value: float, minus: float, plus: float) -> str:
    """``v +- e`` or ``v +p -m`` for plain text."""
    v, m, p = format_uncertain(value, minus, plus)
    return f"{v} +- {m}" if m == p else f"{v} +{p} -{m}"


def text_estimate(estimate: dict) -> str:
    """:func:`text_value` of an estimate ``{"median", "minus", "plus"}``."""
    return text_value(estimate["median"], estimate["minus"], estimate["plus"])
