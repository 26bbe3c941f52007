"""The backtest grid on several local processes: one job per estimator, results merged.

Each estimator's runs are independent of the others', so :func:`run_backtest_parallel` runs
:func:`optimizer.backtest.engine.run_backtest` for one estimator per job (the estimator-free
strategies ride with the first job) and merges the runs into one :class:`BacktestResult`, identical
to the serial one but for the wall time.
"""

from __future__ import annotations

import multiprocessing as mp
import time
from collections.abc import Callable, Sequence
from concurrent.futures import ProcessPoolExecutor, as_completed
from concurrent.futures.process import BrokenProcessPool
from dataclasses import replace
from pathlib import Path

from basiswise.data_adapters.book import Book

from ..interrupts import stop_pool, worker_init
from .engine import BacktestResult, run_backtest
from .strategies import ESTIMATOR_FREE, STRATEGIES


def _job(book, estimator: str, strategies: list[str], kwargs: dict) -> BacktestResult:
    # worker_init (the pool's initializer) set one BLAS thread: the processes share the cores
    return run_backtest(book, estimators=[estimator], strategies=strategies, **kwargs)


def run_backtest_parallel(
    book: Book | str | Path,
    *,
    estimators: Sequence[str],
    strategies: Sequence[str] = STRATEGIES,
    workers: int = 2,
    progress: Callable[[int, int], None] | None = None,
    **kwargs,
) -> BacktestResult:
    """:func:`run_backtest` with the estimators spread over ``workers`` processes.

    ``progress`` is called as ``progress(done, total)`` per finished estimator. Other keyword
    arguments go to :func:`run_backtest` unchanged.
    """
    t0 = time.perf_counter()
    estimators = list(dict.fromkeys(estimators))
    joint = [s for s in strategies if s not in ESTIMATOR_FREE]
    free = [s for s in strategies if s in ESTIMATOR_FREE]
    if workers <= 1 or len(estimators) <= 1 or not joint:
        return run_backtest(book, estimators=estimators, strategies=strategies,
                            progress=None, **kwargs)
    jobs = [(e, (free + joint) if i == 0 else joint) for i, e in enumerate(estimators)]
    results: dict[str, BacktestResult] = {}
    ctx = mp.get_context("spawn")
    ex = ProcessPoolExecutor(max_workers=min(workers, len(jobs)), mp_context=ctx,
                             initializer=worker_init)
    notes: list[str] = []
    try:
        futs = {ex.submit(_job, book, e, s, kwargs): e for e, s in jobs}
        for fut in as_completed(futs):
            results[futs[fut]] = fut.result()
            if progress is not None:
                progress(len(results), len(jobs))
    except BrokenProcessPool:  # a worker died: finish its estimators here, and say so
        notes.append("a worker process died; its estimators were run in the main process")
    except BaseException:  # interrupted: no worker outlives the backtest
        stop_pool(ex)
        raise
    finally:
        ex.shutdown(wait=True, cancel_futures=True)
    for e, s in jobs:
        if e not in results:
            results[e] = _job(book, e, s, kwargs)
    first = results[estimators[0]]
    runs = [r for r in first.runs if r.estimator is None]  # same order as the serial run
    runs += [r for e in estimators for r in results[e].runs if r.estimator is not None]
    return replace(first, runs=runs, seconds=time.perf_counter() - t0,
                   notes=list(first.notes) + notes)
