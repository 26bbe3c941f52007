"""The hedge problem with trading cost as a cvxpy problem (relaxation: Clarabel; integer: SCIP).

With ``t ≥ |x − x₀|`` (two linear rows per line) the cost ``Σ a_j t_j + b_j t_j^1.5`` is convex;
``t^1.5`` enters through cvxpy's ``power`` atom (a power cone for Clarabel, second-order cones
for SCIP). The price-of-risk form adds the cost to ``‖Mx + u‖²``; the budget form adds the row
``Σ cost ≤ budget``, whose dual is reported in ``dual_cost``. The integer version also carries the
minimum trade size exactly (two binaries per line: trade up by at least ``m_j`` or down by at least
``m_j`` or not at all), for cross-checks of the whole-contract search on small books.

References
----------
Ben-Tal & Nemirovski (2001), "Lectures on Modern Convex Optimization", SIAM, §3.3 (conic
representation of ``t^p``; from memory).
"""

from __future__ import annotations

import warnings
from dataclasses import replace

import cvxpy as cp
import numpy as np

from .formulation import SOLVED, FormulationResult
from .qp import HedgeQP

__all__ = ["solve_relaxed_costs", "solve_scip_costs"]


def _problem(qp: HedgeQP, integer: bool):
    n, ct = qp.n, qp.cost
    x = cp.Variable(n, integer=integer, name="contracts")
    t = cp.Variable(n, nonneg=True, name="traded")
    cons: list = [t >= x - ct.current, t >= ct.current - x]
    named: dict = {}
    ilo, ihi = np.flatnonzero(np.isfinite(qp.lo)), np.flatnonzero(np.isfinite(qp.hi))
    if len(ilo):
        named["lo"] = x[ilo] >= qp.lo[ilo]
    if len(ihi):
        named["hi"] = x[ihi] <= qp.hi[ihi]
    if qp.G.shape[0]:
        named["rows"] = qp.G @ x <= qp.h
    if qp.margin_budget is not None and qp.margin is not None:
        a = cp.Variable(n, nonneg=True)
        cons += [a >= x, a >= -x]
        named["margin"] = qp.margin @ a <= qp.margin_budget
    has_imp = bool(np.any(ct.imp > 0))
    cost = ct.lin @ t + (ct.imp @ cp.power(t, 1.5) if has_imp else 0.0)
    if ct.budget is not None:
        named["cost"] = cost <= ct.budget
    if integer and np.any(ct.min_trade > 1):
        _min_trade_rows(qp, x, t, cons)
    obj = cp.sum_squares(qp.M @ x + qp.u) + (cost if ct.in_objective else 0.0)
    return cp.Problem(cp.Minimize(obj), cons + list(named.values())), x, named, ilo, ihi


def _min_trade_rows(qp: HedgeQP, x, t, cons: list) -> None:
    """``t_j = 0`` or ``t_j ≥ m_j`` through binaries, with big-M from the finite box."""
    ct = qp.cost
    n = qp.n
    up = np.where(np.isfinite(qp.hi), qp.hi - ct.current, 1e4)
    dn = np.where(np.isfinite(qp.lo), ct.current - qp.lo, 1e4)
    zp, zn = cp.Variable(n, boolean=True), cp.Variable(n, boolean=True)
    p, q = cp.Variable(n, nonneg=True), cp.Variable(n, nonneg=True)
    m = ct.min_trade.astype(float)
    cons += [x - ct.current == p - q, t == p + q, zp + zn <= 1,
             p <= cp.multiply(np.maximum(up, 0), zp), q <= cp.multiply(np.maximum(dn, 0), zn),
             p >= cp.multiply(m, zp), q >= cp.multiply(m, zn)]


def _solve(qp: HedgeQP, integer: bool, **kwargs) -> FormulationResult:
    prob, x, named, ilo, ihi = _problem(qp, integer)
    solver = "SCIP" if integer else "CLARABEL"
    if not integer:
        kwargs.update(tol_gap_abs=1e-10, tol_gap_rel=1e-10, tol_feas=1e-10)
    try:
        with warnings.catch_warnings():  # "optimal_inaccurate" is reported in the status
            warnings.simplefilter("ignore", UserWarning)
            prob.solve(solver=solver, **kwargs)
    except cp.error.SolverError as exc:
        return FormulationResult(status=f"solver_error: {exc}", x=None, objective=None,
                                 solver=solver)
    if prob.status not in SOLVED or x.value is None:
        return FormulationResult(status=prob.status, x=None, objective=None, solver=solver)
    xv = np.asarray(x.value, dtype=float).copy()
    if integer:
        xv = np.round(xv)
        return FormulationResult(status=prob.status, x=xv, objective=qp.value(xv), solver=solver)
    n = qp.n

    def dual(name, size=None):
        c = named.get(name)
        if c is None:
            return np.zeros(size) if size is not None else None
        return np.maximum(np.asarray(c.dual_value, dtype=float), 0.0)

    dual_lo, dual_hi = np.zeros(n), np.zeros(n)
    if "lo" in named:
        dual_lo[ilo] = dual("lo")
    if "hi" in named:
        dual_hi[ihi] = dual("hi")
    dm = named.get("margin")
    dc = named.get("cost")
    res = FormulationResult(
        status=prob.status, x=xv, objective=qp.value(xv), dual_lo=dual_lo, dual_hi=dual_hi,
        dual_rows=dual("rows", 0), solver=solver,
        dual_margin=None if dm is None else max(float(dm.dual_value), 0.0))
    return replace(res, dual_cost=None if dc is None else max(float(dc.dual_value), 0.0))


def solve_relaxed_costs(qp: HedgeQP) -> FormulationResult:
    """Continuous optimum of ``qp`` with its cost terms (minimum trade dropped) and duals."""
    return _solve(qp, integer=False)


def solve_scip_costs(qp: HedgeQP, *, time_limit: float | None = None) -> FormulationResult:
    """Whole-contract optimum of ``qp`` with costs and minimum trades, by SCIP."""
    kw = {} if time_limit is None else {"scip_params": {"limits/time": float(time_limit)}}
    return _solve(qp, integer=True, **kw)
