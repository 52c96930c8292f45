"""Where the compiled kernels are cached on disk: a user cache folder, never the package.

numba's own ``cache=True`` writes its files into the package's ``__pycache__`` when that
folder is writable. An installed package then owns files that pip did not install, so
``pip uninstall`` leaves the folder behind, and that folder, with no ``__init__.py``,
shadows a later editable install of the same package (``import rvkep`` finds an empty
namespace). rvkep's kernels are therefore cached in a folder of the user's:

1. ``$RVKEP_CACHE_DIR`` when set (used alone: a folder there or no cache);
2. otherwise ``$XDG_CACHE_HOME/rvkep/kernels`` (``~/.cache/rvkep/kernels``), then a
   per-user folder in the system's temporary folder;
3. when none of these is writable, the kernels are compiled in each process and not
   cached (the run is slower to start, never wrong).

Inside the chosen folder each source file gets a subfolder named from its path's hash
(numba's rule), and numba keys each entry on the argument types, the function's own
bytecode and its own version. Its index is dropped when the source changes: rvkep
stamps it with a hash of the contents of every kernel module (:data:`KERNEL_MODULES`),
not numba's time and size of one file, so a kernel that inlines a helper from another
kernel module never runs a stale compilation, and a second install never reads
another's entry.
"""

from __future__ import annotations

import functools
import hashlib
import importlib
import os
import tempfile
from pathlib import Path

__all__ = ["cache_folder", "jit", "missing", "prepare", "KERNEL_MODULES"]

#: the modules holding compiled kernels, each with its SIGNATURES table
KERNEL_MODULES = ("rvkep._kepler_numba", "rvkep._posterior_numba", "rvkep._power_numba")


@functools.cache
def _sources_stamp() -> str:
    """A hash of every kernel module's source: the stamp of each cache index."""
    h = hashlib.sha256()
    here = Path(__file__).resolve().parent
    for name in KERNEL_MODULES:
        h.update((here / (name.rsplit(".", 1)[1] + ".py")).read_bytes())
    return h.hexdigest()


def kernel_modules() -> list:
    """The kernel modules, imported."""
    return [importlib.import_module(name) for name in KERNEL_MODULES]


def _module_of(name: str):
    """The kernel module defining kernel ``name``."""
    return next(m for m in kernel_modules() if name in m.SIGNATURES)


def _candidates() -> list[Path]:
    own = os.environ.get("RVKEP_CACHE_DIR", "")
    if own:
        return [Path(own).expanduser()]
    xdg = os.environ.get("XDG_CACHE_HOME", "")
    base = Path(xdg).expanduser() if xdg else Path.home() / ".cache"
    try:
        uid = str(os.getuid())
    except AttributeError:  # pragma: no cover - not on POSIX
        uid = "user"
    return [base / "rvkep" / "kernels", Path(tempfile.gettempdir()) / f"rvkep-{uid}" / "kernels"]


def _writable(folder: Path) -> bool:
    try:
        folder.mkdir(parents=True, exist_ok=True)
        tempfile.TemporaryFile(dir=folder).close()
    except OSError:
        return False
    return True


_FOLDER: Path | None | bool = False  # False: not looked up yet


def cache_folder() -> Path | None:
    """The folder the compiled kernels are cached in, or None when nothing is writable.

    Returns
    -------
    Path or None
        ``$RVKEP_CACHE_DIR`` if set, else the first writable candidate of the module
        text, created if need be; None when none is writable.
    """
    global _FOLDER
    if _FOLDER is False:
        _FOLDER = next((c for c in _candidates() if _writable(c)), None)
    return _FOLDER  # type: ignore[return-value]


def _function_cache_class():
    """numba's function cache with rvkep's one locator (None when numba lacks the hooks)."""
    try:
        from numba.core import caching
    except ImportError:  # pragma: no cover - numba too old or too new
        return None
    folder = cache_folder()
    if folder is None:
        return None

    class _Locator(caching._SourceFileBackedLocatorMixin, caching._CacheLocator):
        def __init__(self, py_func, py_file):
            self._py_file = py_file
            self._lineno = py_func.__code__.co_firstlineno
            self._cache_path = str(folder / self.get_suitable_cache_subpath(py_file))

        def get_cache_path(self):
            return self._cache_path

        def get_source_stamp(self):
            return _sources_stamp()

    class _Impl(caching.CompileResultCacheImpl):
        _locator_classes = [_Locator]

    class _FunctionCache(caching.FunctionCache):
        _impl_class = _Impl

    return _FunctionCache


_CACHE_CLASS = False  # False: not built yet


def jit(**options):
    """``numba.njit(**options)`` cached in :func:`cache_folder` (uncached where none).

    Only the cache's location differs from ``njit(cache=True)``: what numba keys on and
    how it loads are numba's own.

    Parameters
    ----------
    **options
        Passed to :func:`numba.njit` (``cache`` is set here).

    Returns
    -------
    callable
        The compiled dispatcher, or a decorator when called without a function.
    """
    import numba

    global _CACHE_CLASS
    if _CACHE_CLASS is False:
        _CACHE_CLASS = _function_cache_class()

    def wrap(func):
        dispatcher = numba.njit(cache=False, **options)(func)
        if _CACHE_CLASS is not None:
            try:
                dispatcher._cache = _CACHE_CLASS(dispatcher.py_func)
            except (RuntimeError, OSError):  # no locator: compile in each process
                pass
        return dispatcher

    return wrap


