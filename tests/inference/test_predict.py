"""Posterior predictions and finished runs read back: against a point-by-point
reference curve and against the run's own files."""

import json

import numpy as np
import pytest
from helpers import slow_rv

from rvkep.prediction import QUANTILES, predict


def posterior(n=40, seed=3):
    """Invented posterior draws of two companions, one instrument and a linear trend."""
    rng = np.random.default_rng(seed)
    return {
        "b.period": rng.normal(143.4, 0.1, n), "b.K": rng.normal(28.0, 0.3, n),
        "b.ecc": rng.uniform(0.35, 0.4, n), "b.omega_deg": rng.normal(230.0, 2.0, n),
        "b.tp": rng.normal(2459410.0, 1.0, n),
        "c.period": rng.normal(11.87, 0.001, n), "c.K": rng.normal(18.7, 0.3, n),
        "c.ecc": rng.uniform(0.08, 0.12, n), "c.omega_deg": rng.normal(60.0, 5.0, n),
        "c.tp": rng.normal(2459403.3, 0.2, n),
        "offset.north": rng.normal(-12.8, 0.3, n), "jitter.north": rng.uniform(1.5, 2.0, n),
        "trend.slope": rng.normal(3.0, 0.2, n),
    }  # fmt: skip


def test_curves_match_the_point_by_point_reference():
    cols = posterior()
    before = {k: v.copy() for k, v in cols.items()}
    epoch = 2459600.0
    t = np.array([2459412.3, 2459600.0, 2459990.7])
    pred = predict(cols, ["b", "c"], t, epoch=epoch)
    for j in (0, 17, 39):
        ref = {L: np.array(slow_rv(t, cols[f"{L}.period"][j], cols[f"{L}.tp"][j],
                                   cols[f"{L}.ecc"][j], np.radians(cols[f"{L}.omega_deg"][j]),
                                   cols[f"{L}.K"][j])) for L in ("b", "c")}  # fmt: skip
        assert np.allclose(pred.curves["b"][j], ref["b"], atol=1e-8)
        # total = companions + the trend in years from the epoch (the model's convention)
        trend = cols["trend.slope"][j] * (t - epoch) / 365.25
        assert np.allclose(pred.curves["total"][j], ref["b"] + ref["c"] + trend, atol=1e-8)
    assert all(np.array_equal(before[k], cols[k]) for k in cols)  # inputs untouched
    assert "measured" not in pred.curves


def test_measured_adds_offset_and_noise_of_the_right_size():
    cols = posterior(n=20000, seed=5)
    t = np.array([2459500.0])
    pred = predict(cols, ["b", "c"], t, epoch=2459600.0, instrument="north", typical_error=1.2)
    noise = pred.curves["measured"][:, 0] - pred.curves["total"][:, 0] - cols["offset.north"]
    expected = np.sqrt(np.mean(cols["jitter.north"] ** 2) + 1.2**2)
    # a Gaussian sample's standard deviation: relative error 1/sqrt(2 n) = 0.5% here
    assert np.std(noise) == pytest.approx(expected, rel=0.02)
    assert abs(np.mean(noise)) < 0.05
    summary = pred.summary()["measured"]
    assert set(summary) == set(QUANTILES)
    assert summary["lo95"][0] < summary["lo68"][0] < summary["median"][0] < summary["hi68"][0]
    with pytest.raises(ValueError, match="unknown instrument 'south'; known: north"):
        predict(cols, ["b"], t, epoch=0.0, instrument="south")


def test_rows_name_the_columns_of_a_prediction_table():
    pred = predict(posterior(), ["b", "c"], [2459500.0, 2459501.0], epoch=2459600.0,
                   instrument="north", draws=25)  # fmt: skip
    assert pred.curves["b"].shape == (25, 2)
    row = pred.rows()[0]
    names = list(row)
    assert names[:6] == ["time", "total_median", "total_lo68", "total_hi68", "total_lo95",
                         "total_hi95"]  # fmt: skip
    assert "b_median" in row and "c_hi95" in row and names[-5:][0] == "measured_median"


