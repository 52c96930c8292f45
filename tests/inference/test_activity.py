"""Stellar activity end to end (synthetic-recovery tests, invented star): one small
planet (P = 7.31 d, K = 4 m/s) under quasi-periodic activity (rotation 25.3 d,
amplitude 6 m/s) drawn densely from the quasi-periodic kernel of Haywood et al. (2014)
by scripts/make_activity_star.py, not from the model rvkep fits."""

import importlib.util
import json
from pathlib import Path

import numpy as np
import pytest

from rvkep.pipeline import analyze

pytestmark = pytest.mark.integration

SCRIPT = Path(__file__).resolve().parents[2] / "scripts" / "make_activity_star.py"


def star_files(folder: Path, **scales) -> tuple[list[str], dict]:
    spec = importlib.util.spec_from_file_location("make_activity_star", SCRIPT)
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    files = [str(f) for f in mod.write(folder, **scales)]
    return files, json.loads((folder / "truth.json").read_text())


def run(files, out, noise):
    return analyze(files, noise=noise, quick=True, quiet=True, trend=0, star_mass=0.81,
                   star_mass_err=0.03, out=str(out), seed=3)  # fmt: skip


def near(period, target, tol=0.05):
    return abs(period / target - 1.0) < tol


@pytest.fixture(scope="module")
def active(tmp_path_factory):
    folder = tmp_path_factory.mktemp("orrin")
    return folder, *star_files(folder)


def test_gp_recovers_the_planet_and_proposes_no_rotation_companion(active):
    folder, files, truth = active
    res = run(files, folder / "gp", "gp")
    d = json.loads((folder / "gp" / "results.json").read_text())
    rot = truth["activity"]["rotation_period_d"]
    periods = [p["period_d"]["median"] for p in d["planets"]]
    assert len(periods) == 1, periods
    assert not any(near(P, rot) or near(P, rot / 2) for P in periods)
    b = d["planets"][0]
    for key, true in (
        ("period_d", truth["planet"]["period_d"]),
        ("K_mps", truth["planet"]["K_mps"]),
    ):
        est = b[key]
        assert abs(est["median"] - true) < 2.5 * max(est["minus"], est["plus"]), (key, est)
    noise = d["noise"]
    keys = {"kind", "amplitude", "rotation_period", "evolution_time", "harmonic_fraction"}
    assert noise["kind"] == "gp" and set(noise) == keys
    est = noise["rotation_period"]
    assert abs(est["median"] - rot) < 3 * max(est["minus"], est["plus"]), est
    assert "gp" in (folder / "gp" / "summary.md").read_text()
    assert res.noise_kind == "gp"
    # reloaded, it knows its noise model, and a new measurement's interval holds the
    # activity's amplitude (unpredicted at a new time) beside jitter and error
    from rvkep.results import Results

    back = Results.load(folder / "gp")
    assert back.noise_kind == "gp" and back.noise_names == res.noise_names
    pred = back.predict([2460400.0], instrument="kestrel", draws=2000, rng=1).summary()
    width = pred["measured"]["hi68"][0] - pred["measured"]["lo68"][0]
    assert width > 2 * 0.9 * noise["amplitude"]["median"]


def test_white_noise_takes_the_rotation_for_a_companion(active):
    # what happens without the GP, on the same star: the activity at the rotation
    # period (or its harmonic) is reported as a companion beside the planet
    folder, files, truth = active
    run(files, folder / "white", "white")
    d = json.loads((folder / "white" / "results.json").read_text())
    rot = truth["activity"]["rotation_period_d"]
    periods = [p["period_d"]["median"] for p in d["planets"]]
    assert any(near(P, truth["planet"]["period_d"], 0.01) for P in periods), periods
    assert any(near(P, rot) or near(P, rot / 2) for P in periods), periods
    assert d["noise"] == {"kind": "white"}


def test_pure_white_noise_with_the_gp_gives_no_companion_and_no_activity(tmp_path):
    files, _ = star_files(tmp_path, activity_scale=0.0, planet_scale=0.0)
    run(files, tmp_path / "gp", "gp")
    d = json.loads((tmp_path / "gp" / "results.json").read_text())
    assert d["n_planets"] == 0
    amp = np.load(tmp_path / "gp" / "samples.npz")["noise.amplitude"]
    # consistent with zero: the posterior reaches down to (near) zero, and its upper
    # end stays below the typical measurement error
    assert np.percentile(amp, 2.5) < 0.2 and np.percentile(amp, 97.5) < 1.6


def test_a_given_rotation_sets_the_gp_prior_and_names_companions_near_it(active):
    folder, files, truth = active
    rot = truth["activity"]["rotation_period_d"]
    res = analyze(files, noise="gp", quick=True, quiet=True, trend=0, star_mass=0.81,
                  star_mass_err=0.03, out=str(folder / "rot"), seed=3, star_rotation=25.0,
                  star_rotation_err=1.0)  # fmt: skip
    d = json.loads((folder / "rot" / "results.json").read_text())
    prior = next(p["prior"] for p in d["priors"] if p["parameter"].startswith("noise.rotation"))
    assert prior == "normal(25, 1) truncated to [20, 30]", prior
    est = d["noise"]["rotation_period"]
    assert abs(est["median"] - rot) / rot < 0.15  # within 15% of the truth
    assert len(res.labels) == 1
    # with white noise, the companion the activity makes is named as possible activity
    analyze(files, noise="white", quick=True, quiet=True, trend=0, star_mass=0.81,
            star_mass_err=0.03, out=str(folder / "rot-white"), seed=3,
            star_rotation=25.0)  # fmt: skip
    notes = json.loads((folder / "rot-white" / "results.json").read_text())["notes"]
    assert any("lies near the star's" in n and "--noise gp" in n for n in notes), notes
