"""Batch runs over target lists: local processes, a kill and a rerun, a Dask cluster."""

import json
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest
from helpers import make_targets, read_summary

from rvkep.batch import read_targets, run_batch
from rvkep.cli import BATCH_FAILED_EXIT, main
from rvkep.errors import DataError


def check_complete(out: Path, n: int):
    rows = read_summary(out)
    targets = {r["name"]: r for r in rows if r["row"] == "target"}
    assert {f"star{k}" for k in range(n)} | {"broken"} == set(targets)
    assert all(targets[f"star{k}"]["status"] == "done" for k in range(n))
    assert targets["broken"]["status"] == "failed"
    assert "broken.txt, line 2" in targets["broken"]["error"]
    companions = [r for r in rows if r["row"] == "companion"]
    assert len(companions) >= n - 1 and all(float(r["period_d"]) > 0 for r in companions)
    for k in range(n):
        assert (out / f"star{k}" / "done.json").exists() and (out / f"star{k}" / "log.txt").exists()
    assert not list(out.rglob(".*.tmp-*"))


def test_target_list_errors(tmp_path):
    p = tmp_path / "t.csv"
    p.write_text("name,data,star_mass\nx,a.txt,1\n")
    with pytest.raises(DataError, match="missing column"):
        read_targets(p)
    # a problem of one target makes only that target fail
    p.write_text("name,data,star_mass,star_mass_err\nx,a.txt,heavy,0.1\ny,b.txt,1,0.1\n")
    x, y = read_targets(p)
    assert "line 2: star_mass" in x.problem and not y.problem
    p.write_text("name,data,star_mass,star_mass_err\nx,a.txt,1,0.1\nx,b.txt,1,0.1\n")
    first, second = read_targets(p)
    assert not first.problem and "line 3: target 'x' listed twice" in second.problem


@pytest.mark.integration
def test_local_batch_and_skip_on_rerun(tmp_path, capsys):
    targets = make_targets(tmp_path / "in", 3)
    out = tmp_path / "out"
    # one target fails (the broken file): the others run, the summary is written and
    # the exit status says that something failed
    code = main(["batch", str(targets), "--out", str(out), "--workers", "2", "--quick"])
    assert code == BATCH_FAILED_EXIT == 3
    check_complete(out, 3)
    rows = {r["name"]: r for r in read_summary(out) if r["row"] == "target"}
    assert rows["star0"]["quick"] == "yes" and "QUICK MODE" in rows["star0"]["run_kind"]
    assert rows["star0"]["converged"] in ("yes", "no") and rows["broken"]["run_kind"] == ""
    first = (out / "star0" / "results.json").stat().st_mtime_ns
    infos = run_batch(targets, out, workers=2, quick=True, quiet=True)
    assert infos["star0"]["status"] == "skipped"
    assert (out / "star0" / "results.json").stat().st_mtime_ns == first
    check_complete(out, 3)


@pytest.mark.integration
def test_rerun_after_sigkill(tmp_path):
    targets = make_targets(tmp_path / "in", 4)
    out = tmp_path / "out"
    cmd = [sys.executable, "-m", "rvkep", "batch", str(targets), "--out", str(out),
           "--workers", "2", "--quick", "--quiet"]  # fmt: skip
    proc = subprocess.Popen(cmd, start_new_session=True)
    deadline = time.time() + 120
    while time.time() < deadline and not list(out.glob("star*/done.json")):
        time.sleep(0.2)
    os.killpg(proc.pid, signal.SIGKILL)  # the batch and its workers, mid-run
    proc.wait()
    done_before = {p.parent.name for p in out.glob("star*/done.json")}
    assert len(done_before) < 4
    for folder in out.glob("star*"):  # a complete-looking folder is complete
        if (folder / "done.json").exists():
            assert (folder / "results.json").exists() and (folder / "timeseries.png").exists()
    assert subprocess.run(cmd, timeout=300).returncode == BATCH_FAILED_EXIT  # "broken" fails
    check_complete(out, 4)


