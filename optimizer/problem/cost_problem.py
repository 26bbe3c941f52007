"""The book's trading-cost settings turned into the normalised problem's cost terms and limits.

- ``[costs] price_of_risk = P`` (currency per percentage point of variance reduction): objective
  ``f(x) + cost(x) / (100 P)``. One unit of P tells the desk: "we pay up to P of commission,
  spread and impact to remove 1 % of the unhedged variance".
- ``[costs] budget = B`` (currency): ``cost(x) ≤ B``, variance minimised under it.
- ``min_trade`` (book-wide in ``[costs]`` or per instrument): a line trades 0 or at least that.
- ``no_trade_ratio = θ`` (currency of P&L std per currency of cost): a line may trade ``t``
  contracts only if that trade alone, from the positions held now, removes at least
  ``θ · cost(t)`` of horizon P&L std. ``σ(x₀ + t e_j)`` is convex in ``t`` and the cost is
  convex, so ``σ(x₀) − σ(x₀ + t e_j) − θ cost(t)`` is concave and zero at ``t = 0``: the trades
  that pass form an interval around 0, and the rule is the exact box ``x₀ + [t⁻, t⁺]`` (found by
  walking out from 0 until the first trade that fails). It judges each line on its own; a
  spread of two months that only removes risk together is frozen by it.
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np

from .cost_terms import CostTerms
from .costs import CostModel
from .qp import HedgeQP

__all__ = ["cost_terms_of", "no_trade_box", "min_trades"]

_MAX_WALK = 100_000


def min_trades(book) -> np.ndarray:
    """Minimum trade size per line (1 where none is set)."""
    default = book.costs.min_trade or 1
    return np.array([int(i.min_trade or default) for i in book.instruments], dtype=np.int64)


def cost_terms_of(book, costs: CostModel | None, current: np.ndarray) -> CostTerms | None:
    """The normalised cost terms of ``book``, or None when cost only is reported."""
    spec = book.costs
    mt = min_trades(book)
    if costs is None:
        return None
    priced = spec.price_of_risk is not None
    budget = spec.budget is not None
    if not (priced or budget or np.any(mt > 1)):
        return None
    if priced:
        scale, rhs = 1.0 / (100.0 * float(spec.price_of_risk)), None
    elif budget:
        scale, rhs = 1.0 / float(spec.budget), 1.0
    else:  # a minimum trade size alone: no cost term, only the disjunctive constraint
        scale, rhs = 0.0, None
    return CostTerms(current=np.asarray(current, float), lin=costs.linear * scale,
                     imp=costs.impact * scale, in_objective=not budget, budget=rhs,
                     min_trade=mt, to_currency=1.0 / scale if scale > 0 else 1.0)


def _walk(f0, g, a, offset_std, theta, cost_of, limit: float, sign: int) -> int:
    """Largest whole ``k ≥ 0`` with every trade ``sign·1 … sign·k`` passing the rule."""
    k = 0
    s0 = offset_std * math.sqrt(max(f0, 0.0))
    while k < limit and k < _MAX_WALK:
        t = sign * (k + 1)
        s1 = offset_std * math.sqrt(max(f0 + 2 * t * g + t * t * a, 0.0))
        if s0 - s1 < theta * cost_of(abs(t)):
            break
        k += 1
    return k


def no_trade_box(qp: HedgeQP, costs: CostModel, theta: float, current: np.ndarray,
                 unhedged_std: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Bounds ``(lo, hi, frozen)`` of the no-trade rule intersected with ``qp``'s box.

    Lines whose current position lies outside the box keep the box (the rule needs the held
    position as its start); ``frozen`` marks lines the rule leaves with no trade at all.
    """
    x0 = np.asarray(current, float)
    g = qp.A @ x0 + qp.b
    f0 = qp.variance(x0)
    lo, hi = qp.lo.copy(), qp.hi.copy()
    frozen = np.zeros(qp.n, dtype=bool)
    for j in range(qp.n):
        if not (lo[j] <= x0[j] <= hi[j]):
            continue

        def cost_of(a, j=j):
            return costs.linear[j] * a + costs.impact[j] * a ** 1.5

        up = _walk(f0, g[j], qp.A[j, j], unhedged_std, theta, cost_of, hi[j] - x0[j], 1)
        dn = _walk(f0, g[j], qp.A[j, j], unhedged_std, theta, cost_of, x0[j] - lo[j], -1)
        lo[j], hi[j] = max(lo[j], x0[j] - dn), min(hi[j], x0[j] + up)
        frozen[j] = up == 0 and dn == 0
    return lo, hi, frozen


def apply_costs(qp: HedgeQP, book, costs: CostModel | None, current: np.ndarray,
                unhedged_std: float, sources) -> tuple[HedgeQP, object]:
    """``qp`` with the book's cost terms and no-trade box; ``sources`` names the rule's bounds."""
    if costs is None:
        return qp, sources
    terms = cost_terms_of(book, costs, current)
    theta = book.costs.no_trade_ratio
    if theta is not None:
        lo, hi, _ = no_trade_box(qp, costs, float(theta), current, unhedged_std)
        slo, shi = list(sources.lo), list(sources.hi)
        for j in range(qp.n):
            if lo[j] > qp.lo[j]:
                slo[j] = "no-trade rule"
            if hi[j] < qp.hi[j]:
                shi[j] = "no-trade rule"
        qp = replace(qp, lo=lo, hi=hi)
        sources = replace(sources, lo=tuple(slo), hi=tuple(shi))
    return replace(qp, cost=terms), sources
