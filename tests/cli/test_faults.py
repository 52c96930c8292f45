"""Faults a careful user (and an unlucky machine) will meet: kills, interrupts, two runs
in one folder, damaged checkpoints, a full disk. The outcome is always the same: one
clear line, nothing lost, nothing left running."""

import json
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest
from helpers import HERE, make_targets, read_summary

pytestmark = [
    pytest.mark.integration,
    pytest.mark.skipif(not Path("/proc/self/stat").exists(), reason="needs /proc"),
]


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
    from helpers import one_planet, planet_model

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


FULL_DISK_SCRIPT = """
import resource, signal, sys, warnings
sys.path.insert(0, {tests!r})
from helpers import one_planet, planet_model
from rvkep.sampling import CheckpointWriteError, SamplerOptions, UnconvergedWarning, run_sampler
fit = planet_model(one_planet())
opts = SamplerOptions(seed=9, max_steps=3000, check_every=100, tau_factor=1e9, walkers=32,
                      progress=False, checkpoint={path!r})
if {limit}:
    # the largest file this process may write: the disk is "full" beyond it (EFBIG)
    signal.signal(signal.SIGXFSZ, signal.SIG_IGN)
    resource.setrlimit(resource.RLIMIT_FSIZE, ({limit}, {limit}))
warnings.simplefilter("ignore", UnconvergedWarning)
try:
    res = run_sampler(fit.model, fit.theta, opts)
except CheckpointWriteError as exc:
    print(exc, file=sys.stderr)
    sys.exit(2)
import numpy as np
np.save({out!r}, res.chain)
np.save({out!r}.replace(".npy", "_acc.npy"), res.acceptance)
"""


def run_full_disk(tmp_path, name, limit):
    path, out = tmp_path / f"{name}.h5", tmp_path / f"{name}.npy"
    code = FULL_DISK_SCRIPT.format(tests=HERE, path=str(path),
                                   out=str(out), limit=limit)  # fmt: skip
    return subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                          timeout=300), path, out  # fmt: skip


def test_full_disk_keeps_the_last_checkpoint_and_resumes_with_correct_counts(tmp_path):
    """A write that does not fit fails with one line (no segmentation fault, no
    traceback), the file keeps the last flushed steps, and the resumed chain and its
    acceptance rate equal an uninterrupted run's (no step counted twice)."""
    import h5py
    import numpy as np

    whole, _, whole_out = run_full_disk(tmp_path, "whole", 0)
    assert whole.returncode == 0, whole.stderr
    full, path, out = run_full_disk(tmp_path, "part", 1_500_000)
    assert full.returncode == 2, (full.returncode, full.stderr[-2000:])
    lines = full.stderr.strip().splitlines()
    assert len(lines) == 1 and "cannot write the checkpoint" in lines[0], full.stderr[-2000:]
    with h5py.File(path, "r") as f:  # readable, and consistent with its commit record
        g = f["mcmc"]
        kept = int(g.attrs["iteration"])
        assert 0 < kept < 3000 and f"keeps the {kept} steps" in lines[0]
        assert g["chain"].shape[0] >= kept
    resumed, _, out = run_full_disk(tmp_path, "part", 0)  # room again: the same command
    assert resumed.returncode == 0, resumed.stderr
    assert not list(tmp_path.glob("*.damaged-*")), resumed.stderr  # resumed, not restarted
    assert np.array_equal(np.load(whole_out), np.load(out))
    acc_whole = np.load(str(whole_out).replace(".npy", "_acc.npy"))
    assert np.array_equal(acc_whole, np.load(str(out).replace(".npy", "_acc.npy")))
    assert np.all(acc_whole <= 1.0)


