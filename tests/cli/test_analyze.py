"""The whole job end to end (quick mode), on the demo star and on pure noise."""

import json
from pathlib import Path

import numpy as np
import pytest

from rvkep.cli import main

DEMO = Path(__file__).resolve().parents[2] / "demo_data"


@pytest.fixture(scope="module")
def demo_run(tmp_path_factory):
    out = tmp_path_factory.mktemp("demo")
    code = main(["demo", "--quick", "--quiet", "--out", str(out), "--seed", "1"])
    assert code == 0
    return out


def inside(estimate, truth, k=3.0):
    med, lo, hi = estimate["median"], estimate["minus"], estimate["plus"]
    return med - k * lo <= truth <= med + k * hi


@pytest.mark.integration
def test_demo_results_json(demo_run):
    # the truth was invented and written by scripts/make_demo.py (seed 20261202)
    res = json.loads((demo_run / "results.json").read_text())
    truth = json.loads((DEMO / "truth.json").read_text())
    assert res["n_planets"] == 2
    for key in ("rvkep_version", "planets", "instruments", "trend", "search", "sampler"):
        assert key in res
    for p in res["planets"]:
        for key in ("period_d", "K_mps", "ecc", "omega_deg", "tp_bjd", "tc_bjd",
                    "msini_mjup", "msini_mearth", "a_au"):  # fmt: skip
            assert set(p[key]) == {"median", "minus", "plus"}
            assert p[key]["minus"] >= 0 and p[key]["plus"] >= 0
    by_period = sorted(res["planets"], key=lambda p: p["period_d"]["median"])
    for got, want in zip(
        by_period, sorted(truth["companions"], key=lambda c: c["period_d"]), strict=True
    ):
        assert inside(got["period_d"], want["period_d"])
        assert inside(got["K_mps"], want["K_mps"])
        assert inside(got["ecc"], want["ecc"])
        w = got["omega_deg"]
        d = (w["median"] - want["omega_deg"] + 180) % 360 - 180
        assert abs(d) <= 3 * max(w["minus"], w["plus"])
    for inst in res["instruments"]:
        want = next(i for i in truth["instruments"] if i["name"] == inst["name"])
        assert inst["n_points"] == want["n_points"]
        assert inside(inst["offset_mps"], want["offset_mps"])
        assert inside(inst["jitter_mps"], want["jitter_mps"])
    assert res["sampler"]["walkers"] > 0 and res["sampler"]["steps"] > 0
    assert res["sampler"]["quick_mode"] is True
    assert [c["significant"] for c in res["search"]][:2] == [True, True]
    assert any(row["chosen"] and row["n_companions"] == 2 for row in res["model_comparison"])


@pytest.mark.integration
def test_demo_files_and_figures(demo_run):
    for name in ("summary.md", "parameters.tex", "parameters.csv", "samples.csv", "samples.npz",
                 "timeseries.png", "periodogram.png", "phase_b.png", "phase_c.png",
                 "corner_b.png", "corner_c.png", "stacked.png"):  # fmt: skip
        assert (demo_run / name).stat().st_size > 500, name
    md = (demo_run / "summary.md").read_text()
    assert "Quick mode" in md and "| b |" in md
    tex = (demo_run / "parameters.tex").read_text()
    assert r"\begin{tabular}" in tex
    assert "^{+" in tex or r"\pm" in tex  # asymmetric or symmetric errors
    assert not list(demo_run.glob(".*tmp*"))


@pytest.mark.integration
def test_every_output_says_it_was_a_quick_run(demo_run):
    res = json.loads((demo_run / "results.json").read_text())
    assert res["run_kind"]["quick"] is True and "QUICK" in res["run_kind"]["label"]
    tex = (demo_run / "parameters.tex").read_text().splitlines()
    assert tex[0].startswith("% rvkep") and "QUICK MODE" in tex[0]
    assert any("caption" in line and "QUICK MODE" in line for line in tex)
    csv = (demo_run / "parameters.csv").read_text().splitlines()
    assert csv[0].startswith("# rvkep") and "QUICK MODE" in csv[0]
    assert "Quick mode" in (demo_run / "summary.md").read_text()


@pytest.mark.integration
def test_figures_carry_the_kind_of_run(demo_run):
    from PIL import Image

    pngs = sorted(demo_run.glob("*.png"))
    assert len(pngs) >= 6
    for png in pngs:  # the footer drawn on the figure is also in the PNG's text chunk
        with Image.open(png) as im:
            assert "QUICK MODE" in im.info.get("Description", ""), png.name


