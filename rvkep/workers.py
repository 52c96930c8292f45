"""Running independent tasks on local worker processes or a Dask cluster, with one
Ctrl-C guarantee for every command that does (``rvkep batch``, ``rvkep limits``).

:func:`run_tasks` submits the tasks and hands each result to a callback as it comes.
On KeyboardInterrupt (Ctrl-C to the process group, or SIGINT to this process alone)
no further task starts; local workers are interrupted (a task sees a
KeyboardInterrupt at its next step and its result comes back as :data:`INTERRUPTED`);
what reports within a grace period is handed over; a worker that does not stop in time
is killed; then the KeyboardInterrupt is raised again. Nothing is left running: a
worker also watches its parent and ends when the parent dies (kill -9, out of memory).
Tasks already running on a Dask cluster finish there; queued ones are cancelled.

Local pools get no more tasks than workers, so nothing waits inside the pool to be
cancelled when the run is interrupted; a Dask cluster gets the whole list.
"""

from __future__ import annotations

import contextlib
import os
import re
import signal
import time
from collections.abc import Callable, Hashable, Sequence

from rvkep.errors import OptionError
from rvkep.signals import sigint_blocked

__all__ = ["run_tasks", "INTERRUPTED", "local_pool", "dask_client", "is_dask"]

#: what a task that was interrupted returns (it is resumed by the next run)
INTERRUPTED = "interrupted"

#: Thread counts a local worker starts with: one each, the pool being the parallelism
#: (two workers with two BLAS threads each on two cores ran limits 1.5x slower).
_CHILD_THREADS = ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS",
                  "NUMBA_NUM_THREADS")  # fmt: skip

# Local workers ignore Ctrl-C while idle (the parent decides) and take it as a
# KeyboardInterrupt while they run a task (its checkpoints flush and it returns).
# A thread watches the parent: if it dies, an idle worker exits at once and a busy one
# is interrupted like Ctrl-C and exits soon after.
_BUSY = False
_WATCH_SECONDS = 0.5
_GRACE_SECONDS = 30.0


def _interrupt_once(signum, frame):
    signal.signal(signal.SIGINT, signal.SIG_IGN)  # a second Ctrl-C cannot break the flush
    raise KeyboardInterrupt


def _watch_parent(parent: int) -> None:
    import _thread

    while os.getppid() == parent:
        time.sleep(_WATCH_SECONDS)
    if _BUSY:
        _thread.interrupt_main(signal.SIGINT)
        deadline = time.monotonic() + _GRACE_SECONDS
        while _BUSY and time.monotonic() < deadline:
            time.sleep(0.1)
    os._exit(1)


def _worker_init(parent: int) -> None:
    import threading

    # one thread each, unless the user set a count: set here, in the worker, before any
    # numeric library loads (importing this module loads none), so the parent's own
    # environment and thread pools are left as they were
    for var in _CHILD_THREADS:
        os.environ.setdefault(var, "1")
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    # the worker was started with SIGINT blocked (rvkep.signals): a Ctrl-C
    # during its start-up is pending now, and dropped as ignored
    if hasattr(signal, "pthread_sigmask"):
        signal.pthread_sigmask(signal.SIG_UNBLOCK, {signal.SIGINT})
    threading.Thread(target=_watch_parent, args=(parent,), daemon=True).start()


def _in_worker(fn: Callable, *args):
    """``fn(*args)`` inside a local worker: Ctrl-C interrupts it once."""
    global _BUSY
    _BUSY = True
    signal.signal(signal.SIGINT, _interrupt_once)
    try:
        return fn(*args)
    except KeyboardInterrupt:
        return INTERRUPTED
    finally:
        signal.signal(signal.SIGINT, signal.SIG_IGN)
        _BUSY = False


def local_pool(workers: int):
    """A pool of ``workers`` spawned processes. Their thread counts (BLAS, OpenMP,
    numba) default to one, set in each worker as it starts (a count the user set is
    kept); this process's environment is not changed.

    Parameters
    ----------
    workers : int
        Number of processes.

    Returns
    -------
    concurrent.futures.ProcessPoolExecutor
        The pool.
    """
    import multiprocessing as mp
    from concurrent.futures import ProcessPoolExecutor

    return ProcessPoolExecutor(
        max_workers=workers, mp_context=mp.get_context("spawn"),
        initializer=_worker_init, initargs=(os.getpid(),),
    )  # fmt: skip


_ADDRESS = re.compile(r"^((tcp|tls|inproc|ucx|ws|wss)://)?[\w.\-\[\]:]+:\d{1,5}$")


def dask_client(address: str):
    """A ``dask.distributed`` client of the scheduler at ``address`` (OptionError with
    one line when the address is malformed, the extra is missing or nobody answers).

    Parameters
    ----------
    address : str
        ``host:port`` or ``tcp://host:port``.

    Returns
    -------
    distributed.Client
        The client.
    """
    if not _ADDRESS.match(address):
        raise OptionError(
            f"--scheduler {address!r}: not a scheduler address (expected tcp://HOST:PORT, "
            "as printed by 'dask scheduler')"
        )
    try:
        from distributed import Client
    except ImportError:
        raise OptionError(
            '--scheduler needs dask.distributed: pip install "rvkep[cluster]"'
        ) from None
    try:
        return Client(address, timeout="10s")
    except (OSError, TimeoutError) as exc:
        raise OptionError(f"cannot reach the Dask scheduler at {address}: {exc}") from None


