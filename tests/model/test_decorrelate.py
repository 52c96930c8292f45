"""Decorrelation against activity indicators: a linear coefficient per indicator and
instrument, handled like the offsets (marginalized in sampling, solved in fits)."""

import json
from dataclasses import replace

import numpy as np
import pytest

from rvkep.data import RVData
from rvkep.likelihood import LogPosterior
from rvkep.model import SystemModel
from rvkep.priors import Fixed

SLOPE = {"north": 0.08, "south": -0.05}  # m/s per unit of the indicator (invented)


def star(seed=11, n=60):
    """Two instruments, pure noise plus a linear dependence on an indicator 'fwhm'."""
    rng = np.random.default_rng(seed)
    t = np.sort(rng.uniform(2459000, 2459300, n))
    inst = np.where(np.arange(n) % 3 == 0, "south", "north")
    fwhm = 7000 + rng.normal(0, 40, n)
    err = np.full(n, 1.5)
    rv = np.where(inst == "north", 5.0, -20.0) + rng.normal(0, 1.5, n)
    for name, k in SLOPE.items():
        m = inst == name
        rv[m] += k * (fwhm[m] - np.median(fwhm[m]))
    return RVData(t, rv, err, inst, extra={"fwhm": fwhm, "bis": rng.normal(0, 5, n)})


def test_coefficients_are_weighted_least_squares_and_their_posterior():
    # reference: numpy's least squares on the same design (errors known, jitter fixed
    # at 0): the conditional Gaussian of the linear parameters is N(beta, (X^T W X)^-1)
    # (common practice, no source)
    data = star()
    model = SystemModel(data, [], decorrelate=("fwhm",))
    model = replace(model, instruments=[replace(i, jitter=Fixed(0.0)) for i in model.instruments])
    order = [i.name for i in model.instruments]
    assert model.linear_names == [f"offset.{n}" for n in order] + [f"decorr.fwhm.{n}"
                                                                   for n in order]  # fmt: skip
    X = model.design
    w = 1.0 / data.err**2
    A = X.T @ (w[:, None] * X)
    beta = np.linalg.solve(A, X.T @ (w * data.rv))
    sd = np.sqrt(np.diag(np.linalg.inv(A)))
    post = LogPosterior(model)
    theta = np.zeros((20000, 0))
    draws = post.linear_parameters(theta, rng=np.random.default_rng(1))
    best = post.linear_parameters(theta[:1])[0]
    assert best == pytest.approx(beta, rel=1e-9)
    assert draws.mean(axis=0) == pytest.approx(beta, abs=0.03 * sd.max())
    assert draws.std(axis=0) == pytest.approx(sd, rel=0.03)
    # and the injected slopes are recovered within their errors
    for j, name in enumerate(order):
        assert abs(best[2 + j] - SLOPE[name]) < 2.5 * sd[2 + j]


def test_model_refuses_what_it_cannot_decorrelate():
    data = star()
    with pytest.raises(
        ValueError, match=r"no such column in the data \(extra columns: fwhm, bis\)"
    ):
        SystemModel(data, [], decorrelate=("sindex",))
    holes = data.extra["fwhm"].copy()
    south = np.flatnonzero(data.instrument == "south")
    holes[south[:2]] = np.nan
    gappy = RVData(data.time, data.rv, data.err, data.instrument, extra={"fwhm": holes})
    with pytest.raises(ValueError, match="2 of 20 points of south lack it"):
        SystemModel(gappy, [], decorrelate=("fwhm",))
    holes[south] = np.nan  # south does not measure it at all: north alone gets a term
    only_north = RVData(data.time, data.rv, data.err, data.instrument, extra={"fwhm": holes})
    model = SystemModel(only_north, [], decorrelate=("fwhm",))
    assert model.linear_names[-1] == "decorr.fwhm.north" and model.n_linear == 3


def test_analyze_with_decorrelation_end_to_end(tmp_path):
    from rvkep.cli import main

    data = star()
    files = []
    for name in ("north", "south"):
        m = data.instrument == name
        path = tmp_path / f"{name}.txt"
        rows = zip(data.time[m], data.rv[m], data.err[m], data.extra["fwhm"][m], strict=True)
        path.write_text("time rv err fwhm\n" + "".join(f"{a} {b} {c} {d}\n" for a, b, c, d in rows))
        files.append(str(path))
    out = tmp_path / "out"
    code = main(["analyze", *files, "--decorrelate", "fwhm", "--quick", "--quiet", "--trend", "0",
                 "--out", str(out), "--max-companions", "1"])  # fmt: skip
    assert code == 0
    d = json.loads((out / "results.json").read_text())
    assert d["n_planets"] == 0
    terms = {c["instrument"]: c["coefficient"] for c in d["decorrelation"]}
    for name, k in SLOPE.items():
        est = terms[name]
        assert abs(est["median"] - k) < 2.5 * max(est["minus"], est["plus"]), (name, est)
    assert "Decorrelation against activity indicators" in (out / "summary.md").read_text()
    assert "decorr_fwhm" in (out / "parameters.csv").read_text()
    # a column the data lack: one line, exit 2
    assert main(["analyze", *files, "--decorrelate", "bis", "--out", str(tmp_path / "x")]) == 2


def test_white_noise_run_names_the_remedies_when_an_indicator_flags_a_signal():
    from rvkep.pipeline import AnalyzeOptions, choose_model

    rng = np.random.default_rng(5)
    n = 80
    t = np.sort(rng.uniform(2459000, 2459200, n))
    spot = np.sin(2 * np.pi * t / 13.0)  # rotation: in the velocities and in the FWHM
    data = RVData(t, 12 * spot + rng.normal(0, 1.5, n), np.full(n, 1.5), np.full(n, "north"),
                  extra={"fwhm": 7000 + 30 * spot + rng.normal(0, 3, n)})  # fmt: skip
    chosen = choose_model(data, AnalyzeOptions(quiet=True, trend=0, max_companions=1))
    assert chosen.search.significant and chosen.search.significant[0].activity == ["fwhm"]
    assert any("also peaks in fwhm" in note and "--noise gp" in note and "--decorrelate fwhm"
               in note for note in chosen.notes), chosen.notes  # fmt: skip
    quiet = choose_model(data, AnalyzeOptions(quiet=True, trend=0, max_companions=1,
                                              decorrelate=("fwhm",)))  # fmt: skip
    assert not any("also peaks" in note for note in quiet.notes)
