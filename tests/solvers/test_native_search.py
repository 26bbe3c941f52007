"""The compiled level search against its plain-Python twin (same arrays, order and answers)."""

from __future__ import annotations

import shutil
import sysconfig
import time

import numpy as np
import pytest

from basiswise.optimizer.problem.formulation import solve_relaxed
from basiswise.optimizer.solvers.bounds import polish, prepare_root
from basiswise.optimizer.solvers.lattice import lattice_root
from basiswise.optimizer.solvers.native_search import native_search
from basiswise.optimizer.solvers.rounding import best_rounded, integer_box
from basiswise.optimizer.solvers.search import enumerate_levels

from bw_testkit import brute_force, curve_like_qp, random_qp

needs_native = pytest.mark.skipif(not native_search(), reason="no compiled search here")


def _roots(qp):
    """The search roots of a book: contract-count levels, and LLL levels where they apply."""
    rel = solve_relaxed(qp)
    lo, hi = integer_box(qp)
    if rel.x is None or np.any(lo > hi):
        return None, []
    inc = best_rounded(qp, rel.x)
    if inc is None:
        return None, []
    root = prepare_root(qp, rel.x, rel.dual_rows, rel.dual_margin, lo, hi, qp.value(inc))
    if root is None:
        return None, []
    roots = [root]
    kkt = polish(qp, rel)
    if kkt is not None and qp.margin_budget is None:
        box_lo, box_hi = np.empty(qp.n), np.empty(qp.n)
        box_lo[root.perm], box_hi[root.perm] = root.lo, root.hi
        lroot = lattice_root(qp, kkt, box_lo, box_hi, qp.value(inc))
        if lroot is not None:
            roots.append(lroot)
    return inc, roots


def test_a_machine_with_a_c_compiler_gets_the_compiled_search(monkeypatch):
    cc = (sysconfig.get_config_var("CC") or "cc").split()[0]
    if shutil.which(cc) is None:
        pytest.skip("no C compiler on this machine")
    monkeypatch.delenv("BASISWISE_SEARCH", raising=False)
    assert native_search()


def test_switch_forces_the_python_search(monkeypatch):
    monkeypatch.setenv("BASISWISE_SEARCH", "python")
    assert not native_search()


@needs_native
def test_compiled_search_equals_python_search_node_for_node():
    # the same book, the same levels: both engines must visit the same nodes and find the same
    # optimum; the reference for the optimum itself is exhaustive enumeration
    rng = np.random.default_rng(4242)
    compared = 0
    for k in range(70):
        small = k % 3 != 0
        qp = random_qp(rng) if small else curve_like_qp(rng, 6)
        inc, roots = _roots(qp)
        # source: exhaustive enumeration of every integer point, exact by construction
        best = brute_force(qp)[0] if small and roots else None
        for root in roots:
            f0 = qp.value(inc)
            py = enumerate_levels(qp, root, f0, inc, time.perf_counter() + 60, engine="python")
            nat = enumerate_levels(qp, root, f0, inc, time.perf_counter() + 60, engine="native")
            assert py[3] is None and nat[3] is None  # both finished
            assert nat[2] == py[2]
            assert nat[0] == pytest.approx(py[0], abs=1e-12)
            if best is not None:
                assert nat[0] == pytest.approx(best, abs=1e-9)
            compared += 1
    assert compared >= 80


@needs_native
def test_compiled_search_stops_with_the_same_true_bound():
    # deadline already passed: both stop at node 1024 and report the same frontier bound
    rng = np.random.default_rng(77)
    stopped = 0
    for _ in range(8):
        qp = curve_like_qp(rng, 12)
        inc, roots = _roots(qp)
        for root in roots:
            f0 = qp.value(inc)
            py = enumerate_levels(qp, root, f0, inc, 0.0, engine="python")
            nat = enumerate_levels(qp, root, f0, inc, 0.0, engine="native")
            assert nat[2] == py[2]
            if py[3] is None:
                assert nat[3] is None
                continue
            stopped += 1
            assert py[2] == 1024
            assert nat[3] == pytest.approx(py[3], rel=1e-9, abs=1e-12)
            assert nat[0] == pytest.approx(py[0], abs=1e-12)
    assert stopped >= 4


def test_bundled_source_compiles_into_a_fresh_cache(tmp_path, monkeypatch):
    # the path a source checkout (or an install without the built extension) takes
    from basiswise.optimizer.solvers import native_search as native

    cc = (sysconfig.get_config_var("CC") or "cc").split()[0]
    if shutil.which(cc) is None:
        pytest.skip("no C compiler on this machine")
    monkeypatch.setenv("BASISWISE_CACHE", str(tmp_path))
    out = native._compile()
    assert out is not None and out.is_file() and out.parent == tmp_path
    assert list(tmp_path.iterdir()) == [out]  # no temporary file left behind
    import ctypes

    assert hasattr(ctypes.CDLL(str(out)), "bw_enumerate")


@needs_native
def test_compiled_active_set_equals_the_numpy_loop(monkeypatch):
    # polish (and quick_relaxation) on the same books with both engines: same point, same
    # multipliers; the KKT conditions themselves are checked in test_integer
    from basiswise.optimizer.solvers.bounds import quick_relaxation

    rng = np.random.default_rng(5150)
    compared = 0
    for k in range(60):
        qp = random_qp(rng) if k % 2 else curve_like_qp(rng, 8)
        if qp.margin_budget is not None:
            continue
        nat = quick_relaxation(qp)
        with monkeypatch.context() as mp:
            mp.setenv("BASISWISE_SEARCH", "python")
            ref = quick_relaxation(qp)
        assert (nat is None) == (ref is None)
        if ref is None:
            continue
        np.testing.assert_allclose(nat.x, ref.x, rtol=1e-9, atol=1e-9)
        np.testing.assert_allclose(nat.dual_rows, ref.dual_rows, rtol=1e-7, atol=1e-9)
        np.testing.assert_allclose(nat.dual_hi - nat.dual_lo, ref.dual_hi - ref.dual_lo,
                                   rtol=1e-7, atol=1e-9)
        compared += 1
    assert compared >= 30


@needs_native
def test_ctrl_c_stops_a_long_compiled_search(monkeypatch):
    # Ctrl-C arrives while the main thread waits for the search thread: the search is told to
    # stop, stops at its next clock check (within 1,024 nodes) and the interrupt goes on
    from basiswise.optimizer.solvers import native_search as native

    rng = np.random.default_rng(2718)
    qp = curve_like_qp(rng, 16)
    inc, roots = _roots(qp)
    calls = []

    def interrupted_wait(worker):
        calls.append(worker.name)
        raise KeyboardInterrupt

    monkeypatch.setattr(native, "_wait", interrupted_wait)
    native.last_interrupt = None
    with pytest.raises(KeyboardInterrupt):
        enumerate_levels(qp, roots[0], qp.value(inc), inc, time.perf_counter() + 600.0,
                         engine="native")
    assert calls == ["basiswise-search"]
    stopped, nodes = native.last_interrupt
    assert stopped
    assert nodes < 10**8  # stopped at a clock check, far from the 600 s limit (~10^10 nodes)


@needs_native
def test_python_and_c_agree_on_the_problem_layout():
    import ctypes

    from basiswise.optimizer.solvers import native_search as native

    assert native._load().bw_problem_size() == ctypes.sizeof(native._Problem)