def missing(module=None) -> list[tuple[str, str]]:
    """The (kernel, signature) pairs of ``module.SIGNATURES`` (default: of every kernel
    module) that the cache lacks (every pair when nothing is cached).

    Parameters
    ----------
    module : module, optional
        A kernel module with ``SIGNATURES``; default every kernel module.

    Returns
    -------
    list of (str, str)
        (kernel name, signature) pairs that would compile on first use.
    """
    from numba.core import sigutils

    if module is None:
        return [job for m in kernel_modules() for job in missing(m)]
    out = []
    for name, signatures in module.SIGNATURES.items():
        dispatcher = getattr(module, name)
        cache = dispatcher._cache
        for sig in signatures:
            try:
                args, _ = sigutils.normalize_signature(sig)
                key = cache._index_key(args, dispatcher.targetctx.codegen())
                held = key in cache._cache_file._load_index()
            except Exception:  # no cache (NullCache), or numba's internals moved
                held = False
            if not held:
                out.append((name, sig))
    return out


def _compile_one(job: tuple[str, str]) -> str:
    from numba.core import sigutils

    name, sig = job
    # as a tuple of types: numba keys the cache on the signature as given, and a call
    # looks it up by the argument types
    args, _ = sigutils.normalize_signature(sig)
    getattr(_module_of(name), name).compile(args)  # numba writes the cache entry
    return name


def _compile_listed(argv: list[str]) -> None:
    """Worker: compile the ``name=signature`` jobs given, one line out per kernel done."""
    for arg in argv:
        name, sig = arg.split("=", 1)
        _compile_one((name, sig))
        print(name, flush=True)


#: rough compile seconds of each kernel on one core, to share them out evenly
_COST = {"white_noise_profile_grad": 3.0, "keplerian_power": 2.4, "white_noise_logpost": 2.3,
         "white_noise_loglike": 1.5}  # fmt: skip


def _shares(jobs: list[tuple[str, str]], workers: int) -> list[list[tuple[str, str]]]:
    """The jobs split between ``workers``: longest first, each to the least loaded."""
    shares: list[list[tuple[str, str]]] = [[] for _ in range(workers)]
    loads = [0.0] * workers
    for job in jobs:
        k = loads.index(min(loads))
        shares[k].append(job)
        loads[k] += _COST.get(job[0], 0.5)
    return shares


def _compile_in_workers(shares: list[list[tuple[str, str]]]):
    """Compile each share in a fresh Python process; yields once per kernel compiled
    (each worker prints a line per kernel). The workers are killed if this stops early."""
    import selectors
    import subprocess
    import sys

    code = "import sys; from rvkep._kernel_cache import _compile_listed; " \
        "_compile_listed(sys.argv[1:])"
    procs = [
        subprocess.Popen(
            [sys.executable, "-c", code, *(f"{n}={s}" for n, s in share)],
            stdout=subprocess.PIPE, stderr=subprocess.DEVNULL, text=True,
        )
        for share in shares
    ]
    try:
        sel = selectors.DefaultSelector()
        for p in procs:
            sel.register(p.stdout, selectors.EVENT_READ)
        open_streams = len(procs)
        while open_streams:
            for key, _ in sel.select():
                if key.fileobj.readline():
                    yield
                else:
                    sel.unregister(key.fileobj)
                    open_streams -= 1
    finally:
        for p in procs:
            if p.poll() is None:
                p.kill()
            p.wait()


def prepare(say=None, workers: int = 2) -> int:
    """Compile the kernels the cache lacks, before a run needs them, and cache them.

    With a cache folder and two cores or more the kernels compile side by side in
    ``workers`` fresh Python processes (each writes its own cache entries; this process
    then loads them as a warm run does); otherwise, or when a worker fails, they compile
    here, one after the other. ``say(text, done, total)`` reports progress. Returns how
    many kernels were missing.

    Parameters
    ----------
    say : callable, optional
        ``say(text, done, total)`` for progress; None prints nothing.
    workers : int, optional
        Processes that compile side by side (2 by default).

    Returns
    -------
    int
        Number of kernels that were missing (0: all cached already).
    """
    jobs = sorted(missing(), key=lambda j: -_COST.get(j[0], 0.5))
    if not jobs:
        return 0
    folder = cache_folder()
    where = f"cached in {folder}" if folder else "no writable cache folder: each run compiles"
    text = f"compiling rvkep's kernels once (about 10 s; {where})"
    done = 0

    def tick():
        if say:
            say(text, done, len(jobs))

    tick()
    workers = min(workers, os.cpu_count() or 1, len(jobs))
    if folder is not None and workers >= 2:
        for _ in _compile_in_workers(_shares(jobs, workers)):
            done += 1
            tick()
    # whatever the workers did not leave in the cache (or all, without workers)
    rest = missing() if done else jobs
    done = len(jobs) - len(rest)
    for job in rest:
        _compile_one(job)
        done += 1
        tick()
    return len(jobs)
