"""Where the compiled kernels are cached, and that a first run compiles them up front.

The cache must never land in the package folder: pip does not remove files it did not
install, and a leftover ``site-packages/rvkep/__pycache__`` shadows a later editable
install (common practice, no source: Python's namespace packages, PEP 420).
"""

import json
import os
import subprocess
import sys
from pathlib import Path

import pytest

PACKAGE = Path(__file__).resolve().parents[2] / "rvkep"

pytestmark = pytest.mark.skipif(
    os.environ.get("RVKEP_PURE_NUMPY", "") not in ("", "0"), reason="numba switched off"
)


def _python(code: str, **env) -> subprocess.CompletedProcess:
    full = dict(os.environ)
    full.pop("RVKEP_CACHE_DIR", None)
    full.update(env)
    return subprocess.run([sys.executable, "-c", code], env=full, capture_output=True,
                          text=True, timeout=300)  # fmt: skip


def _package_entries() -> set[Path]:
    return set(PACKAGE.rglob("*.nb[ic]"))


def test_kernels_are_cached_in_the_user_folder_not_the_package(tmp_path):
    before = _package_entries()
    code = ("from rvkep import kepler, _kernel_cache as kc; print(kc.cache_folder()); "
            "print(float(kepler.eccentric_anomaly(1.0, 0.5)))")  # fmt: skip
    out = _python(code, XDG_CACHE_HOME=str(tmp_path / "xdg"))
    assert out.returncode == 0, out.stderr
    folder = Path(out.stdout.split()[0])
    assert folder == tmp_path / "xdg" / "rvkep" / "kernels"
    assert list(folder.rglob("*.nbi")), "nothing cached in the user folder"
    assert _package_entries() <= before, "a kernel was cached inside the package folder"
    # RVKEP_CACHE_DIR wins over the XDG folder
    out = _python(code, XDG_CACHE_HOME=str(tmp_path / "xdg"),
                  RVKEP_CACHE_DIR=str(tmp_path / "own"))  # fmt: skip
    assert Path(out.stdout.split()[0]) == tmp_path / "own"
    assert list((tmp_path / "own").rglob("*.nbi"))


def test_no_writable_folder_compiles_without_caching():
    # numba's own cache=True fails at decoration time without a locator; rvkep falls
    # back to compiling in each process
    code = ("from rvkep import kepler, _kernel_cache as kc; print(kc.cache_folder(), "
            "kepler.BACKEND, float(kepler.eccentric_anomaly(1., .5)))")  # fmt: skip
    out = _python(code, RVKEP_CACHE_DIR="/proc/forbidden-cache")
    assert out.returncode == 0, out.stderr
    folder, backend, value = out.stdout.split()
    assert (folder, backend) == ("None", "numba")
    # Kepler's equation at M = 1, e = 0.5: E - 0.5 sin E = 1 (mpmath findroot gives
    # 1.4987011335178482; reference library)
    assert float(value) == pytest.approx(1.4987011335178482, abs=1e-14)


PREPARE_AND_FIT = r"""
import json, sys, warnings
warnings.simplefilter("ignore")
from numba.core import sigutils
import rvkep
from rvkep import _kernel_cache as kc
from rvkep.kepler import prepare_kernels
steps = []
first = kc.prepare(lambda text, done, total: steps.append([text, done, total]))
second = prepare_kernels(quiet=True)
files = [str(p) for p in sorted(rvkep.cli.demo_folder().glob("*.[tc][xs][tv]"))
         if p.name != "truth.json"]
rvkep.analyze(files, star_mass=0.92, star_mass_err=0.04, quick=True, figures="none",
              quiet=True, out=sys.argv[1])
extra = {}
for module in kc.kernel_modules():
    for name, sigs in module.SIGNATURES.items():
        declared = {sigutils.normalize_signature(s)[0] for s in sigs}
        used = set(getattr(module, name).signatures)
        if used - declared:
            extra[name] = [str(s) for s in used - declared]
print(json.dumps({"first": first, "second": second, "steps": steps, "extra": extra,
                  "missing": kc.missing()}))
"""


def test_first_run_compiles_every_kernel_up_front_and_a_fit_needs_no_other(tmp_path):
    import rvkep.cli  # noqa: F401  (the subprocess imports it through rvkep)

    code = PREPARE_AND_FIT.replace("import rvkep\n", "import rvkep, rvkep.cli\n")
    full = dict(os.environ, RVKEP_CACHE_DIR=str(tmp_path / "cache"))
    out = subprocess.run([sys.executable, "-c", code, str(tmp_path / "run")], env=full,
                         capture_output=True, text=True, timeout=600)  # fmt: skip
    assert out.returncode == 0, out.stderr[-2000:]
    got = json.loads(out.stdout.strip().splitlines()[-1])
    from rvkep import _kernel_cache as kc

    # every kernel module's (reference: rvkep._kernel_cache.KERNEL_MODULES)
    n = sum(len(s) for m in kc.kernel_modules() for s in m.SIGNATURES.values())
    assert got["first"] == n and got["second"] == 0
    assert [s[1] for s in got["steps"]] == list(range(n + 1))  # progress 0, 1, ..., n
    assert "compiling rvkep's kernels once" in got["steps"][0][0]
    assert got["missing"] == []
    # every kernel the fit called was called with a declared signature: the up-front
    # compile covered what the run needed
    assert got["extra"] == {}


def test_every_kernel_index_is_stamped_with_all_kernel_sources():
    # a kernel inlining a helper of another module must not outlive a change there:
    # each cache index carries one stamp over every kernel module's source
    # (common practice, no source: numba's own stamp is one file's time and size)
    import hashlib
    from pathlib import Path

    from rvkep import _kepler_numba, _posterior_numba, _power_numba
    from rvkep import _kernel_cache as kc

    if kc.cache_folder() is None:
        pytest.skip("no writable cache folder")
    want = hashlib.sha256(b"".join(Path(m.__file__).read_bytes()
                                   for m in (_kepler_numba, _posterior_numba,
                                             _power_numba))).hexdigest()  # fmt: skip
    kernels = (_posterior_numba.white_noise_logpost, _power_numba.keplerian_power)
    stamps = {f.__name__: f._cache._impl.locator.get_source_stamp() for f in kernels}
    assert set(stamps.values()) == {want}
