"""Ctrl-C around code that must not be interrupted in the middle.

* :func:`sigint_deferred`: a SIGINT that arrives while a compiled parallel kernel runs
  made the kernel return "a result with an exception set" (``SystemError``) instead
  of a KeyboardInterrupt, or crashed the process. Within the block a Ctrl-C is only
  noted; it is raised as an ordinary KeyboardInterrupt when the block ends, so long
  kernels run in slices, each inside one.
* :func:`sigint_blocked`: SIGINT blocked in this thread's signal mask, which a process
  started meanwhile inherits (a worker that is starting cannot die of a Ctrl-C with
  a traceback).
"""

from __future__ import annotations

import contextlib
import signal
import threading

__all__ = ["sigint_deferred", "sigint_blocked"]


def _main_thread() -> bool:
    return threading.current_thread() is threading.main_thread()


@contextlib.contextmanager
def sigint_deferred():
    """Note a SIGINT during the block and raise it when the block ends (the handler
    that was installed decides: the default raises KeyboardInterrupt). A no-op off the
    main thread or where SIGINT is ignored."""
    previous = signal.getsignal(signal.SIGINT) if _main_thread() else None
    if previous in (None, signal.SIG_IGN, signal.SIG_DFL):
        yield
        return
    caught = []
    signal.signal(signal.SIGINT, lambda signum, frame: caught.append(signum))
    try:
        yield
    finally:
        signal.signal(signal.SIGINT, previous)
    if caught:
        if previous is signal.default_int_handler:
            raise KeyboardInterrupt
        previous(signal.SIGINT, None)


@contextlib.contextmanager
def sigint_blocked():
    """Block SIGINT in this thread for the duration (a pending one is delivered after;
    a no-op where the platform has no signal masks)."""
    if not hasattr(signal, "pthread_sigmask"):  # pragma: no cover - not on POSIX
        yield
        return
    old = signal.pthread_sigmask(signal.SIG_BLOCK, {signal.SIGINT})
    try:
        yield
    finally:
        signal.pthread_sigmask(signal.SIG_SETMASK, old)
