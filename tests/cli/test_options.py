"""Each option is declared once (rvkep/options.py): the command line's flags, the Python
keywords and the target-list columns come from that table, and so does validation,
the same for every subcommand, before any file is read or folder made.

The checks here are of rvkep's own interfaces against each other and against the
usual conventions of command-line tools (one-line usage errors with exit status 2, a
close match for a mistyped option: common practice, no source)."""

import inspect

import pytest

import rvkep
from rvkep import options
from rvkep.cli import build_parser, demo_folder, main

DATA = [str(demo_folder() / "kestrel.txt"), str(demo_folder() / "osprey.csv")]

#: the batch's own options, applied to every target (not columns of a target list);
#: star_name is the list's ``name`` column
BATCH_WIDE = {"out", "seed", "quick", "quiet", "timings", "star_name"}


def _flags(command: str) -> set[str]:
    sub = build_parser().subcommands[command]
    return {a.dest for a in sub._actions if a.option_strings and a.dest != "help"}


def test_flags_keywords_and_columns_are_one_set():
    keywords = set(inspect.signature(rvkep.analyze).parameters) - {"files", "opts"}
    fields = set(rvkep.pipeline.AnalyzeOptions.__dataclass_fields__) - {"command"}
    columns = {o.name for o in options.columns()}
    assert _flags("analyze") == keywords == fields
    assert columns == keywords - BATCH_WIDE
    # the flag is the keyword with dashes
    sub = build_parser().subcommands["analyze"]
    spelled = {a.dest: a.option_strings[0] for a in sub._actions if a.option_strings}
    assert all(spelled[k] == "--" + k.replace("_", "-") for k in keywords)


def test_one_declaration_per_option_and_command():
    seen = set()
    for opt in options.OPTIONS:
        for command in opt.commands:
            assert (command, opt.name) not in seen, (command, opt.name)
            seen.add((command, opt.name))
        assert opt.help, opt.name


def test_help_of_every_subcommand_shows_defaults_and_no_doubled_percent(capsys):
    for command in build_parser().subcommands:
        assert main([command, "--help"]) == 0
        text = capsys.readouterr().out
        assert "%%" not in text, command
    main(["analyze", "--help"])
    text = " ".join(capsys.readouterr().out.split())
    assert "--max-steps N cap on sampler steps; default the model file's" in text
    assert "--star-teff-err S 1-sigma error of the effective temperature, in K" in text
    main(["demo", "--help"])
    assert "the demo star's, 0.92 +- 0.04" in " ".join(capsys.readouterr().out.split())


@pytest.mark.parametrize("argv, message", [
    (["analyze", "x.txt", "--star-mas", "1"],
     "rvkep analyze: error: unknown option --star-mas (did you mean --star-mass?)"),
    (["periodogram", "x.txt", "--max-signal", "1"],
     "rvkep periodogram: error: unknown option --max-signal (did you mean --max-signals?)"),
    (["demo", "--model", "m.toml"],
     "rvkep demo: error: unknown option --model: rvkep demo has no --model (rvkep analyze "
     "takes it)"),
    (["analyze", "x.txt", "--seed", "-1"],
     "rvkep analyze: error: --seed must be from 0 to 4294967295, got -1"),
    (["analyze", "x.txt", "--seed", "1e20"],
     "rvkep analyze: error: --seed must be from 0 to 4294967295, got 1e+20"),
    (["batch", "t.csv", "--out", "o", "--seed", "-1"],
     "rvkep batch: error: --seed must be from 0 to 4294967295, got -1"),
    (["batch", "t.csv", "--out", "o", "--seed", "1e20"],
     "rvkep batch: error: --seed must be from 0 to 4294967295, got 1e+20"),
    (["predict", "run", "--from", "0", "--to", "1", "--seed", "-1"],
     "rvkep predict: error: --seed must be from 0"),
    (["plan", "run", "--seed", "-1"], "rvkep plan: error: --seed must be from 0"),
    (["limits", "run", "--seed", "-1"], "rvkep limits: error: --seed must be from 0"),
    (["limits", "run", "--fap", "-1"], "--fap must be above 0 and below 1, got -1"),
    (["limits", "run", "--fap", "0"], "--fap must be above 0 and below 1, got 0"),
    (["limits", "run", "--fap", "nan"], "--fap must be a finite number"),
    (["limits", "run", "--fap", "inf"], "--fap must be a finite number"),
    (["limits", "run", "--periods", "1:inf"], "--periods must be two finite numbers"),
    (["limits", "run", "--masses", "1:inf"], "--masses must be two finite numbers"),
    (["limits", "run", "--periods", "0.0001:0.001"],
     "--periods must be from 0.001 to 10000000 days, got 0.0001"),
    (["limits", "run", "--periods", "5:2"], "--periods needs MIN < MAX, got 5:2"),
    (["limits", "run", "--workers", "0"], "--workers must be from 1 to 4096, got 0"),
    (["predict", "run", "--from", "0", "--to", "1", "--step", "inf"],
     "--step must be a finite number"),
    (["predict", "run", "--from", "0", "--to", "1", "--draws", "0"],
     "--draws must be from 1 to 10000000, got 0"),
    (["events", "run", "--from", "0", "--to", "1", "--time-offset", "nan"],
     "--time-offset must be a finite number"),
    (["plan", "run", "--nights", "2.5"], "--nights must be a whole number"),
    (["analyze", "x.txt", "--star-mass", "1e400"], "--star-mass must be a finite number"),
    (["analyze", "x.txt", "--bin", "0"], "--bin must be above 0 and at most 1000000 days"),
])  # fmt: skip
def test_usage_errors_are_one_line_naming_the_subcommand(argv, message, capsys, tmp_path,
                                                         monkeypatch):  # fmt: skip
    monkeypatch.chdir(tmp_path)
    assert main(argv) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and message in err, err
    assert list(tmp_path.iterdir()) == []


