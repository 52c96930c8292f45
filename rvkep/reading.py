"""Reading radial-velocity tables: one file (:func:`read_rv_file`) or a star's files
(:func:`load_rv`) into an :class:`rvkep.data.RVData`.

Accepted layouts: see :mod:`rvkep.data`. Parsing runs in numpy's C reader; a
vectorized byte scan, 200,000 lines at a time, counts the cells per line, so that an
error names its line; the per-line Python scan only runs to locate a bad row. The values
are then checked by :mod:`rvkep.data_checks`.
"""

from __future__ import annotations

import re
import warnings
from collections.abc import Iterable, Sequence
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from rvkep.data import COLUMN_NAMES, MIN_POINTS, MIN_SPAN_DAYS, RVData
from rvkep.data_checks import (
    LayoutWarning,
    check_duplicates,
    check_ranges,
    check_time_system,
    first_duplicate,
    time_system,
    warn_if_kms,
)
from rvkep.errors import DataError

__all__ = ["read_rv_file", "load_rv"]


_COMMENT_CHARS = ("#", "!", "%")


_NAME_TO_ROLE = {name: role for role, names in COLUMN_NAMES.items() for name in names}


# words of compound header names (``rv_mps``, ``velocity_error``, ``time_bjd``)
_UNIT_WORDS = {"mps", "ms", "m_s", "kms", "km_s", "kmps", "d", "day", "days", "m", "s", "km"}


_ERR_WORDS = {"err", "error", "errors", "sigma", "sig", "unc", "uncertainty", "e", "s", "std",
              "dv", "erv", "svrad", "evrad", "u"}  # fmt: skip


_RV_WORDS = {"rv", "vrad", "velocity", "vel", "v", "radvel", "vr", "radial", "mnvel"}


_TIME_WORDS = {"time", "t", "bjd", "jd", "mjd", "hjd", "rjd", "date", "epoch", "btjd",
               "bjdtdb", "tdb", "utc", "obs"}  # fmt: skip


def _column_role(norm: str) -> str | None:
    """The role a normalised header name plays: exact names first, then compound
    names read word by word with unit words dropped (``rv_mps`` -> rv,
    ``err_mps`` -> err, ``velocity_error`` -> err, ``time_bjd`` -> time)."""
    role = _NAME_TO_ROLE.get(norm)
    if role is not None:
        return role
    if norm.startswith(("bjd_", "jd_", "mjd_", "hjd_")):
        return "time"
    words = [w for w in norm.split("_") if w]
    core = [w for w in words if w not in _UNIT_WORDS] or words
    role = _NAME_TO_ROLE.get("_".join(core))
    if role is not None:
        return role
    has_rv = any(w in _RV_WORDS for w in core)
    has_err = any(w in _ERR_WORDS for w in core)
    if has_err and (has_rv or len(core) == 1):
        return "err"
    if has_rv and not has_err:
        return "rv"
    if all(w in _TIME_WORDS or w.isdigit() for w in core):
        return "time"
    return None


_NUMBER = re.compile(r"^[+-]?(\d+\.?\d*|\.\d+)([eEdD][+-]?\d+)?$|^[+-]?(nan|inf)$", re.I)


def _normalise_name(token: str) -> str:
    token = token.strip().strip("\"'").lower()
    token = re.sub(r"[\[(].*?[\])]", "", token)  # units in brackets
    return re.sub(r"[-.\s/]+", "_", token).strip("_")


def _is_comment(line: str) -> bool:
    s = line.lstrip()
    return not s or s.startswith(_COMMENT_CHARS)


def _split(line: str, delimiter: str | None, quotes: str = "\"'") -> list[str]:
    """The cells of a line (a ``#`` comment cut off), ``quotes`` stripped around
    delimited cells."""
    line = line.split("#", 1)[0]
    if delimiter is None:
        return line.split()
    return [c.strip().strip(quotes) for c in line.split(delimiter)]


def _looks_numeric(token: str) -> bool:
    return bool(_NUMBER.match(token.strip().strip("\"'")))


def _decode(path: Path) -> str:
    from rvkep.inputs import read_bytes

    raw = read_bytes(path, DataError, "a data file")
    utf16 = _utf16_encoding(raw)
    if utf16 is not None:  # e.g. a table saved as "Unicode" by a Windows editor
        try:
            return raw.decode(utf16).lstrip("\ufeff")
        except UnicodeDecodeError:
            raise DataError(f"{path}: a UTF-16 file with undecodable bytes") from None
    control = np.frombuffer(raw, dtype=np.uint8)
    control = control[(control < 32) & ~np.isin(control, (9, 10, 12, 13))]
    if control.size:
        raise DataError(f"{path}: not a text file (binary content)")
    try:
        return raw.decode("utf-8-sig")
    except UnicodeDecodeError:
        try:
            return raw.decode("latin-1")
        except UnicodeDecodeError:  # pragma: no cover - latin-1 decodes any byte
            raise DataError(f"{path}: not a text file (undecodable bytes)") from None


