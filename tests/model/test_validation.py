"""Every option and model-file value is checked at the edge: one line naming the
option or the key, exit status 2, nothing run and nothing written."""

import os
import stat

import pytest

from rvkep.cli import demo_folder, main

DATA = [str(demo_folder() / "kestrel.txt"), str(demo_folder() / "osprey.csv")]


@pytest.mark.parametrize(
    "extra,message",
    [
        (["--seed", "-1"], "--seed must be from 0 to 4294967295, got -1"),
        (["--max-steps", "1"], "--max-steps must be from 100 to 10000000, got 1"),
        (["--max-steps", "-5"], "--max-steps must be from 100"),
        (["--star-mass", "inf"], "--star-mass must be a finite number"),
        (["--star-mass", "1", "--star-mass-err", "nan"], "--star-mass-err must be a finite number"),
        (["--star-mass-err", "0.1"], "--star-mass-err needs --star-mass"),
        (["--star-mass", "-1"], "--star-mass must be from 0.01 to 1000 solar masses, got -1"),
        (["--fap", "2"], "--fap must be above 0 and below 1, got 2"),
        (["--fap", "-1"], "--fap must be above 0 and below 1"),
        (["--min-period", "1e-9"], "--min-period must be from 0.001 to 10000000 days"),
        (["--max-period", "1e30"], "--max-period must be from 0.001"),
    ],
)  # fmt: skip
def test_bad_option_values_are_refused_before_any_work(tmp_path, capsys, extra, message):
    out = tmp_path / "out"
    code = main(["analyze", *DATA, "--quiet", "--quick", "--out", str(out), *extra])
    err = capsys.readouterr().err.strip()
    assert code == 2 and message in err and len(err.splitlines()) == 1, err
    assert not out.exists()


def test_out_naming_a_file_is_refused(tmp_path, capsys):
    target = tmp_path / "taken"
    target.write_text("x")
    assert main(["analyze", *DATA, "--quiet", "--out", str(target)]) == 2
    assert "exists and is not a folder" in capsys.readouterr().err
    assert target.read_text() == "x"


@pytest.mark.skipif(os.geteuid() == 0, reason="root writes anywhere")
def test_read_only_out_is_refused_first(tmp_path, capsys):
    ro = tmp_path / "ro"
    ro.mkdir()
    ro.chmod(stat.S_IRUSR | stat.S_IXUSR)
    assert main(["analyze", *DATA, "--quiet", "--out", str(ro / "x")]) == 2
    assert "cannot write there" in capsys.readouterr().err


def test_unwritable_out_detected_with_access_check(tmp_path, monkeypatch):
    # root can write anywhere, so check the test through os.access itself
    from rvkep.errors import OptionError
    from rvkep.pipeline import AnalyzeOptions, validate_options

    monkeypatch.setattr(os, "access", lambda path, mode: False)
    with pytest.raises(OptionError, match="cannot write there"):
        validate_options(AnalyzeOptions(out=str(tmp_path / "new")))


@pytest.mark.parametrize(
    "text,message",
    [
        ("[companions.b]\nperiod = -12.3", "companions.b.period: must lie between"),
        ("[companions.b]\nperiod = 0", "companions.b.period: must lie between"),
        ("[companions.b]\nperiod = {start = 3, prior = 'uniform', min = -10, max = 5}",
         "allows periods <= 0"),
        ("[companions.b]\nperiod = 10\nK = {prior = 'uniform', min = 0, maxx = 5}",
         "unknown key 'maxx'"),
        ("[companions.b]\nperiod = 10\nK = {prior = 'uniform', min = 0, max = 9, maxx = 5}",
         "unknown key 'maxx'"),
        ("[star]\nmass = 1.0\nmass_err = -0.1", "star.mass_err: must not be negative"),
        ("[sampling]\nwalkers = 3", "sampling.walkers: must lie between"),
        ("[sampling]\nwalkers = 10000000", "sampling.walkers: must lie between"),
        ("[sampling]\nseed = -1", "sampling.seed"),
        ("[companions.b]\nperiod = 10\nK = {prior = 'uniform', min = 0, max = inf}",
         "must be finite"),
    ],
)  # fmt: skip
def test_bad_model_file_values(tmp_path, text, message):
    from rvkep.errors import ModelFileError
    from rvkep.modelfile import read_model_file

    f = tmp_path / "m.toml"
    f.write_text(text + "\n")
    with pytest.raises(ModelFileError, match=message.replace("(", r"\(")):
        read_model_file(f)


