#!/usr/bin/env bash
# Build a wheel, install it into a fresh virtual environment (no access to the
# checkout or to globally installed packages) and run the demo from an empty folder,
# as a user who installs the package (not the source tree) would.
set -euo pipefail
repo="$(cd "$(dirname "$0")/.." && pwd)"
work="$(mktemp -d)"
trap 'rm -rf "$work"' EXIT
python -m pip wheel --quiet --disable-pip-version-check --no-deps -w "$work/dist" "$repo"
python -m venv "$work/venv"
"$work/venv/bin/python" -m pip install --quiet --disable-pip-version-check "$work"/dist/rvkep-*.whl
cd "$work"
"$work/venv/bin/python" - <<'PY'
import pathlib, rvkep
where = pathlib.Path(rvkep.__file__).resolve()
assert "venv" in where.parts, f"rvkep imported from {where}, not from the wheel"
PY
"$work/venv/bin/rvkep" demo --quick --quiet --out "$work/demo-out"
test -s "$work/demo-out/results.json"
echo "wheel install: rvkep demo ran from a fresh virtual environment"
