"""Fault injection: each broken part gives its stated fallback or a clean error, never a wrong
``certified``."""

from __future__ import annotations

import multiprocessing as mp
import sys
from concurrent.futures import ProcessPoolExecutor

import numpy as np
import pytest
from rel_kit import SCENARIO_TEXT, assert_one_clean_line, die_at_start, run_cli, write_book

import basiswise.optimizer.solvers.exact as integer
import basiswise.optimizer.solvers.native_search as native
from basiswise.optimizer.pipeline import model_of, prepare, solve_model
from basiswise.optimizer.problem.formulation import FormulationResult, SolverFailure


@pytest.fixture
def book(tmp_path):
    return write_book(tmp_path)


def _solve(book, method="exact"):
    return solve_model(model_of(prepare(book)), method, time_limit=10.0)


def test_compiled_search_missing_falls_back_to_the_same_python_answer(book, monkeypatch):
    reference = _solve(book)
    monkeypatch.setattr(native, "_lib", None)
    monkeypatch.setattr(native, "_tried", False)
    import basiswise.optimizer.solvers.native

    monkeypatch.delattr(basiswise.optimizer.solvers.native, "_levels", raising=False)
    # the built extension cannot be imported
    monkeypatch.setitem(sys.modules, "basiswise.optimizer.solvers.native._levels", None)
    monkeypatch.setattr(native, "_compile", lambda: None)  # and no compiler either
    assert not native.native_search()
    fallback = _solve(book)
    assert fallback.status == reference.status == "certified"
    assert [i.target for i in fallback.instruments] == [i.target for i in reference.instruments]


def _failing_scip(*args, **kwargs):
    return FormulationResult(status="solver_error: injected", x=None, objective=None,
                             solver="SCIP")


def test_scip_failing_never_gives_a_wrong_certified(book, monkeypatch):
    reference = _solve(book)
    monkeypatch.setattr(integer, "prepare_root", lambda *a, **k: None)  # force the SCIP path
    monkeypatch.setattr(integer, "solve_scip", _failing_scip)
    rep = _solve(book)
    assert rep.ok  # the repaired rounding is kept as the answer
    assert rep.status in ("certified", "time-limited")
    if rep.status == "certified":  # only when its bound truly proves it
        assert rep.hedged_std <= reference.hedged_std * (1 + 1e-9)


def test_scip_failing_with_no_feasible_point_is_a_clean_solver_error(book, monkeypatch):
    monkeypatch.setattr(integer, "prepare_root", lambda *a, **k: None)
    monkeypatch.setattr(integer, "solve_scip", _failing_scip)
    monkeypatch.setattr(integer, "best_rounded", lambda *a, **k: None)
    monkeypatch.setattr(integer, "naive_round", lambda qp, z: np.full(qp.n, 1e6))
    monkeypatch.setattr(integer, "_usable_start", lambda qp, start: None)
    with pytest.raises(SolverFailure):
        _solve(book)
    out = book.parent / "trades.csv"
    assert_one_clean_line(run_cli(["solve", book, "--trades", out]), 4, names="SCIP failed")
    assert not out.exists()


def test_clarabel_failing_is_a_clean_error_not_no_hedge(book, monkeypatch):
    import cvxpy as cp

    real = cp.Problem.solve

    def broken(self, *args, solver=None, **kwargs):
        if solver == "CLARABEL":
            raise cp.error.SolverError("injected failure")
        return real(self, *args, solver=solver, **kwargs)

    monkeypatch.setattr(cp.Problem, "solve", broken)
    out = book.parent / "trades.csv"
    line = assert_one_clean_line(run_cli(["solve", book, "--trades", out]), 4,
                                 names="CLARABEL")
    assert "no hedge is reported" in line
    assert not out.exists()


def test_a_worker_dying_in_a_sweep_is_finished_in_the_main_process(book):
    import tomllib

    from basiswise.data_adapters.book import load_book
    from basiswise.optimizer.sweeps.runner import run_sweep
    from basiswise.optimizer.sweeps.scenario_file import parse_scenarios

    scs = parse_scenarios(tomllib.loads(SCENARIO_TEXT), load_book(book))
    serial = run_sweep(book, scs, workers=1)
    pool = ProcessPoolExecutor(max_workers=2, mp_context=mp.get_context("spawn"),
                               initializer=die_at_start)
    try:
        res = run_sweep(book, scs, workers=2, pool=pool)
    finally:
        pool.shutdown(wait=True, cancel_futures=True)
    assert "worker process died" in res.mode
    assert [r.contracts for r in res.results] == [r.contracts for r in serial.results]
    assert [r.status for r in res.results] == [r.status for r in serial.results]


def test_a_worker_dying_in_a_backtest_is_finished_in_the_main_process(monkeypatch):
    import basiswise.optimizer.backtest.parallel as bp
    from basiswise.optimizer.backtest.engine import run_backtest
    from basiswise.scenarios import demo_book_path

    kw = dict(step=240, method="round", window=300, strategies=["unhedged", "joint-whole"])
    ests = ["sample", "ledoit-wolf"]
    serial = run_backtest(demo_book_path(), estimators=ests, **kw)
    monkeypatch.setattr(bp, "worker_init", die_at_start)
    par = bp.run_backtest_parallel(str(demo_book_path()), estimators=ests, workers=2, **kw)
    assert any("worker process died" in n for n in par.notes)
    assert [(r.strategy, r.estimator) for r in par.runs] == \
        [(r.strategy, r.estimator) for r in serial.runs]
    for a, b in zip(serial.runs, par.runs, strict=True):
        np.testing.assert_allclose(a.targets, b.targets, atol=1e-8)


def test_a_search_moved_to_the_helper_thread_gives_the_same_certified_answer(monkeypatch):
    # small books start with a direct call; one still running after the slice is searched again
    # in the helper thread from its incumbent: same optimum, still certified
    from basiswise.optimizer.sweeps.runner import SweepRunner
    from basiswise.optimizer.sweeps.scenario_file import Scenario
    from basiswise.scenarios import demo_book_path

    runner = SweepRunner(demo_book_path(), time_limit=60.0)
    sc = Scenario("cut", {"limit_scale": 0.11})  # a search of some 10^6 nodes
    reference = runner.run(sc)
    monkeypatch.setattr(native, "_DIRECT_SLICE", 1e-6)
    threaded, real = [], native._interruptible
    monkeypatch.setattr(native, "_interruptible",
                        lambda *a: threaded.append(1) or real(*a))
    moved = runner.run(sc)
    assert threaded  # the continuation ran
    assert reference.status == moved.status == "certified"
    assert moved.contracts == reference.contracts
