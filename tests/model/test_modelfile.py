"""Model files: a complete example, and errors naming the key and the problem."""

import pytest

from rvkep.errors import ModelFileError
from rvkep.modelfile import parse_model, read_model_file, tomllib
from rvkep.priors import Beta, Fixed, Normal


def test_full_example(tmp_path):
    p = tmp_path / "star.toml"
    p.write_text(
        """
[star]
name = "Veyla"
mass = 0.92
mass_err = 0.04
radius = 0.88

[data]
files = ["kestrel.txt"]

[trend]
degree = 1

[instruments.kestrel]
jitter = { prior = "uniform", min = 0, max = 20 }

[companions.b]
period = { start = 11.87, prior = "normal", mean = 11.87, sd = 0.01 }
tc = { start = 2459807.5, prior = "normal", mean = 2459807.52, sd = 0.01 }
ecc = { start = 0.1, prior = "beta", a = 0.867, b = 3.03 }
omega_deg = 50

[companions.c]
period = 143.0
circular = true

[sampling]
walkers = 40
seed = 3
"""
    )
    spec = read_model_file(p)
    assert spec.star.mass == 0.92 and spec.star.radius == 0.88
    assert spec.files == [str(tmp_path / "kestrel.txt")]
    assert spec.trend == 1
    b, c = spec.companions
    assert b.period == Normal(11.87, 0.01) and isinstance(b.ecc, Beta)
    assert b.start["omega"] == pytest.approx(0.8726646, rel=1e-6)
    assert isinstance(c.ecc, Fixed) and c.start["period"] == 143.0
    assert spec.sampling == {"walkers": 40, "seed": 3}


BAD = [
    ("[stars]\nmass = 1", "unknown key 'stars'"),
    ("[star]\nmass = 'heavy'", "star.mass: must be a number"),
    ("[star]\nmass = -1", "star.mass: must be positive"),
    ("[star]\nname = 'x'", "needs 'mass'"),
    ("[trend]\ndegree = 3", "trend.degree: must be 0, 1 or 2"),
    ("[companions.b]\nK = 3", "companions.b.period: needs a start value"),
    (
        "[companions.b]\nperiod = { start = 3, prior = 'gauss' }",
        "companions.b.period: unknown prior 'gauss'",
    ),
    (
        "[companions.b]\nperiod = { start = 30, prior = 'uniform', min = 1, max = 10 }",
        "outside the prior",
    ),
    ("[companions.b]\nperiod = 3\nspin = 1", "companions.b: unknown key 'spin'"),
    (
        "[companions.b]\nperiod = 3\necc = { hold = 0.2 }",
        "can only be fixed at 0",
    ),
    (
        "[companions.b]\nperiod = 3\n"
        "omega_deg = { start = 3, prior = 'uniform', min = 0, max = 9 }",
        "start value only",
    ),
    ("[sampling]\nwalkers = 10.5", "sampling.walkers: must be a whole number"),
    ("[data]\nfiles = 'a.txt'", "data.files: must be a list"),
]


@pytest.mark.parametrize("text,message", BAD)
def test_errors_name_key_and_problem(text, message):
    with pytest.raises(ModelFileError, match=message):
        parse_model(tomllib.loads(text), "m.toml")


def test_syntax_error_and_missing_file(tmp_path):
    p = tmp_path / "bad.toml"
    p.write_text("[star\nmass = 1")
    with pytest.raises(ModelFileError, match="bad.toml: not valid TOML"):
        read_model_file(p)
    with pytest.raises(ModelFileError, match="no such file"):
        read_model_file(tmp_path / "none.toml")


def test_a_held_value_is_written_hold():
    from rvkep.errors import ModelFileError
    from rvkep.priors import Fixed

    spec = parse_model({"companions": {"b": {"period": 10.0, "K": {"hold": 18.0}}}})
    assert spec.companions[0].K == Fixed(18.0)
    with pytest.raises(ModelFileError, match=r"a held value is written \{ hold = 18.0 \}"):
        parse_model({"companions": {"b": {"period": 10.0,
                                          "K": {"prior": "fixed", "value": 18.0}}}})  # fmt: skip
    with pytest.raises(ModelFileError, match="unknown key 'value' beside 'hold'"):
        parse_model({"companions": {"b": {"period": 10.0, "K": {"hold": 1.0, "value": 2}}}})
