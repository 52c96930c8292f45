"""Feed `rvkep check` a set of odd input files and count the outcomes.

Each case is a file a user could plausibly hand over (a wrong encoding, a broken row,
values no spectrograph gives) with the outcome rvkep should reach: "read" (exit 0) or
"refused" (exit 2 with one line naming the file). Anything else, a traceback above
all, is a failure. Prints one line per case and the counts; exits 1 if any case did
not end as expected. All data are invented (seeded).

    python scripts/probe_inputs.py [--keep DIR]
"""

from __future__ import annotations

import argparse
import contextlib
import io
import sys
import tempfile
from pathlib import Path

import numpy as np


def _rows(n: int = 30, seed: int = 1, t0: float = 2459000.3) -> tuple[np.ndarray, np.ndarray]:
    rng = np.random.default_rng(seed)
    t = np.sort(t0 + rng.choice(np.arange(300), n, replace=False))
    return t, 10 * np.sin(2 * np.pi * t / 17.3) + rng.normal(0, 1.5, n)


def _table(t=None, v=None, e="1.5", sep=" ", header=None, n=30) -> str:
    if t is None:
        t, v = _rows(n)
    lines = [header] if header else []
    lines += [sep.join([f"{a:.6f}", f"{b:.4f}", str(e)]) for a, b in zip(t, v, strict=True)]
    return "\n".join(lines) + "\n"


def _replace_line(text: str, k: int, new: str) -> str:
    lines = text.split("\n")
    lines[k] = new
    return "\n".join(lines)


def cases() -> list[tuple[str, str, object]]:
    """(name, expected outcome, content: str, bytes, or "folder"/"missing")."""
    t, v = _rows()
    tv = list(zip(t, v, strict=True))
    base = _table()
    mixed_t = t.copy()
    mixed_t[12:] -= 2400000.5
    night = 2459000.2 + np.linspace(0, 0.3, 30)
    return [
        ("empty", "refused", ""),
        ("header only", "refused", "bjd rv err\n"),
        ("comments only", "refused", "# nothing\n# here\n"),
        ("whitespace only", "refused", "   \n\t\n"),
        ("png bytes", "refused", b"\x89PNG\r\n\x1a\n" + bytes(range(256))),
        ("nul in the middle", "refused", base[:200].encode() + b"\x00" + base[200:].encode()),
        ("utf-16 with bom", "read", base.encode("utf-16")),
        ("utf-16-be without bom", "read", base.encode("utf-16-be")),
        ("utf-8 bom", "read", b"\xef\xbb\xbf" + base.encode()),
        ("latin-1 comment", "read", ("# observ\xe9 \xe0 la Silla\n" + base).encode("latin-1")),
        ("windows line ends", "read", base.replace("\n", "\r\n")),
        ("old mac line ends", "read", base.replace("\n", "\r")),
        ("tabs", "read", _table(sep="\t")),
        ("semicolons", "read", _table(sep=";")),
        ("commas, quoted header", "read", _table(sep=",", header='"bjd","rv","err"')),
        ("trailing comments", "read", base.replace("\n", " # note\n")),
        ("commented header", "read", _table(header="# bjd rv e_rv")),
        ("unknown header names", "read", _table(header="alpha beta gamma")),
        ("rows out of time order", "read", "\n".join(reversed(base.strip().split("\n"))) + "\n"),
        ("fortran exponents", "read", _replace_line(base, 4, f"{t[4]:.6f} {v[4]:.4f} 1.5D0")),
        ("tiny errors", "read", _table(e="1e-300")),
        ("km/s values", "read", _table(t, v / 1000 - 12.3, e="0.0015")),
        ("many extra columns", "read",
         "\n".join(f"{a:.6f} {b:.4f} 1.5 " + " ".join(["0.5"] * 200) for a, b in tv) + "\n"),
        ("nan velocity", "refused", _replace_line(base, 3, f"{t[3]:.6f} nan 1.5")),
        ("infinite error", "refused", _replace_line(base, 3, f"{t[3]:.6f} {v[3]:.4f} inf")),
        ("negative error", "refused", _replace_line(base, 3, f"{t[3]:.6f} {v[3]:.4f} -1.5")),
        ("zero error", "refused", _replace_line(base, 3, f"{t[3]:.6f} {v[3]:.4f} 0")),
        ("a word in a cell", "refused", _replace_line(base, 3, f"{t[3]:.6f} fast 1.5")),
        ("quoted 'nan'", "refused", _replace_line(base, 3, f"{t[3]:.6f} 'nan' 1.5")),
        ("a row too long", "refused", _replace_line(base, 3, f"{t[3]:.6f} {v[3]:.4f} 1.5 7 8")),
        ("two columns", "refused", "\n".join(f"{a:.6f} {b:.4f}" for a, b in tv)),
        ("duplicated row", "refused", _replace_line(base, 3, base.split("\n")[2])),
        ("seven points", "refused", _table(n=7)),
        ("a single night", "refused", _table(night, 5 * np.sin(50 * night))),
        ("jd and mjd mixed", "refused", _table(mixed_t, v)),
        ("velocities of 1e301", "refused", _table(t, 1e301 * (1 + 0.1 * np.sin(t)), e="1e299")),
        ("faster than light", "refused", _replace_line(base, 3, f"{t[3]:.6f} 3.5e8 1.5")),
        ("times of 1e30", "refused", _table(1e30 + np.arange(30) * 1e16, v)),
        ("header without time", "refused", _table(header="rv err fwhm")),
        ("empty instrument name", "refused",
         "bjd rv err inst\n" + "\n".join(f'{a:.6f} {b:.4f} 1.5 "{"" if k == 5 else "north"}"'
                                         for k, (a, b) in enumerate(tv)) + "\n"),
        ("a folder", "refused", "folder"),
        ("a missing file", "refused", "missing"),
    ]  # fmt: skip


