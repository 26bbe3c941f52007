"""Exact integer hedge solver against exhaustive enumeration and against SCIP."""

from __future__ import annotations

import itertools
import time

import numpy as np
import pytest

from basiswise.optimizer.problem.formulation import solve_relaxed, solve_scip
from basiswise.optimizer.problem.qp import HedgeQP
from basiswise.optimizer.solvers.exact import solve_exact
from basiswise.optimizer.solvers.rounding import naive_round

from bw_testkit import brute_force, curve_like_qp, random_qp


def test_exact_equals_brute_force_on_random_small_books():
    rng = np.random.default_rng(20240611)
    counts = {"certified": 0, "infeasible": 0, "rows": 0, "margin": 0, "binding": 0}
    for _ in range(220):
        qp = random_qp(rng)
        # reference: exhaustive enumeration, exact by construction
        best, argmins = brute_force(qp)
        res = solve_exact(qp, time_limit=20.0)
        if not np.isfinite(best):
            assert res.status == "infeasible"
            counts["infeasible"] += 1
            continue
        assert res.status == "certified"
        assert res.objective == pytest.approx(best, abs=1e-9)
        assert qp.is_feasible(res.x)
        assert np.array_equal(res.x, np.round(res.x))
        if len(argmins) == 1:
            np.testing.assert_array_equal(res.x, argmins[0])
        assert res.bound <= res.objective
        assert 0.0 <= res.gap <= 1e-9
        counts["certified"] += 1
        counts["rows"] += qp.G.shape[0] > 0
        counts["margin"] += qp.margin_budget is not None
        counts["binding"] += bool(np.any((res.x == qp.lo) | (res.x == qp.hi)))
    # the random family really covers each case
    assert counts["certified"] >= 150 and counts["infeasible"] >= 5
    assert min(counts["rows"], counts["margin"], counts["binding"]) >= 30


def test_bound_is_between_relaxation_and_objective():
    rng = np.random.default_rng(7)
    for _ in range(40):
        qp = random_qp(rng)
        rel = solve_relaxed(qp)
        res = solve_exact(qp, relaxed=rel)
        if res.status == "infeasible" or rel.x is None:
            continue
        # the relaxation is a lower bound of the integer problem (solver accuracy ~1e-7)
        assert rel.objective <= res.objective + 1e-7
        assert res.bound <= res.objective
        assert res.bound >= rel.objective - 1e-6
        # naive rounding, when it meets every limit, is never better than the exact optimum
        xr = naive_round(qp, rel.x)
        if qp.is_feasible(xr):
            assert res.objective <= qp.value(xr) + 1e-12


def test_unlimited_positions_are_bounded_by_the_incumbent():
    rng = np.random.default_rng(3)
    for _ in range(20):
        n = 4
        M = rng.normal(size=(6, n))
        u = rng.normal(size=6) * 3
        qp = HedgeQP(M=M, u=u, lo=np.full(n, -np.inf), hi=np.full(n, np.inf))
        res = solve_exact(qp)
        assert res.status == "certified"
        x_ls = np.linalg.lstsq(M, -u, rcond=None)[0]
        box = [range(int(np.floor(v)) - 4, int(np.ceil(v)) + 5) for v in x_ls]
        # reference: exhaustive enumeration, exact by construction (a box of ±4 around the
        # free optimum; the certified answer can only be better, never worse)
        pts = np.array(list(itertools.product(*box)), dtype=float)
        r = pts @ M.T + u
        assert res.objective <= np.einsum("ij,ij->i", r, r).min() + 1e-9


