"""The sampler's checkpoints: buffered HDF5 files keyed on everything that changes the
chain, that survive a kill, a full disk and a damaged file.

Each flush reserves its room with ``posix_fallocate`` first (HDF5 crashes the process on
a failed write) and ends with a fixed-size commit record (iteration, accepted counts,
random state) rewritten in place; a damaged file is detected on open (unreadable, wrong
shape, last stored log-posterior not the model's) and kept aside. The key
(:func:`checkpoint_key`) is the model's canonical dump plus the sampler settings.
"""

from __future__ import annotations

import contextlib
import os
import warnings
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

from rvkep.errors import RvkepError
from rvkep.model import SystemModel

if TYPE_CHECKING:
    from rvkep.sampling import SamplerOptions

__all__ = [
    "CheckpointNotice",
    "CheckpointWriteError",
    "BufferedHDFBackend",
    "checkpoint_key",
    "open_checkpoint",
    "store_key",
]


class CheckpointNotice(UserWarning):
    """A checkpoint could not be resumed (another model or settings, or a damaged
    file kept under a new name); the chain started afresh."""


class CheckpointWriteError(RvkepError):
    """The checkpoint could not be written (disk full, quota, I/O error); the file
    still holds every step of the previous flush."""


_BACKEND_CLASS = None


def BufferedHDFBackend(filename, name: str = "mcmc"):  # noqa: N802 - behaves as a class
    """emcee's HDF5 backend with steps buffered in memory and written per flush.

    Same file layout as :class:`emcee.backends.HDFBackend` (so emcee can read the
    file); ``flush`` appends the buffered steps, the acceptance counts, the random
    state after the last step and the new iteration count in one open of the file.
    (Built on first use so that importing rvkep does not import emcee.)

    Parameters
    ----------
    filename : str or Path
        The HDF5 file.
    name : str, optional
        The group of the chain in the file.

    Returns
    -------
    emcee.backends.HDFBackend
        A backend whose ``flush()`` writes the buffered steps.
    """
    global _BACKEND_CLASS
    if _BACKEND_CLASS is None:
        _BACKEND_CLASS = _make_backend_class()
    return _BACKEND_CLASS(filename, name)


def _pack_commit(iteration: int, accepted: np.ndarray, rstate) -> np.ndarray:
    """One float64 array holding a flush's commit record: the iteration count, the
    accepted counts and the MT19937 random state after the last step (all exact in
    float64: counts below 2**53, uint32 keys, the cached Gaussian)."""
    _, keys, pos, has_gauss, cached = rstate
    return np.concatenate(
        [[iteration], np.asarray(accepted, float), np.asarray(keys, float),
         [pos, has_gauss, cached]]
    )  # fmt: skip


def _unpack_commit(rec: np.ndarray, nwalkers: int):
    iteration = int(rec[0])
    accepted = np.array(rec[1 : 1 + nwalkers])
    keys = np.asarray(rec[1 + nwalkers : 1 + nwalkers + 624]).astype(np.uint32)
    pos, has_gauss, cached = rec[-3:]
    return iteration, accepted, ("MT19937", keys, int(pos), int(has_gauss), float(cached))


def _read_commit(backend):
    """(iteration, accepted counts, random state) as the commit record of ``backend``'s
    file has them."""
    with backend.open() as f:
        g = f[backend.name]
        if "rvkep_commit" in g.attrs:
            return _unpack_commit(g.attrs["rvkep_commit"], int(g.attrs["nwalkers"]))
        # a file written before commit records: emcee's own fields
        state = [v for k, v in sorted(g.attrs.items()) if k.startswith("random_state_")]
        return int(g.attrs["iteration"]), g["accepted"][...], tuple(state) or None


def _append_steps(backend, steps: list) -> None:
    """Append buffered steps (coordinates, log-probabilities, accepted flags, random
    state) to ``backend``'s file, then rewrite its commit record to name them (so a kill
    in between leaves the previous commit in force); raise
    :class:`CheckpointWriteError` if they cannot be written."""
    coords = np.stack([b[0] for b in steps])
    logp = np.stack([b[1] for b in steps])
    acc = np.sum([b[2] for b in steps], axis=0)
    rstate = steps[-1][3]
    it, accepted, _ = _read_commit(backend)
    _reserve_space(Path(backend.filename), coords.nbytes + logp.nbytes, it)
    n = coords.shape[0]
    try:
        with backend.open("a") as f:
            g = f[backend.name]
            g["chain"].resize(it + n, axis=0)
            g["log_prob"].resize(it + n, axis=0)
            g["chain"][it:] = coords
            g["log_prob"][it:] = logp
            f.flush()  # the new steps are on disk before the commit names them
            record = _pack_commit(it + n, accepted + acc, rstate)
            g.attrs.modify("rvkep_commit", record)  # same shape: in place
            f.flush()
            g["accepted"][:] = accepted + acc  # emcee's copies of the commit
            for i, v in enumerate(rstate):
                g.attrs.modify(f"random_state_{i}", v)
            g.attrs.modify("iteration", it + n)
    except OSError as exc:
        raise CheckpointWriteError(
            f"{backend.filename}: cannot write the checkpoint ({_short(exc)}); it keeps "
            f"the {it} steps written before, and the same command resumes from them"
        ) from None