def test_scheduler_that_is_not_an_address(tmp_path, capsys):
    targets = tmp_path / "t.csv"
    targets.write_text(f"name,data,star_mass,star_mass_err\nveyla,{DATA[0]},0.92,0.04\n")
    code = main(["batch", str(targets), "--out", str(tmp_path / "o"), "--scheduler",
                 "notanaddress", "--quiet"])  # fmt: skip
    err = capsys.readouterr().err.strip()
    assert code == 2 and "not a scheduler address" in err and len(err.splitlines()) == 1


@pytest.mark.integration
def test_fixed_K_and_fixed_jitters_run_to_the_end(tmp_path, capsys):
    """Fixed parameters have no distribution: the corner plot lists them instead of
    failing (it raised "no dynamic range" before), and nothing leaks onto --quiet."""
    model = tmp_path / "fixed.toml"
    model.write_text(
        f'[data]\nfiles = ["{DATA[0]}", "{DATA[1]}"]\n'
        '[instruments.kestrel]\njitter = { hold = 2.0 }\n'
        '[instruments.osprey]\njitter = { hold = 2.0 }\n'
        '[companions.b]\nperiod = 11.87\nK = { hold = 18.0 }\n'
    )
    out = tmp_path / "out"
    code = main(["sample", str(model), "--out", str(out), "--max-steps", "200", "--quiet"])
    printed = capsys.readouterr()
    assert code == 0, printed.err
    assert printed.out == "" and "WARNING" not in printed.err
    import json

    res = json.loads((out / "results.json").read_text())
    assert res["planets"][0]["K_mps"]["median"] == 18.0
    assert (out / "corner_b.png").exists()


@pytest.mark.integration
@pytest.mark.parametrize(
    "prior", ["{ prior = 'uniform', min = 50000, max = 60000 }",
              "{ prior = 'loguniform', min = 0.001, max = 0.0011 }"],
)  # fmt: skip
def test_period_prior_away_from_the_data_range_runs_or_refuses_in_one_line(tmp_path, capsys, prior):
    """Priors far beyond the baseline or below the sampling run (such a model is legal,
    if poorly constrained), and say nothing on --quiet; they must never crash."""
    model = tmp_path / "far.toml"
    model.write_text(
        f'[data]\nfiles = ["{DATA[0]}", "{DATA[1]}"]\n[companions.b]\nperiod = {prior}\n'
    )
    code = main(["sample", str(model), "--out", str(tmp_path / "out"), "--max-steps", "200",
                 "--quiet"])  # fmt: skip
    printed = capsys.readouterr()
    assert code == 0 and "Traceback" not in printed.err, printed.err


def test_one_trend_rule_for_command_line_target_lists_and_the_api(tmp_path, capsys):
    from rvkep.batch import read_targets
    from rvkep.defaults import parse_trend

    assert [parse_trend(v) for v in ("auto", " 2 ", 1, 0.0)] == ["auto", 2, 1, 0]
    for bad in ("3", True, "linear", None):
        with pytest.raises(ValueError, match="must be auto, 0, 1 or 2"):
            parse_trend(bad)
    targets = tmp_path / "t.csv"
    targets.write_text(f"name,data,star_mass,star_mass_err,trend\nveyla,{DATA[0]},0.92,0.04,3\n")
    assert "line 2: trend must be auto, 0, 1 or 2, got '3'" in read_targets(targets)[0].problem
    assert main(["analyze", DATA[0], "--out", str(tmp_path / "o"), "--trend", "3"]) == 2
    err = capsys.readouterr().err
    assert "rvkep analyze: error: --trend must be auto, 0, 1 or 2, got '3'" in err
    assert len(err.strip().splitlines()) == 1
