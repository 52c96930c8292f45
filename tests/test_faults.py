"""Faults a careful user (and an unlucky machine) will meet: kills, interrupts, two runs
in one folder, damaged checkpoints, a full disk. The outcome is always the same: one
clear line, nothing lost, nothing left running."""

import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest
from test_batch import make_targets, read_summary

pytestmark = pytest.mark.skipif(not Path("/proc/self/stat").exists(), reason="needs /proc")


def children(pid: int) -> set[int]:
    """PIDs whose parent is ``pid`` (read from /proc)."""
    out = set()
    for stat in Path("/proc").glob("[0-9]*/stat"):
        try:
            fields = stat.read_text().rsplit(")", 1)[1].split()
        except OSError:
            continue
        if int(fields[1]) == pid:
            out.add(int(stat.parent.name))
    return out


def alive(pid: int) -> bool:
    try:
        state = Path(f"/proc/{pid}/stat").read_text().rsplit(")", 1)[1].split()[0]
    except OSError:
        return False
    return state != "Z"


def wait_for(predicate, timeout: float, step: float = 0.1) -> bool:
    deadline = time.time() + timeout
    while time.time() < deadline:
        if predicate():
            return True
        time.sleep(step)
    return predicate()


def batch_cmd(targets: Path, out: Path, *extra: str) -> list[str]:
    return [sys.executable, "-m", "rvkep", "batch", str(targets), "--out", str(out),
            "--workers", "2", "--quick", *extra]  # fmt: skip


def test_batch_workers_die_with_their_parent(tmp_path):
    """kill -9 of the batch process leaves no worker running (no orphans)."""
    targets = make_targets(tmp_path / "in", 6)
    out = tmp_path / "out"
    proc = subprocess.Popen(batch_cmd(targets, out, "--quiet"), start_new_session=True)
    try:
        assert wait_for(lambda: len(children(proc.pid)) >= 2, 60)
        assert wait_for(lambda: any(out.glob("star*/log.txt")), 60)  # workers are busy
        workers = children(proc.pid)
        os.kill(proc.pid, signal.SIGKILL)  # the parent only, as the OOM killer would
        proc.wait()
        assert wait_for(lambda: not any(alive(w) for w in workers), 15), "orphan workers"
    finally:
        with __import__("contextlib").suppress(ProcessLookupError):
            os.killpg(proc.pid, signal.SIGKILL)


def test_ctrl_c_stops_a_batch_now_and_writes_the_summary(tmp_path):
    """SIGINT to the whole process group (a terminal's Ctrl-C): queued targets are
    cancelled, the summary says what finished, exit 130, no traceback."""
    targets = make_targets(tmp_path / "in", 8)
    out = tmp_path / "out"
    proc = subprocess.Popen(batch_cmd(targets, out), start_new_session=True,
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)  # fmt: skip
    assert wait_for(lambda: any(out.glob("star*/log.txt")), 60)
    time.sleep(1.0)
    t0 = time.time()
    os.killpg(proc.pid, signal.SIGINT)
    stdout, stderr = proc.communicate(timeout=60)
    assert time.time() - t0 < 20, "the queue kept running after Ctrl-C"
    assert proc.returncode == 130, stderr
    assert "Traceback" not in stderr and "Traceback" not in stdout, stderr
    assert "interrupted" in stderr
    rows = {r["name"]: r for r in read_summary(out) if r["row"] == "target"}
    assert set(rows) == {f"star{k}" for k in range(8)} | {"broken"}
    statuses = {r["status"] for r in rows.values()}
    assert statuses <= {"done", "failed", "interrupted", "not started"}
    assert "not started" in statuses  # the queue was cancelled, not run
    assert wait_for(lambda: not children(proc.pid), 5)
    # the rerun finishes the job from where it stopped
    rerun = subprocess.run(batch_cmd(targets, out, "--quiet"), timeout=300)
    assert rerun.returncode == 3  # the broken target only
    rows = {r["name"]: r for r in read_summary(out) if r["row"] == "target"}
    assert all(rows[f"star{k}"]["status"] == "done" for k in range(8))