def _read_steps(backend, name: str, flat: bool, thin: int, discard: int) -> np.ndarray:
    """The committed steps of one field (``chain`` or ``log_prob``) of ``backend``'s
    file, as emcee's ``get_value`` returns them."""
    it = backend.iteration
    if it <= 0:
        raise AttributeError("the checkpoint holds no steps yet")
    with backend.open() as f:
        v = f[backend.name][name][discard + thin - 1 : it : thin]
    return v.reshape(-1, *v.shape[2:]) if flat else v


def _make_backend_class():
    from emcee.backends import HDFBackend

    class _Buffered(HDFBackend):
        """See :func:`BufferedHDFBackend`. The authoritative state of the file is the
        commit record ``rvkep_commit`` (iteration, accepted counts, random state in one
        fixed-size attribute), rewritten in place only after the new steps are on disk;
        emcee's own ``iteration``, ``accepted`` and ``random_state_*`` follow it."""

        def __init__(self, filename, name):
            super().__init__(str(filename), name=name)
            self._buffer = []

        def reset(self, nwalkers, ndim):
            super().reset(nwalkers, ndim)
            with self.open("a") as f:  # created now, so later commits overwrite in place
                zero = _pack_commit(0, np.zeros(nwalkers), ("MT19937", np.zeros(624), 0, 0, 0.0))
                f[self.name].attrs["rvkep_commit"] = zero
            self._buffer = []

        @property
        def iteration(self):
            base = _read_commit(self)[0] if self.initialized else 0
            return base + len(self._buffer)

        def grow(self, ngrow, blobs):
            if blobs is not None:
                raise ValueError("blobs are not stored by rvkep's buffered backend")

        def save_step(self, state, accepted):
            step = (state.coords.copy(), state.log_prob.copy(), accepted.copy())
            self._buffer.append((*step, state.random_state))

        def flush(self):
            """Append the buffered steps; raise :class:`CheckpointWriteError` (the file
            keeps every step of the previous flush) if they cannot be written."""
            if self._buffer:
                _append_steps(self, self._buffer)
                self._buffer = []

        def get_value(self, name, flat=False, thin=1, discard=0):
            if name == "blobs":
                return None  # never stored (see grow)
            self.flush()
            return _read_steps(self, name, flat, thin, discard)

        def get_last_sample(self):
            self.flush()
            return super().get_last_sample()

        @property
        def accepted(self):
            self.flush()
            return _read_commit(self)[1]

        @property
        def random_state(self):
            return self._buffer[-1][3] if self._buffer else _read_commit(self)[2]

    return _Buffered


def _short(exc: BaseException) -> str:
    text = str(exc).split("\n")[0]
    for marker in ("error message = '", "errno = "):
        if marker in str(exc):
            text = str(exc).split(marker, 1)[1].split("'")[0].split(",")[0]
            break
    return text[:120]


#: Extra room reserved per flush for HDF5's own bookkeeping (chunk index, headers).
_METADATA_ROOM = 256 * 1024


def _reserve_space(path: Path, nbytes: int, steps: int) -> None:
    """Make sure the disk holds the next flush before HDF5 writes a byte of it.

    HDF5 does not survive a failed write (it crashes the process with a segmentation
    fault and may leave the file unreadable), so the room is claimed first with
    :func:`os.posix_fallocate` past the end of the file: HDF5 then writes into blocks
    that already exist and trims the file back to its own end when it closes. Where
    that call is missing, the free space is compared instead. On failure the file is
    left exactly as it was and :class:`CheckpointWriteError` says so.
    """
    import errno
    import shutil

    need = int(nbytes * 1.1) + _METADATA_ROOM

    def refuse(reason: str):
        raise CheckpointWriteError(
            f"{path}: cannot write the checkpoint ({reason}); it keeps the {steps} steps "
            "written before, and the same command resumes from them once there is room"
        )

    if not hasattr(os, "posix_fallocate"):  # pragma: no cover - not on Linux
        with contextlib.suppress(OSError):
            free = shutil.disk_usage(path.parent).free
            if free < 2 * need:
                refuse(f"disk full: {free / 2**20:.1f} MiB free, {need / 2**20:.1f} MiB needed")
        return
    fd = os.open(path, os.O_RDWR)
    try:
        size = os.fstat(fd).st_size
        try:
            os.posix_fallocate(fd, size, need)
        except OSError as exc:
            with contextlib.suppress(OSError):
                os.ftruncate(fd, size)
            if exc.errno in (errno.EINVAL, errno.EOPNOTSUPP):
                return  # the file system cannot reserve; HDF5 writes as before
            refuse(f"{os.strerror(exc.errno)}; {need / 2**20:.1f} MiB needed")
    finally:
        os.close(fd)


