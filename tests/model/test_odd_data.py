"""Data that look valid but are not: each is refused in one line naming the file and
the line, or read correctly and noted where the user will see it (results.json and the
summary, not only the terminal)."""

import json

import numpy as np
import pytest

from rvkep.cli import main
from rvkep.data import DataWarning, UnitWarning
from rvkep.errors import DataError
from rvkep.reading import load_rv, read_rv_file


def rows(n=30, seed=1, t0=2459000.0):
    """Invented times and velocities (seeded): n nights over 300 days."""
    rng = np.random.default_rng(seed)
    t = np.sort(t0 + rng.choice(np.arange(300), n, replace=False) + 0.3)
    v = 10 * np.sin(2 * np.pi * t / 17.3) + rng.normal(0, 1.5, n)
    return t, v


def write(path, t, v, e=1.5, fmt="{:.6f} {:.4f} {}"):
    text = "\n".join(fmt.format(a, b, e) for a, b in zip(t, v, strict=True))
    path.write_text(text + "\n")
    return path


def test_jd_and_mjd_mixed_inside_one_file(tmp_path):
    t, v = rows()
    t = t.copy()
    t[12:] -= 2400000.5  # the rest of the file in MJD (common practice, no source)
    path = write(tmp_path / "mixed.txt", t, v)
    with pytest.raises(DataError, match=r"mixed.txt, line 1: time .* another time system"):
        load_rv(path)
    t2, v2 = rows()
    t2[20] -= 2450000.0  # one row with a truncated date
    with pytest.raises(DataError, match=r"line 21: .*another time system"):
        load_rv(write(tmp_path / "one.txt", t2, v2))


def test_velocities_beyond_light_and_times_beyond_dates(tmp_path):
    t, v = rows()
    with pytest.raises(DataError, match=r"huge.txt, line 1: rv .* faster than light"):
        load_rv(write(tmp_path / "huge.txt", t, 1e301 * (1 + 0.1 * np.sin(t)), 1e299))
    v2 = v.copy()
    v2[4] = 3.5e8  # above c = 299792458 m/s (SI, exact)
    with pytest.raises(DataError, match=r"line 5: rv 3.5e\+08 is faster than light"):
        load_rv(write(tmp_path / "c.txt", t, v2))
    with pytest.raises(DataError, match=r"line 1: error .* larger than the speed of light"):
        load_rv(write(tmp_path / "e.txt", t, v, e=4e8))
    with pytest.raises(DataError, match=r"line 1: time 1e\+30 is beyond"):
        load_rv(write(tmp_path / "t.txt", t * 0 + 1e30 + np.arange(t.size) * 1e16, v))


def test_huge_velocities_on_the_command_line_give_one_line(tmp_path, capsys):
    t, v = rows()
    path = write(tmp_path / "huge.txt", t, 1e301 * (1 + 0.1 * np.sin(t)), 1e299)
    code = main(["analyze", str(path), "--out", str(tmp_path / "out"), "--quick", "--quiet"])
    err = capsys.readouterr().err
    assert code == 2 and len(err.strip().splitlines()) == 1 and "faster than light" in err


def test_tiny_errors_are_not_taken_for_kms(tmp_path):
    t, v = rows()
    with pytest.warns(DataWarning, match="errors implausibly small") as caught:
        read_rv_file(write(tmp_path / "tiny.txt", t, v, e=1e-300))
    assert not any(issubclass(w.category, UnitWarning) for w in caught)


def test_kms_warning_reaches_results_and_summary_even_quiet(tmp_path):
    t, v = rows(n=40, seed=3)
    path = write(tmp_path / "kms.txt", t, -12.345 + v / 1000.0, e=0.0015)
    out = tmp_path / "out"
    code = main(["analyze", str(path), "--out", str(out), "--quick", "--quiet", "--trend", "0",
                 "--max-companions", "1", "--max-steps", "250"])  # fmt: skip
    assert code == 0
    notes = json.loads((out / "results.json").read_text())["notes"]
    assert any("look like km/s" in n for n in notes)
    assert "look like km/s" in (out / "summary.md").read_text()


def test_unreadable_values_are_named_with_their_line(tmp_path):
    t, v = rows()
    lines = [f"{a:.6f} {b:.4f} 1.5" for a, b in zip(t, v, strict=True)]
    quoted = list(lines)
    quoted[7] = f"{t[7]:.6f} 'nan' 1.5"
    (tmp_path / "q.txt").write_text("\n".join(quoted) + "\n")
    with pytest.raises(DataError, match=r"q.txt, line 8: non-numeric value \"'nan'\" in column rv"):
        load_rv(tmp_path / "q.txt")
    word = list(lines)
    word[3] = f"{t[3]:.6f} {v[3]:.4f} 1.5x"
    (tmp_path / "w.txt").write_text("\n".join(word) + "\n")
    with pytest.raises(DataError, match=r"w.txt, line 4: non-numeric value '1.5x' in column err"):
        load_rv(tmp_path / "w.txt")


def test_fortran_exponents_are_read(tmp_path):
    # FORTRAN's D exponent (ISO/IEC 1539, the D edit descriptor): 1.5D0 = 1.5
    t, v = rows()
    lines = [f"{a:.6f} {b:.4f} 1.5" for a, b in zip(t, v, strict=True)]
    lines[5] = f"{t[5]:.6f} {v[5] * 10:.4f}D-1 1.5D0"
    (tmp_path / "f.txt").write_text("\n".join(lines) + "\n")
    data = load_rv(tmp_path / "f.txt")
    assert np.allclose(data.rv, np.round(v, 4), atol=1e-9) and np.all(data.err == 1.5)


@pytest.mark.parametrize("encoding", ["utf-16", "utf-16-le", "utf-16-be"])
def test_utf16_files_are_read(tmp_path, encoding):
    t, v = rows()
    text = "# bjd rv err\n" + "\n".join(f"{a:.6f} {b:.4f} 1.5" for a, b in zip(t, v, strict=True))
    path = tmp_path / "u16.txt"
    path.write_bytes(text.encode(encoding))
    data = load_rv(path)
    assert len(data) == t.size and np.allclose(data.time, np.round(t, 6))


def test_single_night_is_refused_with_the_file_named(tmp_path):
    t = 2459000.2 + np.linspace(0, 0.3, 30)
    path = write(tmp_path / "night.txt", t, 5 * np.sin(50 * t))
    with pytest.raises(DataError, match=r"night.txt: all 30 points lie within 7.2 hours"):
        load_rv(path)


def test_odd_input_probe_ends_every_case_as_expected():
    """scripts/probe_inputs.py: 42 odd files (encodings, broken rows, impossible values),
    each read or refused in one line naming the file; none ends in a traceback. (An
    empty quoted instrument name ended in numpy's ValueError before.)"""
    import subprocess
    import sys
    from pathlib import Path

    script = Path(__file__).resolve().parents[2] / "scripts" / "probe_inputs.py"
    proc = subprocess.run([sys.executable, str(script)], capture_output=True, text=True,
                          timeout=300)  # fmt: skip
    assert proc.returncode == 0, proc.stdout[-3000:] + proc.stderr[-2000:]
    assert "42 of 42 odd inputs ended as expected" in proc.stdout