def test_sigint_to_the_batch_process_alone(tmp_path):
    """kill -INT of the parent only (not from a terminal) also stops the workers."""
    targets = make_targets(tmp_path / "in", 6)
    out = tmp_path / "out"
    proc = subprocess.Popen(batch_cmd(targets, out, "--quiet"), start_new_session=True,
                            stderr=subprocess.PIPE, text=True)  # fmt: skip
    assert wait_for(lambda: any(out.glob("star*/log.txt")), 60)
    workers = children(proc.pid)
    proc.send_signal(signal.SIGINT)
    _, stderr = proc.communicate(timeout=60)
    assert proc.returncode == 130 and "Traceback" not in stderr, stderr
    assert wait_for(lambda: not any(alive(w) for w in workers), 10)
    assert (out / "summary.csv").exists()


def test_ctrl_c_during_sampling_prints_no_traceback_and_resumes_exactly(tmp_path, capfd):
    """A real SIGINT arriving inside the log-posterior (where emcee would print a
    traceback) stops the sampler at the next step with every finished step on disk."""
    import warnings

    import h5py
    import numpy as np
    from test_sampling import one_planet, planet_model

    import rvkep.sampling as sampling
    from rvkep.sampling import SamplerOptions, UnconvergedWarning, run_sampler

    fit = planet_model(one_planet())
    opts = dict(seed=9, max_steps=600, check_every=100, tau_factor=1e9, progress=False)
    real = sampling.LogPosterior
    calls = {"n": 0}

    class Interrupted(real):
        def __call__(self, theta):
            calls["n"] += 1
            if calls["n"] == 500:  # in the middle of a chunk
                os.kill(os.getpid(), signal.SIGINT)
            return super().__call__(theta)

    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UnconvergedWarning)
        whole = run_sampler(
            fit.model, fit.theta, SamplerOptions(**opts, checkpoint=tmp_path / "a.h5")
        )
        sampling.LogPosterior = Interrupted
        try:
            with pytest.raises(KeyboardInterrupt):
                run_sampler(fit.model, fit.theta,
                            SamplerOptions(**opts, checkpoint=tmp_path / "b.h5"))  # fmt: skip
        finally:
            sampling.LogPosterior = real
        assert signal.getsignal(signal.SIGINT) is signal.default_int_handler  # restored
        printed = capfd.readouterr()
        assert "Traceback" not in printed.out + printed.err
        with h5py.File(tmp_path / "b.h5", "r") as f:
            assert 0 < f["mcmc"].attrs["iteration"] < 600
        resumed = run_sampler(
            fit.model, fit.theta, SamplerOptions(**opts, checkpoint=tmp_path / "b.h5")
        )
    assert np.array_equal(whole.chain, resumed.chain)


def test_second_run_into_the_same_folder_refuses(tmp_path, capsys):
    """One run per output folder: while one analyze writes there, a second refuses in
    one line naming the folder and the running process; afterwards the folder is free."""
    from rvkep.cli import demo_folder, main

    demo = demo_folder()
    files = [str(demo / "kestrel.txt"), str(demo / "osprey.csv")]
    out = tmp_path / "out"
    first = subprocess.Popen([sys.executable, "-m", "rvkep", "analyze", *files, "--out", str(out),
                              "--quick", "--quiet", "--star-mass", "1.0"])  # fmt: skip
    try:
        assert wait_for(lambda: (out / ".rvkep.lock").exists()
                        and (out / ".rvkep.lock").read_text().strip(), 60)  # fmt: skip
        code = main(["analyze", *files, "--out", str(out), "--quick", "--quiet"])
        err = capsys.readouterr().err
        assert code == 2, err
        assert len(err.strip().splitlines()) == 1 and "Traceback" not in err
        assert str(out) in err and f"pid {first.pid}" in err
        assert first.poll() is None  # the first run goes on undisturbed
        assert first.wait(timeout=300) == 0
    finally:
        if first.poll() is None:
            first.kill()
    # a killed run holds no lock: the kernel releases it with the process
    assert main(["check", *files]) == 0
    from rvkep.outputs import folder_lock

    with folder_lock(out):
        pass


def test_second_batch_into_the_same_folder_refuses(tmp_path):
    from rvkep.errors import FolderBusyError
    from rvkep.outputs import folder_lock

    targets = make_targets(tmp_path / "in", 1)
    out = tmp_path / "out"
    out.mkdir()
    with folder_lock(out):
        proc = subprocess.run(batch_cmd(targets, out, "--quiet"), capture_output=True, text=True,
                              timeout=120)  # fmt: skip
        with pytest.raises(FolderBusyError, match="another rvkep run"):
            with folder_lock(out):
                pass
    assert proc.returncode == 2 and "another rvkep run is writing there" in proc.stderr
    assert not (out / "summary.csv").exists()