def test_pure_noise_gives_no_companion(tmp_path):
    # invented pure-noise star, seed 8: no signal must be claimed
    rng = np.random.default_rng(8)
    t = 2459000 + np.sort(rng.choice(np.arange(600), 60, replace=False)) * 0.99727
    rows = "\n".join(f"{a:.5f} {rng.normal(0, 3):.3f} 3.0" for a in t)
    f = tmp_path / "quiet.txt"
    f.write_text(rows + "\n")
    out = tmp_path / "out"
    assert (
        main(["analyze", str(f), "--quick", "--quiet", "--out", str(out), "--star-mass", "1"]) == 0
    )
    res = json.loads((out / "results.json").read_text())
    assert res["n_planets"] == 0 and res["planets"] == []
    assert (out / "timeseries.png").exists() and (out / "periodogram.png").exists()


def test_bad_input_refused_before_writing(tmp_path, capsys):
    bad = tmp_path / "bad.txt"
    bad.write_text("2459000.1 1.0 1.0\n2459001.1 x 1.0\n")
    out = tmp_path / "never"
    assert main(["analyze", str(bad), "--out", str(out), "--quick"]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "bad.txt, line 2" in err
    assert not out.exists()


def test_forced_number_of_planets(tmp_path):
    out = tmp_path / "one"
    files = [str(DEMO / "kestrel.txt"), str(DEMO / "osprey.csv")]
    assert main(["analyze", *files, "--companions", "1", "--quick", "--quiet", "--out", str(out),
                 "--max-steps", "500", "--star-mass", "0.92", "--star-radius", "0.9",
                 "--star-teff", "5500"]) == 0  # fmt: skip
    res = json.loads((out / "results.json").read_text())
    assert res["n_planets"] == 1 and res["sampler"]["converged"] is False
    planet = res["planets"][0]
    assert {"transit_probability", "teq_k", "insolation_earth"} <= set(planet)
    assert res["star"]["radius_rsun"] == 0.9 and res["star"]["teff_k"] == 5500


def test_star_options_checked(tmp_path, capsys):
    args = ["analyze", str(DEMO / "kestrel.txt"), "--out", str(tmp_path / "o"), "--quick"]
    assert main([*args, "--star-radius", "0.9"]) == 2
    assert "--star-radius needs --star-mass" in capsys.readouterr().err
    assert main([*args, "--star-mass", "1", "--star-teff", "5000"]) == 2
    assert "--star-teff needs --star-radius" in capsys.readouterr().err


@pytest.mark.integration
def test_stability_of_the_demo_star_analytic_and_integrated_on_pools_and_dask(demo_run,
                                                                               tmp_path):
    # the demo's two companions (truth 11.9 and 97 d, invented by scripts/make_demo.py)
    # are far apart: every draw Hill and AMD stable, and MEGNO regular (about 2,
    # Cincotta & Simo 2000); the draws' values are the same on one process, two local
    # processes and a Dask cluster
    pytest.importorskip("rebound")
    distributed = pytest.importorskip("distributed")
    import shutil

    res = json.loads((demo_run / "results.json").read_text())
    st = res["stability"]
    assert st["hill_stable_fraction"] == 1.0 and st["amd_stable_fraction"] == 1.0
    assert st["masses"].startswith("minimum masses")
    values = {}
    for how, extra in (("here", []), ("pool", ["--workers", "2"]), ("dask", None)):
        run = tmp_path / how
        shutil.copytree(demo_run, run)
        if extra is None:
            with distributed.LocalCluster(
                n_workers=2, threads_per_worker=1, processes=True, host="127.0.0.1",
                dashboard_address="127.0.0.1:0", local_directory=str(tmp_path / "dask"),
            ) as cluster:  # fmt: skip
                code = main(["stability", str(run), "--draws", "6", "--orbits", "300",
                             "--quiet", "--scheduler", cluster.scheduler_address])  # fmt: skip
        else:
            code = main(["stability", str(run), "--draws", "6", "--orbits", "300", "--quiet",
                         *extra])  # fmt: skip
        assert code == 0
        out = json.loads((run / "stability.json").read_text())
        values[how] = [d["megno"] for d in out["per_draw"]]
        assert out["fraction_regular"] == 1.0 and abs(out["megno_median"] - 2.0) < 0.3
        assert (run / "stability.csv").read_text().count("\n") == 7
    assert values["here"] == values["pool"] == values["dask"]
