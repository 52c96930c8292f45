"""Validation of option values against the table of :mod:`rvkep.options`: one value
(:func:`check_value`), one written as text (:func:`from_text`, :func:`from_cell`), and a
command's whole set with the rules between options (:func:`check`), all before any file is
read or folder made.
"""

from __future__ import annotations

import math

from rvkep.errors import OptionError
from rvkep.messages import did_you_mean
from rvkep.options import (
    DEFAULT_MIN_PERIOD,
    Option,
    number_text,
    options_of,
    parse_trend,
)

__all__ = ["check", "check_value", "from_text", "from_cell"]


def check_value(opt: Option, value, where: str | None = None):
    """``value`` checked against ``opt`` (and converted where a kind allows: an int
    for a float option, a list for columns).

    Parameters
    ----------
    opt : Option
        The option's declaration.
    value : object
        The value given (None: the option is not set).
    where : str, optional
        How the message names the option (default: its flag).

    Returns
    -------
    object
        The checked value, converted to the option's kind.

    Raises
    ------
    OptionError
        Naming ``where`` and the problem.
    """
    where = where or opt.spelled
    if value is None:
        if opt.required:
            raise OptionError(f"{where} is required")
        return None
    checker = _CHECKS.get(opt.kind)
    if checker is None:  # pragma: no cover - a table error
        raise AssertionError(f"unknown option kind {opt.kind!r}")
    return checker(opt, value, where)


def _number(opt: Option, value, where: str):
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise OptionError(f"{where} must be a number, got {value!r}")
    if opt.kind == "int":
        if isinstance(value, float):
            if not (math.isfinite(value) and value == int(value)):
                raise OptionError(f"{where} must be a whole number, got {number_text(value)}")
            value = int(value)
    elif not math.isfinite(value):
        raise OptionError(f"{where} must be a finite number, got {value}")
    _check_range(opt, float(value), where)
    return float(value) if opt.kind == "float" else int(value)


def _interval(opt: Option, value, where: str):
    try:
        lo, hi = (float(x) for x in value)
    except (TypeError, ValueError):
        raise OptionError(f"{where} must be MIN:MAX, got {value!r}") from None
    for x in (lo, hi):
        if not math.isfinite(x):
            raise OptionError(f"{where} must be two finite numbers, got {value!r}")
        _check_range(opt, x, where)
    if not lo < hi:
        raise OptionError(f"{where} needs MIN < MAX, got {lo:g}:{hi:g}")
    return (lo, hi)


def _flag(opt: Option, value, where: str):
    if not isinstance(value, bool):
        raise OptionError(f"{where} must be true or false, got {value!r}")
    return value


def _choice(opt: Option, value, where: str):
    choices = opt.choice_list()
    if value not in choices:
        raise OptionError(f"{where} must be one of {', '.join(map(str, choices))}, "
                          f"got {value!r}")  # fmt: skip
    return value


def _trend(opt: Option, value, where: str):
    try:
        return parse_trend(value)
    except ValueError as exc:
        raise OptionError(f"{where} {exc}") from None


def _columns(opt: Option, value, where: str):
    if isinstance(value, str):
        value = (value,)
    names = tuple(value)
    if not all(isinstance(c, str) and c.strip() for c in names):
        raise OptionError(f"{where} needs column names, got {value!r}")
    return tuple(c.strip() for c in names)


def _path(opt: Option, value, where: str):
    if not isinstance(value, (str, bytes)) and not hasattr(value, "__fspath__"):
        raise OptionError(f"{where} must be a path, got {value!r}")
    if not str(value):
        raise OptionError(f"{where} must not be empty")
    return value


def _text(opt: Option, value, where: str):
    if not isinstance(value, str):
        raise OptionError(f"{where} must be text, got {value!r}")
    return value


#: the check of each option kind: (opt, value, where) -> the checked value
_CHECKS = {"float": _number, "int": _number, "range": _interval, "flag": _flag,
           "choice": _choice, "trend": _trend, "columns": _columns, "path": _path,
           "text": _text}  # fmt: skip


def _check_range(opt: Option, x: float, where: str) -> None:
    unit = f" {opt.unit}" if opt.unit else ""
    low_bad = opt.low is not None and (x <= opt.low if opt.open_low else x < opt.low)
    high_bad = opt.high is not None and (x >= opt.high if opt.open_high else x > opt.high)
    if low_bad or high_bad:
        raise OptionError(f"{where} must be {opt.range_text()}{unit}, got {number_text(x)}")