@pytest.mark.integration
def test_a_finished_run_reads_back_and_predicts_its_own_data(tmp_path):
    from rvkep.cli import main
    from rvkep.errors import DataError
    from rvkep.results import Results

    out = tmp_path / "run"
    assert main(["demo", "--quick", "--quiet", "--out", str(out), "--seed", "1"]) == 0
    res = Results.load(out)
    saved = json.loads((out / "results.json").read_text())
    assert res.to_dict() == saved and res.labels == ["b", "c"]
    # the tables come out as the run wrote them
    assert res.csv_table() == (out / "parameters.csv").read_text()
    assert res.latex_table() == (out / "parameters.tex").read_text()
    assert res.run_label() == saved["run_kind"]["label"]
    # what kestrel should have measured, at its own times: the data lie inside
    data = res.data
    m = data.instrument == "kestrel"
    pred = res.predict(data.time[m], instrument="kestrel", draws=400)
    s = pred.summary()["measured"]
    inside = (data.rv[m] >= s["lo95"]) & (data.rv[m] <= s["hi95"])
    assert inside.mean() > 0.85  # about 95% expected
    with pytest.raises(DataError, match="no results.json"):
        Results.load(tmp_path)
    # the command line: the same numbers as a CSV with the documented columns
    csv_path = tmp_path / "pred.csv"
    args = ["predict", str(out), "--from", "2460400", "--to", "2460402", "--step", "0.5",
            "--instrument", "osprey", "--draws", "300", "--out", str(csv_path)]  # fmt: skip
    assert main(args) == 0
    lines = csv_path.read_text().splitlines()
    assert lines[0].startswith("# rvkep predict:") and "QUICK MODE" in lines[0]
    header = lines[1].split(",")
    five = ["median", "lo68", "hi68", "lo95", "hi95"]
    assert header == (["time"] + [f"total_{q}" for q in five] + [f"b_{q}" for q in five]
                      + [f"c_{q}" for q in five] + [f"measured_{q}" for q in five])  # fmt: skip
    assert len(lines) == 2 + 5
    direct = res.predict(np.arange(2460400, 2460402.01, 0.5), instrument="osprey", draws=300)
    first = dict(zip(header, map(float, lines[2].split(",")), strict=True))
    assert first["total_median"] == pytest.approx(direct.rows()[0]["total_median"], rel=1e-9)
    assert first["measured_hi95"] == pytest.approx(direct.rows()[0]["measured_hi95"], rel=1e-9)


def test_predict_command_refuses_bad_requests_in_one_line(tmp_path, capsys):
    from rvkep.cli import main

    times = tmp_path / "t.txt"
    times.write_text("2460400.5\n2026-12-03\n")
    rest = ["--to", "2026-12-20", "--ra", "10", "--dec", "20", "--site"]
    for args, message in (
        ([str(tmp_path)], "either --times FILE or --from"),
        ([str(tmp_path), "--from", "5", "--to", "4"], "T(to) > T(from)"),
        ([str(tmp_path), "--from", "0", "--to", "1e7", "--step", "1"], "raise --step"),
        ([str(tmp_path), "--times", str(times)], "calendar dates need the target's coordinates"),
        (
            [str(tmp_path), "--from", "2026-13-45", *rest, "0,0,0"],
            "'2026-13-45' is not an ISO date",
        ),
        ([str(tmp_path), "--from", "2026-12-01", *rest, "0,0"], "--site must be LAT,LON,HEIGHT"),
    ):
        assert main(["predict", *args]) == 2
        err = capsys.readouterr().err.strip()
        assert len(err.splitlines()) == 1 and message in err, err
    # times are checked before the run is read; a folder without a run says so
    assert main(["predict", str(tmp_path), "--from", "1", "--to", "2"]) == 2
    assert "no results.json" in capsys.readouterr().err


@pytest.mark.integration
def test_held_out_epochs_fall_inside_the_predicted_intervals():
    # six seeded synthetic stars (invented: P = 9.4 d, K = 12 m/s, e = 0.2, offset
    # 5 m/s, jitter 1.5 m/s, errors 2 m/s, 100 epochs over 200 d), each fitted on its
    # first 70% of epochs; the last 30% are predicted. The 95% band is pointwise and
    # one star's held-out times share one extrapolated orbit, so a star's misses come
    # together (seed 11's period lands 2.2 sigma low and its band misses 57% of the
    # times): the tolerances are on the six stars together. The noise-free curve (with
    # the offset) lies inside the 95% band at >= 85% of all held-out times (expected
    # 95%); the share of held-out measurements inside the 68% predictive interval is
    # 0.68 within 0.10 (180 points: 2.7 binomial sigma, before the correlation within
    # a star)
    import warnings

    from rvkep.data import RVData
    from rvkep.optimize import fit_companions
    from rvkep.orbit import radial_velocity
    from rvkep.results import Results
    from rvkep.sampling import UnconvergedWarning

    in95, in68 = [], []
    for seed in range(7, 13):
        rng = np.random.default_rng(seed)
        n = 100
        t = np.sort(rng.uniform(2459000, 2459200, n))
        truth = radial_velocity(t, 9.4, 2459001.0, 0.2, 1.0, 12.0) + 5.0
        rv = truth + rng.normal(0, np.hypot(2.0, 1.5), n)
        cut = int(0.7 * n)
        data = RVData(t[:cut], rv[:cut], np.full(cut, 2.0), np.full(cut, "a"))
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", UnconvergedWarning)
            fit = fit_companions(data, [[9.4]])
            sampled = fit.sample(seed=2, max_steps=4000, check_every=500, progress=False)
        res = Results.from_sampling(sampled)
        pred = res.predict(t[cut:], instrument="a", rng=3)
        noise_free = pred.curves["total"] + res.posterior["offset.a"][:, None]
        lo, hi = np.percentile(noise_free, [QUANTILES["lo95"], QUANTILES["hi95"]], axis=0)
        in95.extend((truth[cut:] >= lo) & (truth[cut:] <= hi))
        s = pred.summary()["measured"]
        in68.extend((rv[cut:] >= s["lo68"]) & (rv[cut:] <= s["hi68"]))
    assert np.mean(in95) >= 0.85, np.mean(in95)
    assert abs(np.mean(in68) - 0.68) <= 0.10, np.mean(in68)
