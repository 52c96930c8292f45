"""Scale: memory bounded while reading any size of table, a stated limit on what the
analysis takes, and binning as the user's way past it."""

import subprocess
import sys

import numpy as np
import pytest

import rvkep.reading as reading_module
from rvkep.cli import main
from rvkep.data import MAX_POINTS, RVData
from rvkep.errors import DataError
from rvkep.periodogram import spectral_window
from rvkep.reading import load_rv


def big_table(path, n, seed=0):
    """Invented: n distinct times over 3000 days, a 37.1-day sine, errors 2 m/s."""
    rng = np.random.default_rng(seed)
    t = 2459000 + np.sort(rng.choice(3000 * 10**4, n, replace=False)) * 1e-4
    v = 10 * np.sin(2 * np.pi * t / 37.1) + rng.normal(0, 2, n)
    with open(path, "w") as fh:
        fh.write("bjd rv err\n")
        np.savetxt(fh, np.column_stack([t, v, np.full(n, 2.0)]), fmt="%.4f %.4f %.2f")
    return path


def test_reading_in_blocks_gives_the_same_table(tmp_path, monkeypatch):
    path = big_table(tmp_path / "t.txt", 5000)
    text = path.read_text().splitlines()
    text.insert(100, "# a comment inside the table")
    text.insert(2000, "")
    path.write_text("\n".join(text) + "\n")
    whole = load_rv(path)
    monkeypatch.setattr(reading_module, "_LINES_PER_BLOCK", 333)
    blocks = load_rv(path)
    assert np.array_equal(whole.time, blocks.time) and np.array_equal(whole.rv, blocks.rv)
    bad = list(text)
    bad[4000] = "2461000.5 1.0 2.0 7.0"
    path.write_text("\n".join(bad) + "\n")
    with pytest.raises(DataError, match="line 4001: 4 columns where the table has 3"):
        load_rv(path)


@pytest.mark.integration
def test_check_of_a_million_rows_stays_small(tmp_path):
    """Reading costs about 300 bytes per row, not 900 (a million rows measured at 0.9 GB
    before reading in blocks)."""
    path = big_table(tmp_path / "m.txt", 1_000_000)
    # the process's own high-water mark (VmHWM): ru_maxrss survives exec and would
    # report the forking test process's size
    code = (
        "import sys\n"
        "from rvkep.cli import main\n"
        f"code = main(['check', {str(path)!r}])\n"
        "hwm = [ln for ln in open('/proc/self/status') if ln.startswith('VmHWM')][0]\n"
        "print('peak_kb', hwm.split()[1])\n"
        "sys.exit(code)\n"
    )
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                          timeout=120)  # fmt: skip
    assert proc.returncode == 0, proc.stderr
    assert "1000000" in proc.stdout
    peak_kb = int(proc.stdout.rsplit("peak_kb", 1)[1].split()[0])
    assert peak_kb < 600_000, f"peak {peak_kb / 1024:.0f} MB"


def test_more_points_than_the_analysis_takes_are_refused_with_the_way_out(tmp_path, capsys):
    path = big_table(tmp_path / "big.txt", MAX_POINTS + 1)
    code = main(["analyze", str(path), "--out", str(tmp_path / "out"), "--quick"])
    err = capsys.readouterr().err
    assert code == 2 and len(err.strip().splitlines()) == 1
    assert f"{MAX_POINTS + 1:,} points" in err and "--bin DAYS" in err
    assert not (tmp_path / "out" / "results.json").exists()
    code = main(["periodogram", str(path), "--out", str(tmp_path / "pg")])
    assert code == 2 and "--bin DAYS" in capsys.readouterr().err


def test_binning_is_the_weighted_mean_per_instrument_and_bin():
    # error-weighted mean and its error 1/sqrt(sum w), w = 1/err^2
    # (common practice, no source; the inverse-variance weighted mean)
    t = np.array([10.1, 10.3, 10.9, 11.2, 10.2, 10.4])
    v = np.array([1.0, 3.0, 2.0, 5.0, 100.0, 104.0])
    e = np.array([1.0, 2.0, 1.0, 1.0, 1.0, 1.0])
    inst = np.array(["a", "a", "a", "a", "b", "b"])
    fwhm = np.array([7.0, np.nan, 9.0, 1.0, 2.0, 4.0])
    data = RVData(t, v, e, inst, {"fwhm": fwhm})
    out = data.binned(1.0)
    assert len(out) == 3 and len(data) == 6  # the input is not changed
    a = out.instrument == "a"
    w = 1 / e[:3] ** 2
    k = np.argmin(out.time[a])
    assert out.rv[a][k] == pytest.approx(np.sum(w * v[:3]) / w.sum(), rel=1e-14)
    assert out.err[a][k] == pytest.approx(1 / np.sqrt(w.sum()), rel=1e-14)
    assert out.time[a][k] == pytest.approx(np.sum(w * t[:3]) / w.sum(), rel=1e-14)
    assert out.extra["fwhm"][a][k] == pytest.approx(8.0)  # the NaN left out
    b = out.instrument == "b"
    assert out.rv[b][0] == pytest.approx(102.0) and out.err[b][0] == pytest.approx(2**-0.5)
    with pytest.raises(ValueError, match="positive"):
        data.binned(0.0)


@pytest.mark.integration
def test_analyze_with_bin_notes_it(tmp_path):
    path = big_table(tmp_path / "big.txt", MAX_POINTS + 1)
    out = tmp_path / "out"
    code = main(["analyze", str(path), "--out", str(out), "--quick", "--quiet", "--bin", "1",
                 "--trend", "0", "--max-companions", "1", "--max-steps", "250"])  # fmt: skip
    assert code == 0
    import json

    res = json.loads((out / "results.json").read_text())
    assert any("1-day bins per instrument: 20,001 -> 2,998 points" in n for n in res["notes"])
    assert res["planets"][0]["period_d"]["median"] == pytest.approx(37.1, rel=1e-3)


def test_spectral_window_memory_does_not_grow_with_points_times_frequencies():
    # the window's definition |sum exp(2 pi i f t)|^2 / N^2 (Deeming 1975), computed
    # directly for a few frequencies
    rng = np.random.default_rng(1)
    t = np.sort(rng.uniform(0, 500, 3000))
    f = np.linspace(0.01, 1.2, 50)
    direct = (
        np.abs(np.exp(2j * np.pi * np.outer(f, t - np.round(t.mean()))).sum(1)) ** 2 / t.size**2
    )
    assert np.allclose(spectral_window(t, f), direct, rtol=1e-10, atol=1e-14)
    many = np.sort(rng.uniform(0, 500, 3_000_000))  # 4096 x 3e6 doubles would be 98 GB
    assert spectral_window(many, np.array([0.0, 1.0, 0.5])).shape == (3,)
