"""Naive rounding and the repaired greedy rounding."""

from __future__ import annotations

import numpy as np
import pytest

from basiswise.optimizer.problem.formulation import solve_relaxed
from basiswise.optimizer.problem.qp import HedgeQP
from basiswise.optimizer.solvers.rounding import best_rounded, integer_box, naive_round

from bw_testkit import brute_force, random_qp


def _book(rng, n=4):
    M = rng.normal(size=(n + 2, 1)) + 0.5 * rng.normal(size=(n + 2, n))
    u = rng.normal(size=n + 2)
    u /= np.linalg.norm(u)
    lim = rng.integers(1, 4, size=n).astype(float)
    row = np.ones(n)
    return HedgeQP(M=M, u=u, lo=-lim, hi=lim, G=np.vstack([row, -row]), h=np.array([1.0, 1.0]),
                   margin=np.ones(n), margin_budget=3.0)


def test_naive_round_is_nearest_integer_clipped_to_the_integer_box():
    qp = HedgeQP(M=np.eye(3), u=np.zeros(3), lo=np.array([-2.5, 0.0, -np.inf]),
                 hi=np.array([2.0, 4.2, np.inf]))
    lo, hi = integer_box(qp)
    np.testing.assert_array_equal(lo, [-2.0, 0.0, -np.inf])
    np.testing.assert_array_equal(hi, [2.0, 4.0, np.inf])
    # common practice, no source: round half to even (numpy), then clip into the box
    np.testing.assert_array_equal(naive_round(qp, np.array([-3.7, 4.6, 2.5])), [-2.0, 4.0, 2.0])


def test_best_rounded_is_feasible_and_no_worse_than_feasible_naive_rounding():
    rng = np.random.default_rng(5)
    found = 0
    for _ in range(40):
        qp = _book(rng)
        rel = solve_relaxed(qp)
        x = best_rounded(qp, rel.x)
        if x is None:
            continue
        found += 1
        assert qp.is_feasible(x)
        assert np.array_equal(x, np.round(x))
        xr = naive_round(qp, rel.x)
        if qp.is_feasible(xr):
            assert qp.value(x) <= qp.value(xr) + 1e-12
        # reference: exhaustive enumeration, exact by construction — rounding is never below
        # the integer optimum
        assert qp.value(x) >= brute_force(qp, qp.value)[0] - 1e-12
    assert found >= 30


def test_best_rounded_returns_none_when_no_point_exists():
    qp = HedgeQP(M=np.eye(2), u=np.array([0.6, 0.8]), lo=np.array([2.0, -1.0]),
                 hi=np.array([3.0, 1.0]), G=np.array([[1.0, 0.0]]), h=np.array([1.0]))
    assert best_rounded(qp, np.array([2.0, 0.0])) is None


def test_all_move_violations_at_once_equal_one_at_a_time():
    # the vectorised violations of every ±1 move against the plain loop over moves
    from basiswise.optimizer.solvers.rounding import _move_violations, _violation

    rng = np.random.default_rng(31)
    for _ in range(40):
        qp = random_qp(rng)
        x = rng.integers(-3, 4, size=qp.n).astype(float)
        steps = np.array([1.0, -1.0])
        fast = _move_violations(qp, x, steps)
        for s_idx, s in enumerate(steps):
            for j in range(qp.n):
                y = x.copy()
                y[j] += s
                assert fast[s_idx, j] == pytest.approx(_violation(qp, y), abs=1e-12)


def test_is_feasible_agrees_with_the_named_violations():
    rng = np.random.default_rng(32)
    for _ in range(40):
        qp = random_qp(rng)
        for _ in range(10):
            x = rng.integers(-4, 5, size=qp.n).astype(float)
            assert qp.is_feasible(x) == (not qp.violations(x))