def from_text(opt: Option, text: str, where: str | None = None):
    """The value of ``opt`` written as ``text`` (command line, target-list cell),
    checked; OptionError naming ``where`` otherwise.

    Parameters
    ----------
    opt : Option
        The option.
    text : str
        Its value as written.
    where : str, optional
        What to name in an error (a flag, a column); default the option's flag.

    Returns
    -------
    object
        The parsed, checked value.
    """
    where = where or opt.spelled
    s = text.strip()
    k = opt.kind
    if k in ("float", "int"):
        try:
            value = int(s) if k == "int" and s.lstrip("+-").isdigit() else float(s)
        except ValueError:
            kind = "a whole number" if k == "int" else "a number"
            raise OptionError(f"{where} must be {kind}, got {text[:40]!r}") from None
    elif k == "range":
        parts = s.replace(",", ":").split(":")
        try:
            value = tuple(float(x) for x in parts)
            if len(value) != 2:
                raise ValueError
        except ValueError:
            raise OptionError(f"{where} must be MIN:MAX, got {text[:40]!r}") from None
    elif k == "flag":
        v = s.lower()
        if v in ("", "0", "false", "no", "n"):
            value = False
        elif v in ("1", "true", "yes", "y"):
            value = True
        else:
            raise OptionError(f"{where} must be true or false, got {text[:40]!r}")
    elif k == "columns":
        value = tuple(c.strip() for c in s.replace(";", ",").split(","))
        if not all(value):
            raise OptionError(f"{where} needs column names separated by commas, got {text!r}")
    else:
        value = s if k in ("choice", "trend", "text") else text
    return check_value(opt, value, where)


def from_cell(opt: Option, text: str):
    """A target-list cell: empty means the default.

    Parameters
    ----------
    opt : Option
        The column's option.
    text : str
        The cell as read.

    Returns
    -------
    object
        The checked value, or the option's default for an empty cell.
    """
    if not text.strip():
        return opt.default
    return from_text(opt, text, opt.name)


def check(values: dict, command: str) -> dict:
    """Every value of ``values`` (names of ``command``'s options) checked, then the
    rules between options; returns the checked values (the given dict untouched).
    OptionError names the flag and the problem.

    Parameters
    ----------
    values : dict
        {option name: value}.
    command : str
        The subcommand the names belong to.

    Returns
    -------
    dict
        The checked values.

    Raises
    ------
    OptionError
        For an unknown name, a bad value or options that contradict each other.
    """
    known = {o.name: o for o in options_of(command)}
    out = {}
    for name, value in values.items():
        if name not in known:
            raise OptionError(f"rvkep {command} has no option {name!r}"
                              f"{did_you_mean(name, known)}")  # fmt: skip
        out[name] = check_value(known[name], value)
    _check_rules(out)
    return out


def _check_rules(v: dict) -> None:
    """The rules between options (only those a command has are looked at)."""
    for what in ("mass", "radius", "teff", "rotation"):
        if v.get(f"star_{what}_err") and v.get(f"star_{what}") is None:
            raise OptionError(f"--star-{what}-err needs --star-{what}")
    mass, err = v.get("star_mass"), v.get("star_mass_err")
    if mass and err and err > mass / 3:
        # a normal draw of the mass with sd above a third of it falls below zero often
        # enough that truncating it would bias every minimum mass
        raise OptionError(f"--star-mass-err {err:g} is more than a third of --star-mass "
                          f"{mass:g}: the mass draws would be cut at 0")  # fmt: skip
    lo, hi = v.get("min_period"), v.get("max_period")
    if hi is not None and not hi > (lo if lo is not None else DEFAULT_MIN_PERIOD):
        shown = f"--min-period {lo:g}" if lo is not None else f"the default {DEFAULT_MIN_PERIOD}"
        raise OptionError(f"--max-period {hi:g} must exceed the shortest period ({shown} d)")
    if v.get("companions") is not None and v.get("max_companions", 4) != 4:
        raise OptionError("give --companions or --max-companions, not both")
    if v.get("choose_by") == "evidence" and v.get("companions") is not None:
        raise OptionError("--choose-by evidence chooses the number of companions; "
                          "--companions fixes it: give one")  # fmt: skip