@pytest.mark.integration
def test_dask_local_cluster(tmp_path):
    distributed = pytest.importorskip("distributed")
    targets = make_targets(tmp_path / "in", 2)
    out = tmp_path / "out"
    with distributed.LocalCluster(
        n_workers=2, threads_per_worker=1, processes=True, host="127.0.0.1",
        dashboard_address="127.0.0.1:0", local_directory=str(tmp_path / "dask"),
    ) as cluster:  # fmt: skip
        address = cluster.scheduler_address
        # nothing listens beyond this machine: the scheduler and every worker (and
        # its nanny) on the loopback interface
        with distributed.Client(address) as client:
            workers = client.scheduler_info()["workers"]
        assert address.startswith("tcp://127.0.0.1:")
        assert len(workers) == 2 and all(w.startswith("tcp://127.0.0.1:") for w in workers)
        assert all(w["nanny"].startswith("tcp://127.0.0.1:") for w in workers.values())
        code = main(["batch", str(targets), "--out", str(out), "--scheduler", address,
                     "--quick", "--quiet"])  # fmt: skip
    assert code == BATCH_FAILED_EXIT  # the broken target
    check_complete(out, 2)
    res = json.loads((out / "star0" / "results.json").read_text())
    assert res["n_planets"] == 1


@pytest.mark.integration
def test_unreachable_scheduler(tmp_path, capsys):
    targets = make_targets(tmp_path / "in", 1)
    code = main(
        ["batch", str(targets), "--out", str(tmp_path / "o"), "--scheduler", "tcp://127.0.0.1:9"]
    )
    assert code == 2
    assert "Dask scheduler" in capsys.readouterr().err


def test_target_list_noise_and_decorrelation_columns(tmp_path):
    p = tmp_path / "e.csv"
    p.write_text("name,data,star_mass,star_mass_err,evidence\nx,a.txt,1,0.1,yes\ny,b.txt,1,0.1,\n")
    x, y = read_targets(p)
    assert x.get("evidence") and not y.get("evidence")
    p = tmp_path / "t.csv"
    p.write_text("name,data,star_mass,star_mass_err,noise,decorrelate\n"
                 "x,a.txt,1,0.1,gp,fwhm;bis\ny,b.txt,1,0.1,,\nz,c.txt,1,0.1,red,\n")  # fmt: skip
    x, y, z = read_targets(p)
    assert (x.get("noise"), x.get("decorrelate")) == ("gp", ("fwhm", "bis")) and not x.problem
    assert not x.get("evidence")
    assert (y.get("noise"), y.get("decorrelate")) == (None, ())
    assert "line 4: noise must be one of white, gp, night, got 'red'" in z.problem
    p.write_text("name,data,star_mass,star_mass_err,search\n"
                 "x,a.txt,1,0.1,keplerian\ny,b.txt,1,0.1,\nz,c.txt,1,0.1,wavelet\n")  # fmt: skip
    x, y, z = read_targets(p)
    assert (x.get("search"), y.get("search")) == ("keplerian", "auto") and not x.problem
    assert "search must be one of auto, sine, keplerian, got 'wavelet'" in z.problem


@pytest.mark.integration
def test_batch_target_with_the_gp_noise_model(tmp_path):
    from rvkep.batch import run_target

    path = make_targets(tmp_path / "in", 1)
    text = path.read_text().replace("max_companions\n", "max_companions,noise\n")
    path.write_text(text.replace("star0.txt,1.0,0.05,1\n", "star0.txt,1.0,0.05,1,gp\n")
                    .replace("broken.txt,1.0,0.05,1\n", "broken.txt,1.0,0.05,1,\n"))  # fmt: skip
    target = read_targets(path)[0]
    assert target.get("noise") == "gp"
    info = run_target(target, str(tmp_path / "out"), quick=True)
    assert info["status"] == "done", info
    d = json.loads((tmp_path / "out" / "star0" / "results.json").read_text())
    assert d["noise"]["kind"] == "gp" and "rotation_period" in d["noise"]
