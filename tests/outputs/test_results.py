"""Rounding for tables, the results files, and the sample command."""

import json
from pathlib import Path

import pytest

from rvkep.cli import main
from rvkep.formatting import format_uncertain, latex_value, text_value

DEMO = Path(__file__).resolve().parents[2] / "demo_data"


@pytest.mark.parametrize(
    "value,minus,plus,expected",
    [
        # two significant digits on the (smaller) uncertainty, value to the same place
        # (common practice, no source)
        (143.37701, 0.10519, 0.10452, ("143.38", "0.11", "0.10")),
        (0.374812, 0.00951, 0.00978, ("0.3748", "0.0095", "0.0098")),
        (11.8746107, 0.0013189, 0.0012876, ("11.8746", "0.0013", "0.0013")),
        (2459849.81834, 0.8, 0.75, ("2459849.82", "0.80", "0.75")),
        (1234.5, 120.0, 180.0, ("1230", "120", "180")),
    ],
)
def test_rounding_convention(value, minus, plus, expected):
    assert format_uncertain(value, minus, plus) == expected


def test_latex_and_text_forms():
    assert latex_value(11.8746107, 0.0013189, 0.0012876) == r"$11.8746 \pm 0.0013$"
    assert latex_value(143.37701, 0.10519, 0.10452) == r"$143.38^{+0.10}_{-0.11}$"
    assert text_value(143.37701, 0.10519, 0.10452) == "143.38 +0.10 -0.11"


@pytest.mark.integration
def test_sample_command_with_a_model_file(tmp_path):
    model = tmp_path / "veyla.toml"
    model.write_text(
        f"""
[star]
name = "Veyla"
mass = 0.92
mass_err = 0.04
radius = 0.9
teff = 5500

[data]
files = ["{DEMO / "kestrel.txt"}", "{DEMO / "osprey.csv"}"]

[trend]
degree = 1

[companions.b]
period = {{ start = 11.87, prior = "uniform", min = 11.5, max = 12.5 }}
ecc = {{ start = 0.1, prior = "beta", a = 0.867, b = 3.03 }}

[companions.c]
period = 143.0

[sampling]
walkers = 40
seed = 7
"""
    )
    out = tmp_path / "out"
    assert main(["sample", str(model), "--out", str(out), "--max-steps", "600", "--quiet"]) == 0
    res = json.loads((out / "results.json").read_text())
    assert [p["label"] for p in res["planets"]] == ["b", "c"]
    b = res["planets"][0]
    assert 11.5 < b["period_d"]["median"] < 12.5
    assert "transit_probability" in b and "teq_k" in b and "insolation_earth" in b
    assert res["trend"]["degree"] == 1 and "slope_mps_per_yr" in res["trend"]
    assert any(p["prior"] == "beta(0.867, 3.03)" for p in res["priors"])
    assert res["star"]["mass_msun"] == 0.92 and res["star"]["assumed"] is False
    assert res["sampler"]["walkers"] == 40 and res["seed"] == 7  # from [sampling]
    tex = (out / "parameters.tex").read_text()
    assert r"$m \sin i$" in tex and r"\dot\gamma" in tex
    csv = (out / "parameters.csv").read_text().splitlines()
    assert csv[0].startswith("# rvkep ") and csv[1] == "object,parameter,median,minus,plus,unit"
    assert any(line.startswith("b,msini_mjup,") for line in csv)


def test_sample_command_bad_model(tmp_path, capsys):
    model = tmp_path / "bad.toml"
    model.write_text("[companions.b]\nperiod = { start = 3, prior = 'gauss' }\n")
    assert (
        main(["sample", str(model), str(DEMO / "kestrel.txt"), "--out", str(tmp_path / "o")]) == 2
    )
    err = capsys.readouterr().err
    assert "companions.b.period: unknown prior 'gauss'" in err and err.count("\n") == 1
    assert not (tmp_path / "o").exists()