def is_dask(executor) -> bool:
    """Whether ``executor`` is a ``dask.distributed`` client.

    Parameters
    ----------
    executor : object
        A pool or client.

    Returns
    -------
    bool
        True for a Dask client.
    """
    return type(executor).__module__.split(".")[0] == "distributed"


def _first_completed(executor, futures: list) -> list:
    """Block until at least one future is done; return the done ones."""
    if is_dask(executor):
        from distributed import wait
    else:
        from concurrent.futures import wait
    done, _ = wait(futures, return_when="FIRST_COMPLETED")
    return list(done)


def run_tasks(fn: Callable, tasks: Sequence[tuple[Hashable, tuple]],
              on_result: Callable[[Hashable, object], None], *, workers: int | None = None,
              scheduler: str | None = None, executor=None,
              in_process: bool = True) -> None:  # fmt: skip
    """Run ``fn(*args)`` for every ``(key, args)`` of ``tasks`` and call
    ``on_result(key, result)`` as each ends, in this process.

    Parameters
    ----------
    fn : callable
        a module-level function (it is pickled to the workers).
    tasks : sequence of (key, args)
        what to run; ``key`` names the task to ``on_result``.
    on_result : callable
        gets ``(key, value)``: the task's return value, :data:`INTERRUPTED` when Ctrl-C
        stopped it, or the exception that killed its worker.
    workers : int, optional
        local processes (default: the number of cores; 1 runs in this process).
    scheduler : str, optional
        a Dask scheduler's address instead of local processes.
    executor : object, optional
        any object with ``submit(fn, *args)`` returning futures (e.g. a Dask Client);
        it is left open.
    in_process : bool
        with one worker, run in this process (False: in one worker process, which
        dies with this one).

    Raises
    ------
    KeyboardInterrupt
        after the stop described in the module text.
    """
    if not tasks:
        return
    n = workers or os.cpu_count() or 1
    if executor is None and scheduler is None and n <= 1 and in_process:
        for key, args in tasks:  # in this process: Ctrl-C is the caller's
            on_result(key, fn(*args))
        return
    own = None
    if executor is None:
        executor = own = dask_client(scheduler) if scheduler else local_pool(n)
    local = own is not None and not is_dask(own)
    try:
        _submit_all(fn, tasks, on_result, executor, own if local else None, n)
    finally:
        if own is not None:
            # a Dask Client is closed, never shut down: that would stop the cluster
            if is_dask(own):
                own.close()
            else:
                own.shutdown(wait=True, cancel_futures=True)


def _submit_all(fn, tasks, on_result, executor, pool, n: int) -> None:
    """Submit the tasks (to a local ``pool`` no more than ``n`` at a time, so nothing
    queued needs cancelling; to any other executor all at once) and hand each result
    on as it ends; on Ctrl-C, stop them (:func:`_stop`) and re-raise."""
    window = n if pool is not None else len(tasks)
    queue = list(tasks)
    running: dict = {}

    def finish(fut, key):
        try:
            value = fut.result()
        except Exception as exc:  # the worker itself died
            value = exc
        on_result(key, value)

    try:
        while queue or running:
            while queue and len(running) < window:
                key, args = queue.pop(0)
                with sigint_blocked():  # a worker starting inherits the block
                    fut = (executor.submit(_in_worker, fn, *args) if pool is not None
                           else executor.submit(fn, *args))  # fmt: skip
                running[fut] = key
            for fut in _first_completed(executor, list(running)):
                finish(fut, running.pop(fut))
    except KeyboardInterrupt:
        previous = signal.signal(signal.SIGINT, signal.SIG_IGN)  # the stop is not interrupted
        try:
            _stop(executor, pool, running, finish)
        finally:
            signal.signal(signal.SIGINT, previous)
        raise


def _stop(executor, pool, running: dict, finish) -> None:
    """After Ctrl-C: cancel what has not started, interrupt local workers, and hand over
    what the running tasks report within the grace period; kill what does not stop."""
    for fut in list(running):
        if fut.cancel():
            running.pop(fut)
    if is_dask(executor):
        executor.cancel(list(running))
        return
    from concurrent.futures import wait

    deadline = time.monotonic() + _GRACE_SECONDS
    while running and time.monotonic() < deadline:
        if pool is not None:
            for proc in list(getattr(pool, "_processes", {}).values()):
                with contextlib.suppress(OSError):
                    os.kill(proc.pid, signal.SIGINT)
        done, _ = wait(list(running), timeout=0.5)
        for fut in done:
            finish(fut, running.pop(fut))
    if running and pool is not None:  # a worker that did not stop in time
        for proc in list(getattr(pool, "_processes", {}).values()):
            with contextlib.suppress(OSError):
                proc.kill()
