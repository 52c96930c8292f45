"""Hostile and careless input: names that would become paths, markup or formulas, and
output paths outside what the user asked for. Each case is refused with one line and
exit status 2, or written inert; nothing lands outside the output folder.
"""

import csv
import io
import os
import sys
import warnings
from pathlib import Path

import numpy as np
import pytest

from rvkep.cli import demo_folder, main
from rvkep.data import RVData
from rvkep.names import csv_cell, latex_escape, name_problem, relative_link
from rvkep.orbit import radial_velocity

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))


def _files_under(root: Path) -> set[Path]:
    return {p for p in root.rglob("*")}


def _one_line_error(capsys) -> str:
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "Traceback" not in err, err
    return err


# --- names that become file names --------------------------------------------------

ESCAPING_NAMES = ["../../../ESCAPED", "a/b", "..\\x", ".hidden", "", " ", "tab\there", "x" * 101]


@pytest.mark.parametrize("name", ESCAPING_NAMES)
def test_name_that_would_leave_the_folder_is_refused(name):
    assert name_problem(name, "companion name") is not None


@pytest.mark.parametrize("label", ["../../../ESCAPED", "sub/dir", ".b"])
def test_model_file_companion_named_as_a_path_is_refused(tmp_path, capsys, label):
    kestrel = demo_folder() / "kestrel.txt"
    model = tmp_path / "deep" / "M.toml"
    model.parent.mkdir()
    model.write_text(f'[data]\nfiles = ["{kestrel}"]\n\n[companions."{label}"]\nperiod = 11.87\n')
    out = tmp_path / "deep" / "out"
    before = _files_under(tmp_path)
    code = main(["analyze", "--model", str(model), "--out", str(out), "--quick", "--quiet"])
    assert code == 2
    err = _one_line_error(capsys)
    assert "M.toml: companions" in err and "companion name" in err
    assert _files_under(tmp_path) == before  # nothing written, no folder made


def test_figures_are_never_named_after_an_unsafe_label(tmp_path):
    # a Results built in Python (no model file) with a label that is a path
    from rvkep.errors import OptionError
    from rvkep.pipeline import write_figures

    class Fake:
        labels = ["../up"]

        def run_label(self):
            return "final"

        def run_marks(self):
            return []

    with pytest.raises(OptionError, match="companion name"):
        write_figures(Fake(), tmp_path / "out")
    assert not (tmp_path / "up.png").exists() and not list(tmp_path.rglob("*.png"))


# --- names as LaTeX, CSV and HTML cells ----------------------------------------------


def test_latex_escape_makes_every_special_character_literal():
    # the ten LaTeX special characters (Lamport, LaTeX: A Document Preparation System,
    # 2nd ed. 1994, sec. 2.2.1, from memory)
    out = latex_escape(r"# $ % & ~ _ ^ \ { }")
    assert out == (r"\# \$ \% \& \textasciitilde{} \_ \textasciicircum{} "
                   r"\textbackslash{} \{ \}")  # fmt: skip
    assert "\\input{" not in latex_escape(r"\input{/etc/passwd}")


@pytest.mark.parametrize("cell, guarded", [
    ("=1+1", "'=1+1"), ("@SUM(1+1)", "'@SUM(1+1)"), ("+cmd", "'+cmd"), ("-x", "'-x"),
    ("\tx", "'\tx"), ("-12.5", "-12.5"), ("+3", "+3"), ("osprey", "osprey"), (4.5, 4.5),
])  # fmt: skip
def test_csv_cells_never_start_a_formula(cell, guarded):
    # the usual CSV-injection guard (OWASP, CSV Injection; common practice, no source)
    assert csv_cell(cell) == guarded


@pytest.mark.parametrize("name", ["javascript:alert(3)", "//evil.example", "a b", "x?y#z"])
def test_links_are_relative_paths_into_the_folder(name):
    link = relative_link(name, "report.html")
    assert link.startswith("./") and link.endswith("/report.html")
    assert ":" not in link and "//" not in link[1:] and "?" not in link and "#" not in link


def _hostile_run(tmp_path, instrument: str):
    from rvkep.optimize import fit_companions
    from rvkep.results import Results
    from rvkep.sampling import UnconvergedWarning

    # invented star (seed 4): P = 9.4 d, K = 12 m/s, e = 0.2
    rng = np.random.default_rng(4)
    t = np.sort(rng.uniform(2459000, 2459150, 40))
    v = radial_velocity(t, 9.4, 2459001.0, 0.2, 1.0, 12.0) + rng.normal(0, 2.0, 40)
    data = RVData(t, v, np.full(40, 2.0), np.full(40, instrument))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UnconvergedWarning)
        sampled = fit_companions(data, [[9.4]]).sample(seed=4, max_steps=1000,
                                                       check_every=500, progress=False)  # fmt: skip
    return Results.from_sampling(sampled)