def _utf16_encoding(raw: bytes) -> str | None:
    """ "utf-16" (with a byte-order mark), "utf-16-le"/"-be" (none, but every other byte
    of an ASCII text is zero), or None for any other file."""
    if raw[:2] in (b"\xff\xfe", b"\xfe\xff"):
        return "utf-16"
    head = raw[:4096]
    if len(head) >= 8 and len(head) % 2 == 0:
        even, odd = head[0::2], head[1::2]
        if odd.count(0) == len(odd) and even.count(0) == 0:
            return "utf-16-le"
        if even.count(0) == len(even) and odd.count(0) == 0:
            return "utf-16-be"
    return None


@dataclass
class _Layout:
    first_data: int  # index (0-based) of the first data line
    delimiter: str | None
    n_columns: int
    roles: list[str]  # per column: time / rv / err / instrument / extra:<name>
    header_line: int | None  # 1-based line number of the header, if any
    header_kms: bool


def _find_layout(path: Path, lines: list[str]) -> _Layout:
    """The table's layout: its first data line, delimiter, columns and their roles,
    from the header (the last line before the data naming as many columns) or, without
    one, by position (time, rv, err, then extra columns)."""
    first_data, candidates = _first_data_line(path, lines)
    first = lines[first_data]
    delimiter: str | None = None
    if "," in first.split("#", 1)[0]:
        delimiter = ","
    elif ";" in first.split("#", 1)[0]:
        delimiter = ";"
    cells = _split(first, delimiter)
    ncol = len(cells)
    # a header is the last candidate line with as many names as there are columns
    for idx, text in reversed(candidates):
        names = _split(text, delimiter if delimiter and delimiter in text else None)
        if len(names) == ncol and not all(_looks_numeric(n) for n in names):
            return _header_layout(path, first_data, delimiter, cells, idx, names)
        if idx == first_data - 1 and not lines[idx].lstrip().startswith(_COMMENT_CHARS):
            break
    if ncol < 3:
        raise DataError(
            f"{path}, line {first_data + 1}: {ncol} column(s) without a header; "
            "need at least time, rv and err"
        )
    return _Layout(first_data, delimiter, ncol, _positional_roles(cells), None, False)


def _first_data_line(path: Path, lines: list[str]) -> tuple[int, list[tuple[int, str]]]:
    """The index of the first line starting with a number, and the (index, text) of the
    comment and header lines before it that could name the columns."""
    candidates: list[tuple[int, str]] = []
    for i, line in enumerate(lines):
        if _is_comment(line):
            s = line.strip().lstrip("#!% ").strip()
            if s:
                candidates.append((i, s))
            continue
        tokens = line.replace(",", " ").replace(";", " ").split()
        if tokens and _looks_numeric(tokens[0]):
            return i, candidates
        candidates.append((i, line.strip()))  # a header row (not commented)
        if len(candidates) > 200:
            break
    if any(not _is_comment(ln) for ln in lines):
        raise DataError(f"{path}: only a header, no data rows")
    raise DataError(f"{path}: empty file (no data rows)")


def _header_layout(path, first_data, delimiter, cells, idx, names) -> _Layout:
    """The layout a header at line ``idx`` (0-based) names; a header naming no column
    rvkep knows is read by position with a :class:`LayoutWarning`."""
    ncol = len(cells)
    roles, kms = [], False
    for raw in names:
        norm = _normalise_name(raw)
        role = _column_role(norm)
        if role is None or role in roles:
            role = f"extra:{norm or 'column'}"
        if role in ("rv", "err") and "km" in raw.lower():
            kms = True
        roles.append(role)
    missing = [r for r in ("time", "rv", "err") if r not in roles]
    recognised = [r for r in roles if not r.startswith("extra:")]
    if not recognised and ncol >= 3:
        # a header naming nothing we know: read time, rv, err by position, say so
        roles = _positional_roles(cells, [_normalise_name(n) for n in names])
        warnings.warn(
            f"{path}, line {idx + 1}: no column name recognised ({', '.join(names)}); "
            "read as time, rv, err by position",
            LayoutWarning,
            stacklevel=5,
        )
        return _Layout(first_data, delimiter, ncol, roles, idx + 1, False)
    if missing:
        known = ", ".join(COLUMN_NAMES[missing[0]][:6])
        raise DataError(
            f"{path}, line {idx + 1}: header has no {missing[0]} column "
            f"(found {', '.join(names)}; expected a name such as {known})"
        )
    return _Layout(first_data, delimiter, ncol, roles, idx + 1, kms)


