#!/usr/bin/env bash
# A newcomer's two README commands, in sequence, in ONE environment, from a fresh clone:
# first the install and `rvkep demo`, then the test install (`pip install -e ".[test]"`)
# and the tests. The commands are read from the README's first two code blocks, so this
# check runs what the README says. Afterwards `rvkep` must still work (an uninstall that
# leaves files in the package folder can shadow the editable install), and no compiled
# kernel may have been cached inside an installed package.
set -euo pipefail
repo="$(cd "$(dirname "$0")/.." && pwd)"
work="$(mktemp -d)"
trap 'rm -rf "$work"' EXIT
git clone --quiet "$repo" "$work/src"
export HOME="$work/home" XDG_CACHE_HOME="$work/home/.cache"
mkdir -p "$HOME"
unset RVKEP_CACHE_DIR
mapfile -t commands < <(python3 - "$repo/README.md" <<'PY'
import re, sys
blocks = re.findall(r"```bash\n(.*?)```", open(sys.argv[1]).read(), flags=re.S)
for block in blocks[:2]:
    print(" ".join(block.split()))
PY
)
[ "${#commands[@]}" -eq 2 ] || { echo "README: expected two bash blocks" >&2; exit 1; }
cd "$work/src"
echo "README command 1: ${commands[0]}"
bash -c "${commands[0]}" > "$work/demo.log"
grep -q "^done in" "$work/demo.log"
echo "README command 2: ${commands[1]}"
bash -c "${commands[1]}"
. .venv/bin/activate
rvkep --version
python - <<'PY'
import pathlib, site, sys
stray = [p for d in site.getsitepackages() for p in pathlib.Path(d).glob("rvkep/**/*.nb[ic]")]
assert not stray, f"compiled kernels cached inside site-packages: {stray[:3]}"
assert not (pathlib.Path(site.getsitepackages()[0]) / "rvkep").exists(), "site-packages/rvkep left"
PY
rvkep demo --quick --quiet --out "$work/again"
test -s "$work/again/results.json"
echo "README commands: both ran in one environment, and rvkep still works"