def test_instrument_names_are_escaped_in_latex_and_quoted_in_csv(tmp_path):
    res = _hostile_run(tmp_path, r"\input{/etc/passwd}=1+1,osprey_2")
    tex = res.latex_table()
    assert r"\input{" not in tex
    assert r"\textbackslash{}input\{/etc/passwd\}=1+1,osprey\_2" in tex
    from rvkep.report import csv as csv_report

    rows = list(csv.reader(io.StringIO(csv_report.render(res).split("\n", 1)[1])))
    objects = {r[0] for r in rows[1:]}
    assert r"\input{/etc/passwd}=1+1,osprey_2" in objects  # one cell, comma and all
    res2 = _hostile_run(tmp_path, "=HYPERLINK(1)")
    rows = list(csv.reader(io.StringIO(csv_report.render(res2).split("\n", 1)[1])))
    assert "'=HYPERLINK(1)" in {r[0] for r in rows[1:]}


# --- output paths ---------------------------------------------------------------------


def test_analyze_refuses_a_folder_that_holds_other_files(tmp_path, capsys):
    home = tmp_path / "home"
    home.mkdir()
    (home / "thesis.tex").write_text("mine\n")
    before = _files_under(tmp_path)
    code = main(["demo", "--quick", "--quiet", "--out", str(home)])
    assert code == 2
    assert "holds other files and no rvkep output" in _one_line_error(capsys)
    assert _files_under(tmp_path) == before


def test_analyze_creates_only_the_last_folder(tmp_path, capsys):
    out = tmp_path / "missing" / "deeper" / "run"
    assert main(["demo", "--quick", "--quiet", "--out", str(out)]) == 2
    assert "does not exist" in _one_line_error(capsys)
    assert not (tmp_path / "missing").exists()


def test_a_refused_run_leaves_no_folder_and_no_lock(tmp_path, capsys):
    out = tmp_path / "run"
    code = main(["demo", "--quick", "--quiet", "--out", str(out), "--max-period", "0.5"])
    assert code == 2
    _one_line_error(capsys)
    assert not out.exists()


@pytest.fixture(scope="module")
def finished(tmp_path_factory):
    from helpers import finished_run

    return finished_run(tmp_path_factory.mktemp("hostile") / "run")


@pytest.mark.parametrize("command", [
    ["predict", "{run}", "--from", "2459000", "--to", "2459010", "--out", "{bad}"],
    ["events", "{run}", "--from", "2459000", "--to", "2459100", "--out", "{bad}"],
])  # fmt: skip
@pytest.mark.parametrize("bad", ["{tmp}/nonexist/x.csv", "{tmp}"])
def test_file_outputs_need_an_existing_folder_and_are_not_folders(
        finished, tmp_path, capsys, command, bad):  # fmt: skip
    bad = bad.format(tmp=tmp_path)
    before = _files_under(tmp_path)
    argv = [a.format(run=finished, bad=bad) for a in command]
    assert main(argv) == 2
    err = _one_line_error(capsys)
    assert "--out" in err and ("does not exist" in err or "is a folder" in err)
    assert _files_under(tmp_path) == before


def test_the_lock_file_is_gone_after_a_run(tmp_path):
    out = tmp_path / "run"
    assert main(["demo", "--quick", "--quiet", "--figures", "none", "--out", str(out)]) == 0
    assert (out / "results.json").exists() and not (out / ".rvkep.lock").exists()
    # and the folder, now rvkep's own, takes a second run
    assert main(["demo", "--quick", "--quiet", "--figures", "none", "--out", str(out)]) == 0


def test_lock_taken_after_the_holder_removed_the_file_is_on_the_file_on_disk(tmp_path):
    from rvkep.errors import FolderBusyError
    from rvkep.outputs import LOCK_NAME, folder_lock

    with folder_lock(tmp_path):
        assert (tmp_path / LOCK_NAME).exists()
        with pytest.raises(FolderBusyError), folder_lock(tmp_path):
            pass
    assert not (tmp_path / LOCK_NAME).exists()
    with folder_lock(tmp_path):  # free again
        assert os.stat(tmp_path / LOCK_NAME)


# --- options that gave silent wrong answers ----------------------------------------------


@pytest.mark.parametrize("extra, message", [
    (["--search", "keplerian", "--bootstrap", "0"], "--bootstrap must be from 10 to 100000"),
    (["--bootstrap", "-1"], "--bootstrap must be from 10 to 100000"),
    (["--bin", "300"], "fewer than the 8 a fit needs"),
    (["--star-mass", "1", "--star-mass-err", "2"], "more than a third of --star-mass"),
    (["--star-mass", "1e308"], "--star-mass must be from 0.01 to 1000 solar masses, got 1e+308"),
])  # fmt: skip
def test_options_that_gave_silent_wrong_answers_are_refused(tmp_path, capsys, extra, message):
    out = tmp_path / "run"
    files = [str(demo_folder() / "kestrel.txt"), str(demo_folder() / "osprey.csv")]
    assert main(["analyze", *files, "--quick", "--quiet", "--out", str(out), *extra]) == 2
    assert message in _one_line_error(capsys)
    assert not out.exists()


