"""Local worker processes for a sweep: chunks out, results back, no worker left behind.

Workers are fresh interpreters (``spawn``) started with
:func:`basiswise.optimizer.interrupts.worker_init` (SIGINT ignored, SIGTERM when the parent
dies). An interrupt ends them at once; a worker that dies breaks the pool, and the caller solves
what is left in its own process.
"""

from __future__ import annotations

import math
import multiprocessing as mp
from concurrent.futures import ProcessPoolExecutor, as_completed
from concurrent.futures.process import BrokenProcessPool

from ..interrupts import stop_pool, worker_init

__all__ = ["run_local"]


def _chunks(items: list, parts: int) -> list[list]:
    size = max(1, math.ceil(len(items) / parts))
    return [items[i:i + size] for i in range(0, len(items), size)]


def _mp_context():
    """Fresh interpreters (``spawn``): measured faster per scenario here than forked ones."""
    return mp.get_context("spawn")


def _collect(finished, results: list, done: int, total: int, progress) -> int:
    """Store each finished chunk's results in place; report progress; return the count done."""
    for fut in finished:
        for i, r in fut.result():
            results[i] = r
            done += 1
        if progress:
            progress(done, total)
    return done


def run_local(task, items, payload, workers, pool, results, total, progress) -> tuple[int, str]:
    """Run ``task(payload, chunk)`` for the chunks of ``items`` on local worker processes.

    Results land in ``results`` (by index); returns (done, note).

    An interrupt ends the workers at once (none outlives the sweep). A worker that dies (killed,
    out of memory) breaks the pool: the scenarios it left unsolved are then solved in this
    process, and the note says so.
    """
    own = pool is None
    ex = pool or ProcessPoolExecutor(max_workers=workers, mp_context=_mp_context(),
                                     initializer=worker_init)
    done, note = 0, ""
    try:
        futs = [ex.submit(task, payload, ch) for ch in _chunks(items, 4 * workers)]
        done = _collect(as_completed(futs), results, done, total, progress)
    except BrokenProcessPool:
        note = "a worker process died; its scenarios were solved in the main process"
    except BaseException:
        if own:
            stop_pool(ex)
        raise
    finally:
        if own:
            ex.shutdown(wait=True, cancel_futures=True)
    return done, note
