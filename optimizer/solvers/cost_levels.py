"""Trading-cost arrays of the whole-contract search (one table of cost values per level).

The cost of a line is a convex function of its own position only, so on the levels of
:mod:`optimizer.solvers.search` (the contract counts, permuted) each level ``i`` gets a table of
``cost_i(v)`` for the whole values ``v = lo_i … hi_i`` of its finite box. The search adds
``w · cost_i(v)`` to ``φ_i`` (``w`` = :attr:`RootData.cw`, the same weight the root bound used
for ``ψ̲_i``), adds ``cost`` to a leaf's objective when the cost is priced in, cuts each level's
range to the values that keep the cost budget given the cheapest cost of the levels below, and
steps over the values a minimum trade size forbids (``0 < |v − current| < m``). Lattice levels
mix contract counts and do not carry costs.
"""

from __future__ import annotations

import math

import numpy as np

__all__ = ["cost_levels", "NO_COST", "next_left", "next_right", "allowed_min", "cost_weight",
           "psi_min_costs", "cost_limit"]

_TOL = 1e-9

NO_COST = dict(has_c=False, ctab=np.zeros(1), coff=np.zeros(1, dtype=np.int64), cw=0.0, ow=0.0,
               has_cb=False, cbudget=0.0, crest=np.zeros(1), ctol=0.0,
               c0=np.zeros(1, dtype=np.int64), mt=np.ones(1, dtype=np.int64))


def cost_levels(qp, root, perm: np.ndarray) -> dict:
    """The cost arrays of one search, in level order (``NO_COST`` without trading cost)."""
    ct = getattr(qp, "cost", None)
    if ct is None:
        return dict(NO_COST)
    if root.X is not None:
        raise ValueError("lattice levels do not carry trading costs")
    n = qp.n
    lo = np.asarray(root.lo).astype(np.int64)
    hi = np.asarray(root.hi).astype(np.int64)
    tabs, offs, mins = [], np.zeros(n, dtype=np.int64), np.zeros(n)
    at = 0
    for i in range(n):
        tab = ct.table(int(perm[i]), int(lo[i]), int(hi[i]))
        tabs.append(tab)
        offs[i] = at
        at += len(tab)
        mins[i] = float(tab.min()) if len(tab) else 0.0
    has_cb = ct.budget is not None
    budget = float(ct.budget) if has_cb else 0.0
    return dict(has_c=True, ctab=np.concatenate(tabs) if tabs else np.zeros(1), coff=offs,
                cw=float(root.cw), ow=1.0 if ct.in_objective else 0.0, has_cb=has_cb,
                cbudget=budget, crest=np.concatenate([[0.0], np.cumsum(mins)[:-1]]),
                ctol=_TOL * (1.0 + budget),
                c0=np.rint(np.asarray(ct.current, float)[perm]).astype(np.int64),
                mt=np.asarray(ct.min_trade, dtype=np.int64)[perm])


def next_left(m: int, c: int, v: int) -> int:
    """The next value below ``v`` that a minimum trade ``m`` from ``c`` allows."""
    w = v - 1
    if m > 1:
        if c < w < c + m:
            w = c
        elif c - m < w < c:
            w = c - m
    return w


def next_right(m: int, c: int, v: int) -> int:
    """The next value above ``v`` that a minimum trade ``m`` from ``c`` allows."""
    w = v + 1
    if m > 1:
        if c - m < w < c:
            w = c
        elif c < w < c + m:
            w = c + m
    return w


def allowed_min(m: int, c: int, s: int, L: int, U: int, fn):
    """``(v, fn(v))``: minimiser of a convex ``fn`` over the allowed whole values of [L, U],
    walking from near ``s`` (``(None, inf)`` when none is allowed). A convex function restricted
    to the allowed values is unimodal in their order, so descent finds the minimum."""
    if not (m <= 1 or s == c or abs(s - c) >= m):
        cands = [v for v in (next_left(m, c, s), next_right(m, c, s)) if L <= v <= U]
        if not cands:
            return None, math.inf
        s = min(cands, key=fn)
    ps = fn(s)
    for step in (next_left, next_right):
        while True:
            v = step(m, c, s)
            if not L <= v <= U:
                break
            pv = fn(v)
            if pv >= ps:
                break
            s, ps = v, pv
    return s, ps


def cost_weight(qp, mu_cost: float | None) -> float:
    """Weight of the cost terms in ψ: 1 when priced into the objective, the budget's multiplier
    in the budget form, 0 without costs."""
    if qp.cost is None:
        return 0.0
    if qp.cost.in_objective:
        return 1.0
    return max(float(mu_cost or 0.0), 0.0) if qp.cost.budget is not None else 0.0


def psi_min_costs(qp, slope, absw, z, lo, hi, cw) -> np.ndarray:
    """min over whole ``v`` in the box of ``slope (v − z) + absw |v| + cw cost(v)`` per line
    (−inf on an unlimited box)."""
    out = np.full(qp.n, -np.inf)
    for j in range(qp.n):
        if not (np.isfinite(lo[j]) and np.isfinite(hi[j])):
            continue
        v = np.arange(lo[j], hi[j] + 1.0)
        vals = slope[j] * (v - z[j]) + absw[j] * np.abs(v)
        if cw > 0:
            vals = vals + cw * qp.cost.table(j, lo[j], hi[j])
        out[j] = float(vals.min())
    return out


def cost_limit(qp, f_inc: float) -> float | None:
    """Most one line's cost can be at a point that beats ``f_inc`` or meets the cost budget."""
    if qp.cost is None:
        return None
    if qp.cost.in_objective:
        return f_inc - float(getattr(qp, "offset", 0.0))  # the variance part is ≥ offset
    return qp.cost.budget