def test_time_limited_result_reports_a_true_gap():
    rng = np.random.default_rng(11)
    n = 14
    base = rng.normal(size=(n + 4, 1))
    M = 0.3 * (3 * base + 0.3 * rng.normal(size=(n + 4, n)))
    u = rng.normal(size=n + 4)
    u /= np.linalg.norm(u)
    qp = HedgeQP(M=M, u=u, lo=np.full(n, -30.0), hi=np.full(n, 30.0))
    short = solve_exact(qp, time_limit=0.05)
    full = solve_exact(qp, time_limit=30.0)
    assert full.status == "certified"
    assert short.status in ("certified", "time-limited")
    assert short.bound <= full.objective + 1e-12  # the short run's bound is a true bound
    assert short.objective >= full.objective - 1e-12
    assert short.gap == pytest.approx(short.objective - short.bound)


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_agrees_with_scip_on_medium_books(seed):
    rng = np.random.default_rng(100 + seed)
    n = 8 + 2 * seed
    k = n + 3
    M = 0.6 * (rng.normal(size=(k, 1)) + 0.7 * rng.normal(size=(k, n)))
    u = rng.normal(size=k)
    u /= np.linalg.norm(u)
    lim = rng.integers(2, 6, size=n).astype(float)
    row = np.zeros(n)
    row[: n // 2] = 1.0
    qp = HedgeQP(M=M, u=u, lo=-lim, hi=lim, G=np.vstack([row, -row]), h=np.array([3.0, 3.0]),
                 margin=rng.uniform(1, 3, n), margin_budget=float(2 * n))
    res = solve_exact(qp)
    # reference: SCIP via cvxpy, a general-purpose MIQP solver
    sc = solve_scip(qp, time_limit=60.0)
    assert sc.x is not None
    assert res.status == "certified"
    assert res.objective <= sc.objective + 1e-9
    assert res.objective == pytest.approx(sc.objective, abs=1e-6)


def test_empty_integer_box_is_infeasible():
    qp = HedgeQP(M=np.eye(2), u=np.array([0.6, 0.8]), lo=np.array([0.2, -1.0]),
                 hi=np.array([0.8, 1.0]))
    res = solve_exact(qp)
    assert res.status == "infeasible"
    assert not np.isnan(res.objective)


def test_lattice_levels_equal_brute_force():
    # the LLL phase, run on its own from the rounded incumbent, on small books without a budget
    from basiswise.optimizer.solvers.bounds import polish, prepare_root
    from basiswise.optimizer.solvers.lattice import lattice_root
    from basiswise.optimizer.solvers.rounding import best_rounded, integer_box
    from basiswise.optimizer.solvers.search import enumerate_levels

    rng = np.random.default_rng(99)
    checked = 0
    for _ in range(80):
        qp = random_qp(rng)
        if qp.margin_budget is not None:
            continue
        rel = solve_relaxed(qp)
        lo, hi = integer_box(qp)
        inc = best_rounded(qp, rel.x) if rel.x is not None else None
        kkt = polish(qp, rel)
        if inc is None or kkt is None or np.any(lo > hi):
            continue
        root = prepare_root(qp, kkt.x, kkt.dual_rows, None, lo, hi, qp.value(inc))
        box_lo, box_hi = np.empty(qp.n), np.empty(qp.n)
        box_lo[root.perm], box_hi[root.perm] = root.lo, root.hi
        lroot = lattice_root(qp, kkt, box_lo, box_hi, qp.value(inc))
        if lroot is None:  # singular or ill-conditioned books keep the original levels
            continue
        f, x, _, frontier = enumerate_levels(qp, lroot, qp.value(inc), inc, float("inf"))
        # reference: exhaustive enumeration, exact by construction
        best, _ = brute_force(qp)
        assert frontier is None
        assert lroot.K <= best + 1e-12
        assert f == pytest.approx(best, abs=1e-9)
        assert qp.is_feasible(x)
        checked += 1
    assert checked >= 30


def test_start_point_is_used_only_when_feasible_and_never_changes_the_optimum():
    rng = np.random.default_rng(41)
    checked = 0
    for _ in range(60):
        qp = random_qp(rng)
        best, _ = brute_force(qp)
        if not np.isfinite(best):
            continue
        plain = solve_exact(qp)
        # reference: exhaustive enumeration, exact by construction
        assert plain.objective == pytest.approx(best, abs=1e-9)
        # the optimum itself as start, an infeasible start (outside the box) and a malformed one
        starts = [plain.x, np.asarray(qp.hi, float) + 1.0, np.full(qp.n + 1, 0.0),
                  np.full(qp.n, 0.5)]
        for start in starts:
            res = solve_exact(qp, start=start)
            assert res.status == "certified"
            assert res.objective == pytest.approx(best, abs=1e-9)
            assert qp.is_feasible(res.x)
        checked += 1
    assert checked >= 40


def test_quick_relaxation_matches_bounded_least_squares():
    from scipy.optimize import lsq_linear

    from basiswise.optimizer.solvers.bounds import quick_relaxation

    rng = np.random.default_rng(17)
    accepted = 0
    for _ in range(40):
        n = int(rng.integers(3, 12))
        k = n + int(rng.integers(0, 4))
        M = 0.8 * rng.normal(size=(k, 1)) + rng.normal(size=(k, n))
        u = 3.0 * rng.normal(size=k)
        lim = rng.integers(1, 4, size=n).astype(float)
        qp = HedgeQP(M=M, u=u, lo=-lim, hi=lim)
        kkt = quick_relaxation(qp)
        # reference: scipy.optimize.lsq_linear, bounded linear least squares
        ref = lsq_linear(M, -u, bounds=(-lim, lim), method="bvls", tol=1e-12)
        ref_val = float(np.sum((M @ ref.x + u) ** 2))
        if kkt is None:
            continue
        accepted += 1
        assert qp.value(kkt.x) == pytest.approx(ref_val, rel=1e-9, abs=1e-12)
        assert np.all(kkt.dual_lo >= 0) and np.all(kkt.dual_hi >= 0)
    assert accepted >= 30
    # with a margin budget the conic solver is always used
    qp = HedgeQP(M=np.eye(2), u=np.array([0.6, 0.8]), lo=-np.ones(2), hi=np.ones(2),
                 margin=np.ones(2), margin_budget=1.0)
    assert quick_relaxation(qp) is None


def test_polish_stopped_by_its_iteration_cap_still_returns_consistent_multipliers():
    from basiswise.optimizer.solvers.bounds import lagrangian_terms, polish

    rng = np.random.default_rng(5)
    for _ in range(30):
        qp = random_qp(rng)
        if qp.margin_budget is not None:
            continue
        rel = solve_relaxed(qp)
        if rel.x is None:
            continue
        for cap in (1, 2, 3):
            kkt = polish(qp, rel, max_iter=cap)
            assert kkt is not None
            best, _ = brute_force(qp)
            K, *_ = lagrangian_terms(qp, kkt.x, kkt.dual_rows, None, *integer_box_of(qp))
            # reference: exhaustive enumeration — a Lagrangian bound never exceeds the optimum
            assert K <= best + 1e-9


def integer_box_of(qp):
    from basiswise.optimizer.solvers.rounding import integer_box

    return integer_box(qp)


def test_separable_integrality_bound_never_exceeds_brute_force_minimum():
    # (y − c)ᵀQ(y − c) ≥ Σ_l D_l (c_l − round c_l)² for 0 ⪯ D ⪯ Q, the node bound of the
    # lattice search; checked against the true integer minimum at every level
    from basiswise.optimizer.solvers.search import level_diagonals

    # source: Buchheim, Caprara & Lodi (2012), Math. Programming 135, 369–395, separable
    # underestimators of a convex quadratic over the integers (from memory)
    rng = np.random.default_rng(515)
    checked = 0
    for _ in range(60):
        n = int(rng.integers(3, 6))
        k = n + int(rng.integers(0, 3))
        M = 0.9 * rng.normal(size=(k, 1)) + 0.5 * rng.normal(size=(k, n))
        R = np.linalg.qr(M, mode="r")
        W, D = level_diagonals(R)
        A = R.T @ R
        for i in range(2, n + 1):
            Q = A[:i, :i]
            assert np.all(D[i] >= 0)
            assert np.linalg.eigvalsh(Q - np.diag(D[i]))[0] >= -1e-12 * np.trace(Q)
            c = rng.uniform(-3, 3, size=i)
            # reference: exhaustive enumeration, exact by construction, over every integer
            # point that can beat the rounded centre ((y−c)ᵀQ(y−c) ≤ r² ⇒ |y_l − c_l|² ≤ r² Q⁻¹_ll)
            r2 = float((np.rint(c) - c) @ Q @ (np.rint(c) - c))
            w = np.sqrt(r2 * np.diag(np.linalg.inv(Q))) + 1e-9
            if np.prod(2 * w + 1) > 2e5:  # too many points to list (nearly singular Q)
                continue
            spans = [range(int(np.ceil(a - b)), int(np.floor(a + b)) + 1)
                     for a, b in zip(c, w, strict=True)]
            pts = np.array(list(itertools.product(*spans)), dtype=float).reshape(-1, i)
            pts = np.vstack([pts, np.rint(c)])
            d = pts - c
            true_min = float(np.einsum("ij,jk,ik->i", d, Q, d).min())
            dd = c - np.rint(c)
            assert float(D[i] @ (dd * dd)) <= true_min + 1e-12
            if i < n:  # the centre update is the free minimiser once level i is fixed
                yi = c[-1] + rng.uniform(-2, 2)
                x = np.linalg.lstsq(R[:i, :i], -R[:i, i] * (yi - c[-1]), rcond=None)[0]
                np.testing.assert_allclose(W[i] * (yi - c[-1]), x, atol=1e-9)
            checked += 1
    assert checked >= 150


def test_interrupted_lattice_search_reports_a_true_bound(monkeypatch):
    # the frontier of a lattice search stopped after 1024 nodes (deadline already passed, so
    # the stop is deterministic) never exceeds the optimum found without the separable bound
    from basiswise.optimizer.solvers import search
    from basiswise.optimizer.solvers.bounds import polish, prepare_root
    from basiswise.optimizer.solvers.lattice import lattice_root
    from basiswise.optimizer.solvers.rounding import best_rounded, integer_box
    from basiswise.optimizer.solvers.search import enumerate_levels

    rng = np.random.default_rng(2718)
    stopped = finished = 0
    for _ in range(10):
        qp = curve_like_qp(rng, 12)
        n = qp.n
        rel = solve_relaxed(qp)
        lo, hi = integer_box(qp)
        inc = best_rounded(qp, rel.x)
        kkt = polish(qp, rel)
        root = prepare_root(qp, kkt.x, kkt.dual_rows, None, lo, hi, qp.value(inc))
        box_lo, box_hi = np.empty(n), np.empty(n)
        box_lo[root.perm], box_hi[root.perm] = root.lo, root.hi
        lroot = lattice_root(qp, kkt, box_lo, box_hi, qp.value(inc))
        assert lroot is not None
        # reference: the same lattice search without the separable bound (checked against
        # exhaustive enumeration in test_lattice_levels_equal_brute_force), given 2 s; books it
        # cannot finish in that time are left out (the clock only chooses which books are
        # compared, it is never asserted on)
        with monkeypatch.context() as mp:
            mp.setattr(search, "_SEP_MIN_N", qp.n + 1)
            f_all, x_all, _, frontier_all = search.enumerate_levels(
                qp, lroot, qp.value(inc), inc, time.perf_counter() + 2.0)
        if frontier_all is not None:
            continue
        assert qp.is_feasible(x_all)
        f, x, nodes, frontier = enumerate_levels(qp, lroot, qp.value(inc), inc, 0.0)
        if frontier is None:  # finished inside the first 1024 nodes: the same optimum
            assert f == pytest.approx(f_all, abs=1e-12)
            finished += 1
            continue
        stopped += 1
        assert nodes == 1024
        assert lroot.K - 1e-12 <= frontier <= f_all + 1e-12
        assert f >= f_all - 1e-12
    assert stopped >= 3 and finished >= 2