def run_case(folder: Path, name: str, content) -> tuple[str, str]:
    """(outcome, message): outcome is read, refused, or failed (anything else)."""
    from rvkep.cli import main

    path = folder / (name.replace(" ", "_").replace("'", "").replace("/", "_") + ".txt")
    if content == "folder":
        path.mkdir(exist_ok=True)
    elif isinstance(content, bytes):
        path.write_bytes(content)
    elif content != "missing":
        path.write_text(content, encoding="utf-8", newline="")
    out, err = io.StringIO(), io.StringIO()
    try:
        with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
            code = main(["check", str(path)])
    except BaseException as exc:  # noqa: BLE001 - a traceback is what we look for
        return "failed", f"{type(exc).__name__}: {exc}"
    lines = [ln for ln in err.getvalue().strip().splitlines() if ": error: " in ln]
    if code == 0:
        return "read", err.getvalue().strip().replace("\n", " | ")[:110]
    if (
        code == 2
        and len(lines) == 1
        and path.name in lines[0]
        and "Traceback" not in err.getvalue()
    ):
        return "refused", lines[0][:110]
    return "failed", f"exit {code}: {err.getvalue().strip()[:200]}"


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--keep", metavar="DIR", help="write the files here and keep them")
    args = parser.parse_args(argv)
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(args.keep or tmp)
        folder.mkdir(parents=True, exist_ok=True)
        counts = {"as expected": 0, "not as expected": 0}
        for name, expected, content in cases():
            outcome, message = run_case(folder, name, content)
            ok = outcome == expected
            counts["as expected" if ok else "not as expected"] += 1
            print(f"{'ok ' if ok else 'BAD'} {name:<24} {outcome:<8} {message}")
    total = sum(counts.values())
    refused = sum(1 for _, e, _ in cases() if e == "refused")
    print(f"{counts['as expected']} of {total} odd inputs ended as expected "
          f"({refused} to be refused in one line, {total - refused} to be read)")  # fmt: skip
    return 0 if counts["not as expected"] == 0 else 1


if __name__ == "__main__":
    sys.exit(main())
