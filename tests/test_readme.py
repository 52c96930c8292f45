"""The README's example outputs are what the commands print today."""

import re
import shlex
from pathlib import Path

import pytest

from rvkep.cli import main

ROOT = Path(__file__).resolve().parents[1]


def examples():
    """(command, expected lines) of every README block that starts with `$ rvkep`
    and runs in a moment (check and periodogram)."""
    text = (ROOT / "README.md").read_text()
    out = []
    for block in re.findall(r"```\n(\$ rvkep (?:check|periodogram) .*?)```", text, re.S):
        lines = block.strip("\n").split("\n")
        out.append((lines[0][2:], lines[1:]))
    return out


@pytest.mark.parametrize("command,expected", examples(), ids=lambda x: str(x)[:30])
def test_readme_example_output_is_current(command, expected, tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(ROOT)
    args = shlex.split(command)[1:]
    if "--out" in args:
        args[args.index("--out") + 1] = str(tmp_path / "out")
    assert main(args) == 0
    printed = capsys.readouterr().out.splitlines()
    assert printed[: len(expected)] == expected


def test_the_readme_has_examples_to_check():
    assert {c.split()[1] for c, _ in examples()} == {"check", "periodogram"}
