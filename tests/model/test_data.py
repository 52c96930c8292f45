"""Reading RV tables: every accepted layout, every refused one, and fuzzing.

The layouts are common practice in the trade (no single source): whitespace or comma
tables, commented headers, BJD with or without an offset, km/s or m/s, the `e_` prefix
for errors from the astronomical-catalogue convention.
"""

import warnings

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from rvkep.cli import main
from rvkep.data import UnitWarning
from rvkep.errors import DataError
from rvkep.reading import load_rv, read_rv_file

ROWS = [
    (2459000.1 + 1.3 * i, round(10.0 * np.sin(i), 3), round(1.0 + 0.1 * i, 3)) for i in range(10)
]


def write(tmp_path, name, text, mode="w"):
    p = tmp_path / name
    if isinstance(text, bytes):
        p.write_bytes(text)
    else:
        p.write_text(text)
    return p


def table(sep=" ", rows=ROWS, fmt="{:.5f}{s}{:.3f}{s}{:.3f}", extra=""):
    return "\n".join(fmt.format(*r, s=sep) + extra for r in rows) + "\n"


def test_headerless_whitespace(tmp_path):
    d = read_rv_file(write(tmp_path, "north.txt", table()))
    assert len(d) == 10 and d.instruments == ["north"]
    assert np.allclose(d.rv, [r[1] for r in ROWS])
    assert d.epoch == pytest.approx(np.round(0.5 * (ROWS[0][0] + ROWS[-1][0])))


def test_header_csv_bom_crlf_comments(tmp_path):
    text = (
        "\ufeff# exported by a pipeline\r\nBJD_TDB,RV [m/s],e_RV,FWHM,BIS\r\n"
        + "".join(
            f"{t:.5f},{v:.3f},{e:.3f},{7 + i * 0.01:.3f},{-i:.1f}\r\n"
            for i, (t, v, e) in enumerate(ROWS)
        )
        + "! trailing comment\r\n"
    )
    d = read_rv_file(write(tmp_path, "south.csv", text))
    assert d.instruments == ["south"]
    assert sorted(d.extra) == ["bis", "fwhm"]
    assert np.allclose(d.err, [r[2] for r in ROWS])


def test_commented_header_and_instrument_column_unsorted(tmp_path):
    rows = [
        f"{t:.5f} {v:.3f} {e:.3f} {'alpha' if i % 2 else 'beta'}"
        for i, (t, v, e) in enumerate(ROWS)
    ]
    text = "# time rv err instrument\n" + "\n".join(reversed(rows)) + "\n"
    d = read_rv_file(write(tmp_path, "both.txt", text))
    assert d.instruments == ["beta", "alpha"]
    assert np.all(np.diff(d.time) > 0)
    assert list(d.instrument_index[:2]) == [0, 1]


def test_headerless_four_columns_with_instrument(tmp_path):
    d = read_rv_file(write(tmp_path, "x.txt", table(extra=" spec1")))
    assert d.instruments == ["spec1"]


def test_offset_times_and_mjd(tmp_path):
    rows = [(t - 2450000, v, e) for t, v, e in ROWS]
    d = read_rv_file(write(tmp_path, "off.txt", "# bjd-2450000 vrad svrad\n" + table(rows=rows)))
    assert d.time[0] == pytest.approx(9000.1)


def test_kms_option_and_header_unit(tmp_path):
    rows = [(t, v / 1000, e / 1000) for t, v, e in ROWS]
    p = write(tmp_path, "k.txt", table(rows=rows, fmt="{:.5f}{s}{:.6f}{s}{:.6f}"))
    with pytest.warns(UnitWarning, match="km/s"):
        read_rv_file(p)
    d = read_rv_file(p, kms=True)
    assert np.allclose(d.rv, [r[1] for r in ROWS], atol=1e-3)
    q = write(
        tmp_path,
        "kh.txt",
        "time rv(km/s) err(km/s)\n" + table(rows=rows, fmt="{:.5f}{s}{:.6f}{s}{:.6f}"),
    )
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        assert np.allclose(read_rv_file(q).err, [r[2] for r in ROWS], atol=1e-3)


def test_several_files(tmp_path):
    a = write(tmp_path, "north.txt", table())
    b = write(tmp_path, "south.txt", table(rows=[(t + 0.5, v, e) for t, v, e in ROWS]))
    d = load_rv([a, b])
    assert len(d) == 20 and d.instruments == ["north", "south"]
    s = d.summary()
    assert s.n_points == [10, 10] and s.total_points == 20
    assert "north" in repr(d) and "| north |" in s._repr_markdown_()
    df = s.to_pandas()
    assert list(df.index) == ["north", "south"]
    assert df.loc["north", "rms_mps"] == pytest.approx(np.std([r[1] for r in ROWS]))