def _positional_roles(cells: list[str], names: list[str] | None = None) -> list[str]:
    """Roles read by position: time, rv, err, then an instrument if the fourth cell is
    not a number, then extra columns (named from ``names`` where given)."""
    roles = ["time", "rv", "err"]
    for j in range(3, len(cells)):
        if j == 3 and not _looks_numeric(cells[3]):
            roles.append("instrument")
        else:
            roles.append(f"extra:{(names[j] if names else '') or f'column{j + 1}'}")
    return roles


def _locate_bad_row(path: Path, lines: list[str], layout: _Layout) -> str:
    """Scan the data lines for the first one at fault; return the error message."""
    numeric = [j for j, r in enumerate(layout.roles) if r != "instrument"]
    for i in range(layout.first_data, len(lines)):
        line = lines[i]
        if _is_comment(line):
            continue
        cells = _split(line, layout.delimiter)
        if len(cells) != layout.n_columns:
            return (
                f"{path}, line {i + 1}: {len(cells)} columns where the table has {layout.n_columns}"
            )
        raw_cells = _split(line, layout.delimiter, quotes='"')  # as numpy's reader sees them
        for j in numeric:
            if not _parses(raw_cells[j]):
                name = layout.roles[j].removeprefix("extra:")
                return f"{path}, line {i + 1}: non-numeric value {raw_cells[j]!r} in column {name}"
    return f"{path}: unreadable table"


def _parses(cell: str) -> bool:
    try:
        float(cell.strip().strip('"'))
    except ValueError:
        return False
    return True


#: A Fortran double-precision exponent (1.5D0, 2.0d-3) inside a number.
_FORTRAN_EXPONENT = re.compile(r"(?<=[0-9.])[dD](?=[+-]?[0-9])")


def _byte_class(chars: bytes) -> np.ndarray:
    table = np.zeros(256, dtype=bool)
    table[np.frombuffer(chars, dtype=np.uint8)] = True
    return table


_BLANK_BYTES = _byte_class(b" \t\r\x0b\x0c")


_LINE_COMMENT_BYTES = _byte_class(b"!%")


#: Lines handled per block when counting cells: bounds the reader's working memory
#: (about 30 bytes per byte of a block) whatever the size of the file.
_LINES_PER_BLOCK = 200_000


def _fields_per_line(body: list[str], delimiter: str | None) -> np.ndarray:
    """Number of cells on each line (0 for blank and comment lines), in blocks."""
    if len(body) <= _LINES_PER_BLOCK:
        return _fields_in_block(body, delimiter)
    return np.concatenate([
        _fields_in_block(body[i : i + _LINES_PER_BLOCK], delimiter)
        for i in range(0, len(body), _LINES_PER_BLOCK)
    ])  # fmt: skip


def _fields_in_block(body: list[str], delimiter: str | None) -> np.ndarray:
    """Number of cells on each line (0 for blank and comment lines), vectorized.

    Works on the bytes of the whole table at once: a ``#`` comment runs to the end of
    its line, ``!`` and ``%`` only start comment lines; cells are runs of non-blank
    characters (whitespace tables) or pieces between delimiters.
    """
    b = np.frombuffer(("\n".join(body) + "\n").encode("utf-8", "replace"), dtype=np.uint8)
    newline = b == 10
    ends = np.flatnonzero(newline)  # one per line, the last byte of the table included
    n_lines = ends.size
    begins = np.concatenate(([0], ends[:-1] + 1))
    line_id = np.repeat(np.arange(n_lines), ends - begins + 1)
    line_start = np.zeros_like(newline)
    line_start[begins] = True
    comment_at = np.flatnonzero((b == 35) | (_LINE_COMMENT_BYTES[b] & line_start))
    cut = ends.copy()  # each line is live up to its first comment character
    first = np.unique(line_id[comment_at], return_index=True)
    cut[first[0]] = comment_at[first[1]]
    live = np.arange(b.size) < cut[line_id]
    token = live & ~_BLANK_BYTES[b]
    if delimiter is None:
        starts = token.copy()
        starts[1:] &= ~token[:-1]
        return np.bincount(line_id[starts], minlength=n_lines)
    has_token = np.bincount(line_id[token], minlength=n_lines) > 0
    delim = live & (b == ord(delimiter))
    return np.where(has_token, np.bincount(line_id[delim], minlength=n_lines) + 1, 0)