#: SamplerOptions fields that change the chain (max_steps does not: a longer cap
#: continues the same chain exactly)
_KEYED_OPTIONS = ("walkers", "seed", "moves", "check_every", "tau_factor", "tau_rtol")


#: the moves' own version: a chain written by moves that drew their proposals from
#: another random stream (2: the snooker draws for all walkers at once) is not resumed
_MOVES_VERSION = 2


def checkpoint_key(model: SystemModel, options: SamplerOptions, walkers: int) -> tuple[str, str]:
    """(digest, canonical JSON) of everything that shapes a chain: the model's
    canonical dump (priors with their parameters, fixed values, trend, noise model,
    instruments, data digest) and the sampler settings that change the steps.

    Parameters
    ----------
    model : SystemModel
        The model being sampled.
    options : SamplerOptions
        The sampler's settings.
    walkers : int
        The number of walkers.

    Returns
    -------
    digest : str
        SHA-256 of ``text``.
    text : str
        The canonical JSON that was hashed.
    """
    import hashlib
    import json

    doc = {
        "model": model.canonical(),
        "parameters": list(model.names),
        "sampler": {k: getattr(options, k) for k in _KEYED_OPTIONS}
        | {"walkers": walkers, "moves_version": _MOVES_VERSION},
    }
    text = json.dumps(doc, sort_keys=True, default=repr)
    return hashlib.sha256(text.encode()).hexdigest(), text


def open_checkpoint(path: Path, key: str, post, nwalkers: int, ndim: int):
    """(backend, stored): the checkpoint at ``path`` if it holds a sound chain of this
    model and settings, with ``stored`` = (chain, log_prob, last state) as read while
    checking it (None when it holds no step yet); otherwise an empty backend (with a
    :class:`CheckpointNotice` saying why) and None.

    A file that cannot be read, has the wrong shape, or whose last step's stored
    log-posterior differs from the model's value there is damaged: it is kept as
    ``<name>.damaged-<time>`` and a new chain starts.

    Parameters
    ----------
    path : Path
        The checkpoint file (it may not exist yet).
    key : str
        :func:`checkpoint_key`'s digest of this run.
    post : callable
        The log posterior, to check the last stored step.
    nwalkers, ndim : int
        The chain's shape.

    Returns
    -------
    backend : BufferedHDFBackend
        The checkpoint to resume, or an empty one.
    stored : tuple or None
        (chain, log_prob, last state) of a resumed chain.
    """
    import time

    if not path.exists():
        return BufferedHDFBackend(path), None
    try:
        backend = BufferedHDFBackend(path)
        if not backend.initialized:
            raise ValueError("no chain in the file")
        if _stored_key(backend) != key:
            # another model, other priors, data or settings: never resume that chain
            warnings.warn(
                f"{path}: the checkpoint belongs to another model, data set or sampler "
                "settings; starting a new chain",
                CheckpointNotice,
                stacklevel=3,
            )
            path.unlink()
            return BufferedHDFBackend(path), None
        it = backend.iteration
        if it == 0:
            return backend, None
        last = backend.get_last_sample()
        if last.coords.shape != (nwalkers, ndim) or last.random_state is None:
            raise ValueError("the stored chain has another shape")
        chain, logp = backend.get_chain(), backend.get_log_prob()
        if chain.shape != (it, nwalkers, ndim) or logp.shape != (it, nwalkers):
            raise ValueError(f"{it} steps announced, {chain.shape[0]} stored")
        if not np.allclose(post(last.coords), last.log_prob, rtol=1e-9, atol=1e-9):
            raise ValueError("the last stored step does not match the model")
        return backend, (chain, logp, last)
    except Exception as exc:  # noqa: BLE001 - anything a damaged file raises
        kept = path.with_name(f"{path.name}.damaged-{time.strftime('%Y%m%d-%H%M%S')}")
        path.replace(kept)
        warnings.warn(
            f"{path}: damaged checkpoint ({_short(exc)}); kept as {kept.name}, starting "
            "a new chain",
            CheckpointNotice,
            stacklevel=3,
        )
        return BufferedHDFBackend(path), None


def _stored_key(backend) -> str | None:
    with backend.open() as f:
        return f[backend.name].attrs.get("rvkep_key")


def store_key(backend, key: str, text: str) -> None:
    """Write the run's key and canonical model into the checkpoint's attributes, so a later
    run can tell whether the chain is its own.

    Parameters
    ----------
    backend : BufferedHDFBackend
        The open checkpoint.
    key : str
        :func:`checkpoint_key`'s digest.
    text : str
        The canonical JSON it was made from.
    """
    with backend.open("a") as f:
        f[backend.name].attrs["rvkep_key"] = key
        f[backend.name].attrs["rvkep_model"] = text