@pytest.mark.parametrize("damage", ["garbage", "truncated", "empty", "changed_step"])
def test_damaged_checkpoint_is_kept_aside_and_the_chain_starts_afresh(tmp_path, damage):
    import warnings

    import h5py
    import numpy as np
    from helpers import one_planet, planet_model

    from rvkep.sampling import CheckpointNotice, SamplerOptions, UnconvergedWarning, run_sampler

    fit = planet_model(one_planet())
    opts = dict(seed=9, max_steps=300, check_every=100, tau_factor=1e9, progress=False)
    path = tmp_path / "chain.h5"
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UnconvergedWarning)
        fresh = run_sampler(fit.model, fit.theta, SamplerOptions(**opts))
        run_sampler(fit.model, fit.theta, SamplerOptions(**opts, checkpoint=path))
        if damage == "garbage":
            path.write_bytes(b"\x89HDF\r\n\x1a\n" + bytes(range(256)) * 40)
        elif damage == "truncated":
            path.write_bytes(path.read_bytes()[: path.stat().st_size // 2])
        elif damage == "empty":
            path.write_bytes(b"")
        else:  # a stored step that the model does not give
            with h5py.File(path, "a") as f:
                f["mcmc/log_prob"][-1, 0] += 5.0
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always", CheckpointNotice)
            again = run_sampler(fit.model, fit.theta, SamplerOptions(**opts, checkpoint=path))
    notes = [str(w.message) for w in caught if issubclass(w.category, CheckpointNotice)]
    assert len(notes) == 1 and "damaged checkpoint" in notes[0], notes
    kept = list(tmp_path.glob("chain.h5.damaged-*"))
    assert len(kept) == 1 and kept[0].name in notes[0]
    assert np.array_equal(again.chain, fresh.chain)  # a new chain, as if none was there


def test_damaged_checkpoint_through_the_command_line(tmp_path, capsys):
    from rvkep.cli import demo_folder, main

    demo = demo_folder()
    files = [str(demo / "kestrel.txt"), str(demo / "osprey.csv")]
    out = tmp_path / "out"
    out.mkdir()
    (out / "chain.h5").write_bytes(b"not an HDF5 file at all\n" * 100)
    code = main(["analyze", *files, "--out", str(out), "--quick", "--trend", "0",
                 "--max-steps", "250"])  # fmt: skip
    printed = capsys.readouterr()
    assert code == 0, printed.err
    assert "Traceback" not in printed.out + printed.err
    assert sum("damaged checkpoint" in line for line in printed.out.splitlines()) == 1
    notes = json.loads((out / "results.json").read_text())["notes"]
    assert any("damaged checkpoint" in n for n in notes)
    assert list(out.glob("chain.h5.damaged-*"))


def test_full_disk_through_the_command_line(tmp_path):
    """rvkep analyze on a disk that fills up: one line, exit 2, and the same command
    finishes the job once there is room."""
    import resource

    from rvkep.cli import demo_folder

    demo = demo_folder()
    out = tmp_path / "out"
    cmd = [sys.executable, "-m", "rvkep", "analyze", str(demo / "kestrel.txt"),
           str(demo / "osprey.csv"), "--out", str(out), "--quick", "--trend", "0"]  # fmt: skip

    def small_disk():
        signal.signal(signal.SIGXFSZ, signal.SIG_IGN)
        resource.setrlimit(resource.RLIMIT_FSIZE, (300_000, 300_000))

    full = subprocess.run(cmd, capture_output=True, text=True, timeout=300, preexec_fn=small_disk)
    assert full.returncode == 2, full.stderr[-3000:]
    assert (
        full.stderr.strip().splitlines()
        == [
            line
            for line in full.stderr.strip().splitlines()
            if line.startswith("rvkep analyze: error:")
        ]
        and len(full.stderr.strip().splitlines()) == 1
    ), full.stderr[-3000:]
    assert "cannot write the checkpoint" in full.stderr and "Traceback" not in full.stderr
    again = subprocess.run(cmd + ["--quiet"], capture_output=True, text=True, timeout=300)
    assert again.returncode == 0, again.stderr
    assert (out / "results.json").exists()


def test_damaged_completion_record_reruns_that_target(tmp_path):
    from rvkep.batch import run_batch

    targets = make_targets(tmp_path / "in", 2)
    out = tmp_path / "out"
    run_batch(targets, out, workers=2, quick=True, quiet=True)
    (out / "star1" / "done.json").write_text('{"name": "star1", "sta')  # cut short
    (out / "star0" / "results.json").write_text("")  # and a damaged result of a done one
    infos = run_batch(targets, out, workers=2, quick=True, quiet=True)
    assert infos["star1"]["status"] == "done" and infos["star0"]["status"] == "skipped"
    rows = {r["name"]: r for r in read_summary(out) if r["row"] == "target"}
    assert rows["star1"]["status"] == "done" and rows["star1"]["n_planets"] == "1"


def test_bad_target_names_fail_alone(tmp_path):
    """A 300-character name, a NUL, a quoted newline: that target fails with its line,
    the others run, and summary.csv holds only printable names."""
    from rvkep.batch import read_targets, run_batch

    targets = make_targets(tmp_path / "in", 1)
    text = targets.read_text().replace("broken,broken.txt,1.0,0.05,1\n", "")
    text += "x" * 300 + ",star0.txt,1.0,0.05,1\n"
    text += "nul\x00name,star0.txt,1.0,0.05,1\n"
    text += '"two\nlines",star0.txt,1.0,0.05,1\n'
    text += "after,star0.txt,1.0,0.05,1\n"
    targets.write_text(text)
    listed = read_targets(targets)
    assert [t.line for t in listed] == [2, 3, 4, 5, 7]  # the quoted newline spans 5-6
    assert "line 3: target name of 300 characters" in listed[1].problem
    assert "line 4: target name" in listed[2].problem and "control character" in listed[2].problem
    assert "line 5: target name" in listed[3].problem
    assert not listed[0].problem and not listed[4].problem
    out = tmp_path / "out"
    infos = run_batch(targets, out, workers=2, quick=True, quiet=True)
    assert infos["star0"]["status"] == "done" and infos["after"]["status"] == "done"
    assert sum(i["status"] == "failed" for i in infos.values()) == 3
    summary = (out / "summary.csv").read_text()
    assert "\x00" not in summary and "x" * 100 not in summary
    rows = [r for r in read_summary(out) if r["row"] == "target"]
    assert len(rows) == 5 and all("\n" not in r["name"] for r in rows)
    assert sorted(p.name for p in out.iterdir() if p.is_dir()) == ["after", "star0"]


def test_analyze_clears_debris_of_a_killed_run(tmp_path):
    """Temporary files of a run killed mid-write are removed by the next run."""
    from rvkep.cli import demo_folder, main

    demo = demo_folder()
    out = tmp_path / "out"
    out.mkdir()
    debris = [out / ".timeseries.png.tmp-k1ll3d", out / ".results.json.tmp-abc123"]
    for p in debris:
        p.write_bytes(b"half a file")
    code = main(["analyze", str(demo / "kestrel.txt"), str(demo / "osprey.csv"), "--out",
                 str(out), "--quick", "--quiet", "--trend", "0", "--max-steps", "250"])  # fmt: skip
    assert code == 0
    assert not any(p.exists() for p in debris) and not list(out.glob(".*.tmp-*"))


@pytest.mark.parametrize("delay", [0.0, 0.3, 1.0])
def test_ctrl_c_while_workers_start_prints_no_traceback(tmp_path, delay):
    """Ctrl-C while the worker processes are still starting (importing, unpickling)."""
    targets = make_targets(tmp_path / "in", 3)
    out = tmp_path / "out"
    proc = subprocess.Popen(batch_cmd(targets, out), start_new_session=True,
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)  # fmt: skip
    assert wait_for(lambda: len(children(proc.pid)) >= 2, 60, step=0.01)
    time.sleep(delay)
    os.killpg(proc.pid, signal.SIGINT)
    stdout, stderr = proc.communicate(timeout=60)
    assert proc.returncode == 130, stderr
    assert "Traceback" not in stderr + stdout, stderr


@pytest.mark.parametrize("to_group", [True, False])
def test_ctrl_c_twice_stops_limits_on_workers_and_leaves_nothing_running(tmp_path, to_group):
    """Two SIGINTs 50 ms apart during ``rvkep limits --workers 2`` (before the one
    worker-pool helper, 6 of 6 such runs hung with their workers alive): exit 130
    within seconds, no traceback, no process left, and the rerun resumes."""
    from helpers import finished_run

    run = finished_run(tmp_path / "run")
    cmd = [sys.executable, "-m", "rvkep", "limits", str(run), "--workers", "2",
           "--injections", "600", "--grid", "30", "--quiet"]  # fmt: skip (about 30 s)
    proc = subprocess.Popen(cmd, start_new_session=True, stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True)  # fmt: skip
    try:
        parts = run / "limits_parts"
        assert wait_for(lambda: parts.is_dir() and any(parts.iterdir()), 60)
        time.sleep(0.5)  # the workers are computing rows
        workers = children(proc.pid)
        assert len(workers) >= 2
        for _ in range(2):
            (os.killpg if to_group else os.kill)(proc.pid, signal.SIGINT)
            time.sleep(0.05)
        t0 = time.time()
        _, stderr = proc.communicate(timeout=60)
        assert time.time() - t0 < 30
        assert proc.returncode == 130 and "Traceback" not in stderr, stderr
        assert stderr.strip().splitlines()[-1] == "rvkep limits: interrupted"
        assert wait_for(lambda: not any(alive(w) for w in workers), 10), "workers left"
    finally:
        with __import__("contextlib").suppress(ProcessLookupError):
            os.killpg(proc.pid, signal.SIGKILL)
    assert not (run / "limits.csv").exists()
    if to_group:  # the rerun resumes from the rows written
        kept = len(list(parts.iterdir()))
        rerun = subprocess.run(cmd[:-1], capture_output=True, text=True, timeout=600)
        assert rerun.returncode == 0, rerun.stderr
        assert f"resuming, {kept} of 30 period rows already done" in rerun.stderr
        assert (run / "limits.csv").exists()


def test_ctrl_c_inside_the_keplerian_periodogram_is_a_clean_interrupt(tmp_path):
    """SIGINT while the compiled parallel kernel runs: exit 130 and one line (before
    the kernel ran in slices with SIGINT deferred: SystemError "returned a result with
    an exception set", or a crash)."""
    import numpy as np

    rng = np.random.default_rng(1)
    t = np.sort(rng.uniform(0, 2000, 120))
    y = 10 * np.sin(2 * np.pi * t / 37.0) + rng.normal(0, 2, t.size)
    f = tmp_path / "star.txt"
    np.savetxt(f, np.column_stack([t, y, np.full(t.size, 2.0)]), header="time rv err")
    cmd = [sys.executable, "-m", "rvkep", "periodogram", str(f), "--search", "keplerian",
           "--out", str(tmp_path)]  # fmt: skip
    proc = subprocess.Popen(cmd, start_new_session=True, stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True)  # fmt: skip
    try:
        time.sleep(6.0)  # inside the bootstrap's kernel calls (about a minute in all)
        assert proc.poll() is None
        os.kill(proc.pid, signal.SIGINT)
        _, stderr = proc.communicate(timeout=60)
    finally:
        with __import__("contextlib").suppress(ProcessLookupError):
            os.killpg(proc.pid, signal.SIGKILL)
    assert proc.returncode == 130, stderr
    assert stderr.strip().splitlines() == ["rvkep periodogram: interrupted"], stderr