def read_rv_file(path: str | Path, *, kms: bool = False, instrument: str | None = None) -> RVData:
    """Read one RV file.

    Parameters
    ----------
    path : str or Path
        The text table.
    kms : bool
        Velocities and errors are in km/s (converted to m/s).
    instrument : str, optional
        Instrument name for every row; default: the instrument column, else the stem
        of the file name.

    Returns
    -------
    RVData

    Raises
    ------
    DataError
        With the file, the line and the problem.
    """
    path = Path(path)
    lines = _text_lines(path)
    layout = _find_layout(path, lines)
    rows, line_numbers = _data_rows(path, lines, layout)
    numeric_cols = [j for j, r in enumerate(layout.roles) if r != "instrument"]
    table, names = _parse_rows(path, lines, rows, layout, numeric_cols)
    col = {
        r: table[:, numeric_cols.index(j)] for j, r in enumerate(layout.roles) if j in numeric_cols
    }
    time, rv, err = col["time"], col["rv"], col["err"]
    extra = {r.removeprefix("extra:"): v for r, v in col.items() if r.startswith("extra:")}
    _check_numbers(path, line_numbers, col)
    if instrument is not None or names is None:
        names = np.full(table.shape[0], instrument or path.stem)
    if np.any(names == ""):
        raise DataError(
            f"{path}, line {line_numbers[np.argmax(names == '')]}: empty instrument name"
        )
    check_duplicates(path, line_numbers, time, names)
    scale = 1000.0 if (kms or layout.header_kms) else 1.0
    check_ranges(path, line_numbers, time, rv, err, scale)
    check_time_system(path, line_numbers, time)
    if scale == 1.0:
        warn_if_kms(path, rv, err)
    return RVData(
        time, rv * scale, err * scale, names, {k: v.copy() for k, v in extra.items()}, [str(path)]
    )


def _text_lines(path: Path) -> list[str]:
    """The file's lines, whatever its encoding and line ends (see :func:`_decode`)."""
    text = _decode(path)
    if "\r" in text:  # Windows or old Mac line ends
        text = text.replace("\r\n", "\n").replace("\r", "\n")
    return text.split("\n")


def _data_rows(path: Path, lines: list[str], layout: _Layout) -> tuple[list[str], np.ndarray]:
    """The data rows (comment and blank lines left out) and their 1-based line numbers;
    a row with another number of fields than the table is a :class:`DataError`."""
    body = lines[layout.first_data :]
    widths = _fields_per_line(body, layout.delimiter)
    data_rows = np.flatnonzero(widths > 0)
    line_numbers = data_rows + layout.first_data + 1
    ragged = widths[data_rows] != layout.n_columns
    if np.any(ragged):
        k = int(np.argmax(ragged))
        raise DataError(
            f"{path}, line {line_numbers[k]}: {widths[data_rows][k]} columns where the "
            f"table has {layout.n_columns}"
        )
    return [body[i] for i in data_rows], line_numbers


def _parse_rows(path, lines, rows, layout, numeric_cols):
    """The numeric columns as one float table (Fortran ``D`` exponents accepted) and
    the instrument names (None without that column); a row that is not numbers is a
    :class:`DataError` naming its line."""
    read = {"delimiter": layout.delimiter, "comments": "#", "ndmin": 2, "quotechar": '"'}
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # numpy's note on blank lines and max_rows
        try:
            table = np.loadtxt(rows, usecols=numeric_cols, dtype=float, **read)
        except ValueError:
            try:  # old Fortran tables write exponents with D (1.5D0)
                table = np.loadtxt([_fortran_to_e(r, layout, numeric_cols) for r in rows],
                                   usecols=numeric_cols, dtype=float, **read)  # fmt: skip
            except ValueError:
                lines = [_fortran_to_e(ln, layout, numeric_cols) for ln in lines]
                raise DataError(_locate_bad_row(path, lines, layout)) from None
        if "instrument" not in layout.roles:
            return table, None
        col = layout.roles.index("instrument")
        try:
            names = np.loadtxt(rows, usecols=[col], dtype=str, **read)[:, 0]
        except ValueError:  # e.g. an empty quoted name "" that numpy drops
            names = np.array([_split(r, layout.delimiter)[col] for r in rows], dtype=str)
    return table, np.char.strip(names, "\"' ")