BAD = {
    "nan": ("t.txt", table().replace("1.000\n", "nan\n", 1), "line 1: err is not a finite"),
    "inf": (
        "t.txt",
        table().replace(ROWS[3][0].__format__(".5f"), "inf"),
        "line 4: time is not a finite",
    ),
    "zero error": (
        "t.txt",
        table().replace("1.300\n", "0.000\n"),
        "line 4: error must be positive",
    ),
    "negative error": (
        "t.txt",
        table().replace("1.300\n", "-1.3\n"),
        "line 4: error must be positive",
    ),
    "text cell": ("t.txt", table().replace("1.200\n", "abc\n"), "line 3: non-numeric value 'abc'"),
    "ragged long": (
        "t.txt",
        table().replace("1.200\n", "1.200 5\n"),
        "line 3: 4 columns where the table has 3",
    ),
    "ragged short csv": ("t.csv", table(",").replace(",1.200\n", "\n"), "line 3: 2 columns"),
    "empty": ("t.txt", "", "empty file"),
    "comments only": ("t.txt", "# nothing\n\n", "empty file"),
    "header only": ("t.txt", "time rv err\n", "only a header"),
    "binary": ("t.dat", b"\x89PNG\r\n\x1a\n\x00\x00\x00\rIHDR", "not a text file"),
    "duplicate": ("t.txt", table() + table(rows=ROWS[:1]), "line 11: duplicate of line 1"),
    "no time column": ("t.txt", "flux rv err\n" + table(), "header has no time column"),
    "two columns": ("t.txt", "1 2\n3 4\n", "need at least time, rv and err"),
}


@pytest.mark.parametrize("case", list(BAD))
def test_bad_files_name_file_line_and_problem(tmp_path, case):
    name, text, message = BAD[case]
    p = write(tmp_path, name, text)
    with pytest.raises(DataError, match=message) as info:
        load_rv([p])
    assert str(p) in str(info.value)
    assert "\n" not in str(info.value)


def test_missing_file_and_folder(tmp_path):
    with pytest.raises(DataError, match="no such file"):
        load_rv([tmp_path / "nope.txt"])
    with pytest.raises(DataError, match="folder"):
        load_rv([tmp_path])


def test_too_few_points(tmp_path):
    with pytest.raises(DataError, match="fewer than the 8"):
        load_rv([write(tmp_path, "t.txt", table(rows=ROWS[:5]))])


def test_mixed_time_systems_refused(tmp_path):
    a = write(tmp_path, "a.txt", table())
    b = write(tmp_path, "b.txt", table(rows=[(t - 2450000, v, e) for t, v, e in ROWS]))
    with pytest.raises(DataError, match="different time systems"):
        load_rv([a, b])


def test_duplicate_across_files(tmp_path):
    a = write(tmp_path, "a.txt", table(extra=" same"))
    b = write(
        tmp_path,
        "b.txt",
        table(rows=ROWS[:2], extra=" same")
        + table(rows=[(1 + ROWS[9][0], 1, 1)] * 1, extra=" same"),
    )
    with pytest.raises(DataError, match="more than one file"):
        load_rv([a, b])


def test_check_command(tmp_path, capsys):
    a = write(tmp_path, "north.txt", table())
    assert main(["check", str(a)]) == 0
    out = capsys.readouterr().out
    assert "north" in out and "total" in out
    bad = write(tmp_path, "bad.txt", BAD["text cell"][1])
    assert main(["check", str(a), str(bad)]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "bad.txt, line 3" in err and "Traceback" not in err


@settings(
    max_examples=150, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture]
)
@given(raw=st.binary(max_size=400))
def test_fuzz_random_bytes(tmp_path, raw):
    p = tmp_path / "fuzz.txt"
    p.write_bytes(raw)
    try:
        d = load_rv([p], min_points=1)
    except DataError:
        return
    assert len(d) >= 1 and np.all(d.err > 0) and np.all(np.isfinite(d.rv))


cell = st.one_of(
    st.floats(allow_nan=True, allow_infinity=True).map(repr),
    st.integers(-5, 5).map(str),
    st.sampled_from(["", "x", "#", "nan", "1e5", ",", "  ", "a b", "-", '"q"']),
)


@settings(
    max_examples=150, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture]
)
@given(
    rows=st.lists(st.lists(cell, min_size=1, max_size=6), max_size=12),
    sep=st.sampled_from([" ", ",", "\t"]),
)
def test_fuzz_random_tables(tmp_path, rows, sep):
    p = tmp_path / "fuzz.csv"
    p.write_text("\n".join(sep.join(r) for r in rows))
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", UnitWarning)
            d = load_rv([p], min_points=1)
    except DataError:
        return
    assert np.all(d.err > 0) and np.all(np.isfinite(d.time)) and np.all(np.diff(d.time) >= 0)
