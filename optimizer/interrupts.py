"""Stopping a run on SIGINT or SIGTERM: promptly, once, with no worker left behind.

The command line calls :func:`handle_signals` around each command. The first SIGINT raises
``KeyboardInterrupt`` and the first SIGTERM raises :class:`Terminated` (a ``KeyboardInterrupt``,
so every clean-up path written for Ctrl-C runs for both); later signals during the clean-up are
counted and ignored, so a second Ctrl-C can never cut a clean-up short (the compiled search's
memory, a temporary output file, the worker processes). A third one ends the process at once.

Worker processes (:func:`worker_init`) ignore SIGINT — the parent decides, so a Ctrl-C to the
process group prints nothing from them — and ask the kernel to send them SIGTERM when their
parent dies (Linux ``PR_SET_PDEATHSIG``), so none outlives it. :func:`stop_pool` ends a process
pool's workers without waiting for their running tasks.
"""

from __future__ import annotations

import contextlib
import os
import signal
import sys
import threading
from collections.abc import Iterator

__all__ = ["EXIT_SIGINT", "EXIT_SIGTERM", "Terminated", "exit_code", "handle_signals",
           "stop_pool", "worker_init"]

EXIT_SIGINT = 130   # 128 + SIGINT, the shell's convention
EXIT_SIGTERM = 143  # 128 + SIGTERM


class Terminated(KeyboardInterrupt):
    """Raised in the main thread when the process receives SIGTERM."""


_received: list[int] = []


def exit_code(exc: BaseException) -> int:
    """130 for SIGINT, 143 for SIGTERM."""
    return EXIT_SIGTERM if isinstance(exc, Terminated) else EXIT_SIGINT


def _handler(signum, frame) -> None:
    _received.append(signum)
    if len(_received) == 1:
        raise Terminated() if signum == signal.SIGTERM else KeyboardInterrupt()
    if len(_received) >= 3:  # the user insists: leave now (workers get SIGTERM from the kernel)
        os._exit(EXIT_SIGTERM if _received[0] == signal.SIGTERM else EXIT_SIGINT)
    # the second signal: ignored, the clean-up of the first one is under way


@contextlib.contextmanager
def handle_signals() -> Iterator[None]:
    """Install the handlers for the block (main thread only; elsewhere a no-op)."""
    if threading.current_thread() is not threading.main_thread():
        yield
        return
    old = {s: signal.getsignal(s) for s in (signal.SIGINT, signal.SIGTERM)}
    _received.clear()
    for s in old:
        signal.signal(s, _handler)
    try:
        yield
    finally:
        if not _received:  # after a signal the handlers stay: the run is ending, and a late
            for s, h in old.items():  # second signal must not cut its last line short
                signal.signal(s, h)


def _parent_death_signal() -> None:
    if not sys.platform.startswith("linux"):
        return
    with contextlib.suppress(OSError, AttributeError):
        import ctypes

        libc = ctypes.CDLL(None, use_errno=True)
        libc.prctl(1, int(signal.SIGTERM), 0, 0, 0)  # PR_SET_PDEATHSIG = 1


def worker_init() -> None:
    """Set up a worker process: SIGINT ignored, SIGTERM when the parent dies, one BLAS thread."""
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    signal.signal(signal.SIGTERM, signal.SIG_DFL)
    _parent_death_signal()
    try:  # one BLAS thread per worker process: the matrices are small, the cores few
        from threadpoolctl import threadpool_limits

        threadpool_limits(1)
    except ImportError:  # pragma: no cover
        pass


def stop_pool(pool) -> None:
    """End a ``ProcessPoolExecutor``'s workers now (running tasks are dropped) and shut it down."""
    procs = list((getattr(pool, "_processes", None) or {}).values())
    for p in procs:
        with contextlib.suppress(Exception):
            p.terminate()
    with contextlib.suppress(Exception):
        pool.shutdown(wait=False, cancel_futures=True)
    for p in procs:
        with contextlib.suppress(Exception):
            p.join(2.0)
        with contextlib.suppress(Exception):
            if p.is_alive():
                p.kill()