def _check_numbers(path: Path, line_numbers: np.ndarray, col: dict[str, np.ndarray]) -> None:
    """Every value finite and every error positive, or a :class:`DataError` naming the
    first line that is not."""
    for label, arr in col.items():
        bad = ~np.isfinite(arr)
        if np.any(bad):
            name = label.removeprefix("extra:")
            raise DataError(
                f"{path}, line {line_numbers[np.argmax(bad)]}: {name} is not a finite number"
            )
    err = col["err"]
    bad = err <= 0
    if np.any(bad):
        raise DataError(
            f"{path}, line {line_numbers[np.argmax(bad)]}: error must be positive, "
            f"got {err[bad][0]:g}"
        )


def _fortran_to_e(line: str, layout: _Layout, numeric_cols: list[int]) -> str:
    """``line`` with D exponents of its numeric cells written as e (names untouched)."""
    if "d" not in line.lower() or _is_comment(line):
        return line
    sep = layout.delimiter
    cells = line.split(sep) if sep else line.split()
    for j in numeric_cols:
        if j < len(cells):
            cells[j] = _FORTRAN_EXPONENT.sub("e", cells[j])
    return (sep or " ").join(cells)


def load_rv(
    paths: str | Path | Iterable[str | Path],
    *,
    kms: bool | Sequence[bool] = False,
    instruments: Sequence[str | None] | None = None,
    min_points: int = MIN_POINTS,
) -> RVData:
    """Load RV files of one star into one :class:`RVData`, sorted by time.

    Parameters
    ----------
    paths : path or iterable of paths
        One file per instrument, or files with an instrument column.
    kms : bool or sequence of bool
        Input in km/s (one flag for all files, or one per file).
    instruments : sequence of str or None, optional
        Instrument name per file (None keeps the column or the file stem).
    min_points : int
        Fewest points accepted in total.

    Returns
    -------
    RVData
        All files' points, sorted by time.

    Raises
    ------
    DataError
        For any unreadable or invalid file, files in different time systems, duplicate
        rows across files, or too few points.
    """
    if isinstance(paths, (str, Path)):
        paths = [paths]
    paths = [Path(p) for p in paths]
    if not paths:
        raise DataError("no data files given")
    flags = [kms] * len(paths) if isinstance(kms, bool) else list(kms)
    names = list(instruments) if instruments is not None else [None] * len(paths)
    parts = [
        read_rv_file(p, kms=k, instrument=n) for p, k, n in zip(paths, flags, names, strict=True)
    ]
    _check_one_time_system(parts)
    data = _joined(parts, paths)
    _check_joined(data, paths, len(parts), min_points)
    return data


def _check_one_time_system(parts: list[RVData]) -> None:
    """All files in one time system (BJD, MJD, ... :func:`time_system`)."""
    systems = {str(d.files[0]): time_system(d.time) for d in parts}
    if len(set(systems.values())) > 1:
        detail = "; ".join(f"{f}: {s}" for f, s in systems.items())
        raise DataError(f"files use different time systems ({detail}); give them in one system")


def _joined(parts: list[RVData], paths: list[Path]) -> RVData:
    """The files' data as one set (an extra column missing from a file is NaN there)."""
    keys = sorted({k for d in parts for k in d.extra})
    extra = {
        k: np.concatenate([d.extra.get(k, np.full(len(d), np.nan)) for d in parts]) for k in keys
    }
    return RVData(
        np.concatenate([d.time for d in parts]),
        np.concatenate([d.rv for d in parts]),
        np.concatenate([d.err for d in parts]),
        np.concatenate([d.instrument for d in parts]),
        extra,
        [str(p) for p in paths],
    )


def _check_joined(data: RVData, paths: list[Path], n_files: int, min_points: int) -> None:
    """No time of one instrument in two files, enough points, more than one night."""
    files = ", ".join(map(str, paths))
    if n_files > 1:
        pair = first_duplicate(data.time, data.instrument)
        if pair is not None:
            t, inst = float(data.time[pair[0]]), str(data.instrument[pair[0]])
            raise DataError(
                f"{files}: time {t!r} of instrument {inst!r} appears in more than one file"
            )
    if len(data) < min_points:
        raise DataError(f"{files}: {len(data)} points, fewer than the {min_points} a fit needs")
    span = float(data.time[-1] - data.time[0])
    if span < MIN_SPAN_DAYS:
        raise DataError(
            f"{files}: all {len(data)} points lie within {span * 24:.1f} hours (a single "
            "night); an orbit needs observations on more than one night"
        )
