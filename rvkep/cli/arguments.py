"""The argparse side of the option table: a parser with one-line errors and "did you
mean", and each subcommand's arguments made from :data:`rvkep.options.OPTIONS`.
"""

from __future__ import annotations

import argparse
import re
import sys
from collections.abc import Callable
from dataclasses import replace
from typing import Any

from rvkep.errors import OptionError
from rvkep.messages import did_you_mean
from rvkep.option_checks import from_text
from rvkep.options import OPTIONS, Option, options_of

__all__ = ["Parser", "add_arguments"]


class Parser(argparse.ArgumentParser):
    """argparse with one-line errors (``rvkep analyze: error: ...``), no abbreviated
    options, and "did you mean" for an unknown option."""

    def __init__(self, *args, **kwargs):
        kwargs.setdefault("allow_abbrev", False)
        super().__init__(*args, **kwargs)
        self.subcommands: dict[str, Parser] = {}

    def error(self, message: str):  # type: ignore[override]
        # "argument --seed: must be ..." -> "--seed must be ..." (as the Python checks say)
        message = re.sub(r"^argument (--[\w-]+)(?:/[^:]*)?: ", r"\1 ", message)
        print(f"{self.prog}: error: {message}", file=sys.stderr)
        raise SystemExit(2)

    def unknown(self, extras: list[str]) -> str:
        """The message for arguments this parser does not take."""
        flags = [s for a in self._actions for s in a.option_strings
                 if s.startswith("--") and s != "--help"]  # fmt: skip
        first = extras[0]
        if first.startswith("-"):
            flag = first.split("=")[0]
            command = self.prog.split()[-1]
            elsewhere = sorted({c for o in OPTIONS if o.spelled == flag for c in o.commands
                                if c != command})  # fmt: skip
            if elsewhere:
                verb = "takes" if len(elsewhere) == 1 else "take"
                return (f"unknown option {first}: rvkep {command} has no {flag} (rvkep "
                        f"{', rvkep '.join(elsewhere)} {verb} it)")  # fmt: skip
            return f"unknown option {first}{did_you_mean(flag, flags, cutoff=0.75)}"
        return f"unexpected argument {first!r}"


def _argparse_type(opt: Option) -> Callable[[str], Any]:
    def parse(text: str):
        try:
            return from_text(opt, text, "value")
        except OptionError as exc:
            raise argparse.ArgumentTypeError(str(exc).removeprefix("value ")) from None

    parse.__name__ = opt.kind
    return parse


def add_arguments(p: argparse.ArgumentParser, command: str,
                  shown_defaults: dict[str, str] | None = None) -> None:  # fmt: skip
    """Add ``command``'s options to ``p`` (help from the table; ``shown_defaults``
    replaces how a default is described, e.g. the demo star's mass).

    Parameters
    ----------
    p : argparse.ArgumentParser
        The subcommand's parser.
    command : str
        The subcommand, whose options (:func:`rvkep.options.options_of`) are added.
    shown_defaults : dict, optional
        {option name: text} shown as the default instead of the table's.
    """
    groups: dict[str, Any] = {}
    for opt in options_of(command):
        if shown_defaults and opt.name in shown_defaults:
            opt = replace(opt, shown_default=shown_defaults[opt.name])
        target = p
        if opt.group:
            if opt.group not in groups:
                groups[opt.group] = p.add_mutually_exclusive_group()
            target = groups[opt.group]
        kw: dict[str, Any] = {"dest": opt.name, "help": opt.help_text(), "default": opt.default}
        if opt.kind == "flag":
            kw["action"] = "store_true"
        else:
            kw["type"] = _argparse_type(opt)
            if opt.kind == "choice" and opt.metavar is None:  # the registry's names
                kw["metavar"] = "|".join(opt.choice_list())
            else:
                kw["metavar"] = opt.metavar or ("X" if opt.kind == "float" else "N")
            if opt.required:
                kw["required"] = True
        target.add_argument(opt.spelled, **kw)