def test_period_range_is_checked_before_the_data_are_read(tmp_path, capsys):
    out = tmp_path / "out"
    # the data file does not exist: the option is refused first, and nothing is made
    assert main(["analyze", str(tmp_path / "absent.txt"), "--max-period", "0.5",
                 "--out", str(out)]) == 2  # fmt: skip
    err = capsys.readouterr().err.strip()
    assert err == ("rvkep analyze: error: --max-period 0.5 must exceed the shortest period "
                   "(the default 1.2 d)")  # fmt: skip
    assert not out.exists()
    assert main(["analyze", *DATA, "--min-period", "50", "--max-period", "20",
                 "--out", str(out)]) == 2  # fmt: skip
    assert "--max-period 20 must exceed the shortest period (--min-period 50 d)" in (
        capsys.readouterr().err)
    assert not out.exists()


def test_python_keywords_are_checked_like_flags(tmp_path):
    from rvkep.errors import DataError, OptionError

    with pytest.raises(TypeError, match="unexpected keyword argument 'star_mas' "
                                        r"\(did you mean star_mass\?\)"):  # fmt: skip
        rvkep.analyze(DATA, star_mas=1.0)
    with pytest.raises(OptionError, match="--max-steps must be from 100 to 10000000, got 5"):
        rvkep.analyze(DATA, max_steps=5, out=str(tmp_path / "o"))
    with pytest.raises(OptionError, match="--seed must be a whole number, got 1.5"):
        rvkep.analyze(DATA, seed=1.5, out=str(tmp_path / "o"))
    with pytest.raises(OptionError, match="--figures must be one of all, summary, none"):
        rvkep.analyze(DATA, figures="some", out=str(tmp_path / "o"))
    # one path as well as a list
    with pytest.raises(DataError, match="absent.txt: no such file"):
        rvkep.analyze(str(tmp_path / "absent.txt"), out=str(tmp_path / "o"))
    assert not (tmp_path / "o").exists()
    # the signature and the help list every option with its default
    sig = inspect.signature(rvkep.analyze)
    assert sig.parameters["max_companions"].default == 4
    assert sig.parameters["star_mass"].kind is inspect.Parameter.KEYWORD_ONLY
    assert "max_companions : int | None" in rvkep.analyze.__doc__


def test_model_file_companions_and_a_companion_count_conflict(tmp_path, capsys):
    model = tmp_path / "m.toml"
    model.write_text("[companions.b]\nperiod = 143.4\n[companions.c]\nperiod = 11.87\n")
    out = tmp_path / "o"
    argv = ["analyze", *DATA, "--model", str(model), "--out", str(out), "--quick"]
    assert main([*argv, "--companions", "1"]) == 2
    assert "--companions 1: the model file" in capsys.readouterr().err
    assert main([*argv, "--max-companions", "1"]) == 2
    assert "--max-companions: the model file" in capsys.readouterr().err
    assert not out.exists()


def test_sample_refuses_a_model_file_without_companions(tmp_path, capsys):
    model = tmp_path / "m.toml"
    model.write_text("[star]\nmass = 0.92\n")
    assert main(["sample", str(model), *DATA, "--out", str(tmp_path / "o")]) == 2
    assert "no [[companion]] table; rvkep sample fits the companions" in (
        capsys.readouterr().err)
    assert not (tmp_path / "o").exists()


def test_every_analysis_option_reaches_a_target(tmp_path, monkeypatch):
    """A cell of each new column arrives in the target's AnalyzeOptions."""
    from rvkep import batch

    seen = {}

    def fake_analyze(files, opts):
        seen["opts"] = opts

    monkeypatch.setattr("rvkep.pipeline.analyze", fake_analyze)
    cells = {"bin": "0.5", "bootstrap": "20", "choose_by": "evidence", "circular": "auto",
             "fap": "0.01", "format": "pdf", "max_period": "300", "max_steps": "2000",
             "min_period": "2", "star_radius": "0.9", "star_radius_err": "0.05",
             "star_teff": "5500", "star_teff_err": "80", "sampler": "nested"}  # fmt: skip
    p = tmp_path / "t.csv"
    p.write_text("name,data,star_mass,star_mass_err," + ",".join(cells) + "\n"
                 "x,a.txt,0.9,0.05," + ",".join(cells.values()) + "\n")  # fmt: skip
    (target,) = batch.read_targets(p)
    assert not target.problem
    batch.run_target(target, str(tmp_path / "out"))
    opts = seen["opts"]
    for name, text in cells.items():
        value = getattr(opts, name)
        assert str(value) == text or value == float(text), (name, value)
    # a bad cell fails its target alone, with the option's own message
    p.write_text("name,data,star_mass,star_mass_err,min_period,max_period\n"
                 "x,a.txt,0.9,0.05,50,20\ny,a.txt,0.9,0.05,,\n")  # fmt: skip
    x, y = batch.read_targets(p)
    assert "line 2: --max-period 20 must exceed the shortest period" in x.problem
    assert not y.problem
    p.write_text("name,data,star_mass,star_mass_err,max_planets\nx,a.txt,1,0,2\n")
    with pytest.raises(rvkep.errors.DataError,
                       match=r"unknown column\(s\) max_planets \(did you mean "
                             r"max_companions\?\)"):  # fmt: skip
        batch.read_targets(p)
