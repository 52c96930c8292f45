"""The README's example outputs are what the commands print today."""

import re
import shlex
from pathlib import Path

import pytest

from rvkep.cli import main

ROOT = Path(__file__).resolve().parents[2]


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


NUMBER = re.compile(r"[-+]?\d+(?:\.\d+)?(?:e[-+]?\d+)?")
ERRORS = re.compile(r"\+(\d+(?:\.\d+)?(?:e[-+]?\d+)?) -(\d+(?:\.\d+)?(?:e[-+]?\d+)?)")
SYMMETRIC = re.compile(r"\+- (\d+(?:\.\d+)?(?:e[-+]?\d+)?)")


def _both_sides(line: str) -> str:
    """``+- s`` written as ``+s -s``: whether an error bar prints symmetric depends on
    the last digit of a chain's quantiles, which differs between machines."""
    return SYMMETRIC.sub(r"+\1 -\1", line)


def _demo_block() -> list[str]:
    text = (ROOT / "README.md").read_text()
    block = re.search(r"```\n\$ rvkep demo\n(.*?)```", text, re.S).group(1)
    return block.strip("\n").split("\n")


@pytest.mark.integration
def test_readme_demo_output_is_what_the_demo_prints(tmp_path, monkeypatch, capsys):
    """The README's demo block against a run of ``rvkep demo``: every line's words
    equal, every error bar within 20% and every other number within 2% (the chains
    differ between machines; the elapsed time and the truth file's path are the
    machine's)."""
    monkeypatch.chdir(tmp_path)
    assert main(["demo"]) == 0
    printed = capsys.readouterr().out.strip("\n").split("\n")
    expected = _demo_block()
    assert len(printed) == len(expected), printed
    for got, want in zip(printed, expected, strict=True):
        if want.startswith("demo: ") or want.startswith("done in "):
            got, want = re.sub(r"truth in .*$|done in [\d.]+ s", "", got), re.sub(
                r"truth in .*$|done in [\d.]+ s", "", want)
        if want.rstrip().endswith("..."):  # a line the README shortens
            want = want.rstrip(". ")
            got = got[: len(want)]
        got, want = _both_sides(got), _both_sides(want)
        assert NUMBER.sub("#", got) == NUMBER.sub("#", want), (got, want)
        # error bars within 20% (two chains' quantiles of a few thousand draws), the
        # other numbers within 2%
        for pa, pb in zip(ERRORS.findall(got), ERRORS.findall(want), strict=True):
            for a, b in zip(pa, pb, strict=True):
                assert float(a) == pytest.approx(float(b), rel=0.2, abs=0.011), (got, want)
        values = zip(NUMBER.findall(ERRORS.sub("", got)), NUMBER.findall(ERRORS.sub("", want)),
                     strict=True)  # fmt: skip
        for a, b in values:
            assert float(a) == pytest.approx(float(b), rel=0.02, abs=0.011), (got, want)