def test_periodogram_refuses_a_bootstrap_that_calibrates_nothing(tmp_path, capsys):
    kestrel = str(demo_folder() / "kestrel.txt")
    argv = ["periodogram", kestrel, "--search", "keplerian", "--bootstrap", "0",
            "--out", str(tmp_path)]
    assert main(argv) == 2
    assert "--bootstrap must be from 10 to 100000" in _one_line_error(capsys)


# --- model-file values outside the physical range ----------------------------------------


@pytest.mark.parametrize("line, message", [
    ('ecc = { prior = "uniform", min = 0, max = 1.5 }',
     "companions.b.ecc: the prior uniform(0, 1.5) reaches outside ecc's range [0, 1)"),
    ('ecc = { prior = "uniform", min = -0.5, max = 0.9 }',
     "companions.b.ecc: the prior uniform(-0.5, 0.9) reaches outside ecc's range [0, 1)"),
    ('ecc = { prior = "normal", mean = 0.1, sd = 0.2 }', "reaches outside ecc's range"),
    ('K = { prior = "uniform", min = -50, max = 50 }',
     "companions.b.K: the prior uniform(-50, 50) reaches outside K's range [0, inf)"),
    ("K = -5", "companions.b.K: -5 is outside K's range [0, inf)"),
])  # fmt: skip
def test_priors_outside_the_physical_range_are_refused(tmp_path, capsys, line, message):
    # e lies in [0, 1) for a bound orbit, K >= 0 and jitter >= 0 by their definitions
    # (common practice, no source); the model's bounds would otherwise cut the prior
    # silently while the priors table printed the original
    kestrel = demo_folder() / "kestrel.txt"
    model = tmp_path / "M.toml"
    model.write_text(f'[data]\nfiles = ["{kestrel}"]\n[companions.b]\nperiod = 11.87\n{line}\n')
    out = tmp_path / "out"
    assert main(["analyze", "--model", str(model), "--out", str(out), "--quick"]) == 2
    assert message in _one_line_error(capsys)
    assert not out.exists()


@pytest.mark.parametrize("jitter, message", [
    ("-3", "instruments.kestrel.jitter: -3 is outside jitter's range [0, inf)"),
    ('{ prior = "uniform", min = -10, max = 10 }', "reaches outside jitter's range"),
])  # fmt: skip
def test_negative_jitters_are_refused(tmp_path, capsys, jitter, message):
    kestrel = demo_folder() / "kestrel.txt"
    model = tmp_path / "M.toml"
    model.write_text(f'[data]\nfiles = ["{kestrel}"]\n[instruments.kestrel]\njitter = {jitter}\n')
    assert main(["analyze", "--model", str(model), "--out", str(tmp_path / "o")]) == 2
    assert message in _one_line_error(capsys)


def test_physical_priors_stay_accepted():
    from rvkep.modelfile import parse_model

    spec = parse_model({"companions": {"b": {
        "period": 10.0, "K": {"prior": "uniform", "min": 0, "max": 50},
        "ecc": {"prior": "beta", "a": 0.867, "b": 3.03}}},
        "instruments": {"kestrel": {"jitter": 0.0}}})  # fmt: skip
    assert spec.companions[0].ecc.describe().startswith("beta")


# --- inputs that are not regular files ---------------------------------------------------


@pytest.mark.parametrize("command", [
    ["check", "{fifo}"],
    ["analyze", "{fifo}", "--out", "{tmp}/o"],
    ["analyze", "{kestrel}", "--model", "{fifo}", "--out", "{tmp}/o"],
    ["batch", "{fifo}", "--out", "{tmp}/o"],
])  # fmt: skip
def test_a_fifo_is_refused_not_waited_on(tmp_path, capsys, command):
    fifo = tmp_path / "pipe"
    os.mkfifo(fifo)
    argv = [a.format(fifo=fifo, tmp=tmp_path, kestrel=demo_folder() / "kestrel.txt")
            for a in command]  # fmt: skip
    assert main(argv) == 2  # without the check, opening the FIFO blocks for ever
    assert "pipe: not a regular file" in _one_line_error(capsys)
    assert not (tmp_path / "o").exists()


@pytest.mark.parametrize("end, message", [
    ("inf", "--to: 'inf' is not a time"),
    ("1e308", "--to: '1e308' is not a time (a finite number of days, at most 1e+08"),
    ("nan", "--to: 'nan' is not a time"),
])  # fmt: skip
def test_prediction_times_are_finite_and_short(tmp_path, capsys, end, message):
    assert main(["predict", str(tmp_path / "norun"), "--from", "0", "--to", end]) == 2
    err = _one_line_error(capsys)
    assert message in err and len(err) < 200
