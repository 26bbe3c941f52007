"""What the proposed trades cost, next to the risk they remove (plain data for JSON and tables).

Units and signs: every cost is in the book currency and is ≥ 0 (a payment, whichever the side);
``risk_removed_std`` = horizon P&L std with today's positions minus the std after the trades
(> 0 when the trades lower risk); ``std_removed_per_cost`` is that figure per unit of cost.
"""

from __future__ import annotations

import math

import numpy as np

from ..problem.model import HedgeModel

__all__ = ["trading_cost_summary", "cost_mode"]


def cost_mode(book) -> str:
    """``"price-of-risk"``, ``"budget"`` or ``"report-only"``."""
    if book.costs.price_of_risk is not None:
        return "price-of-risk"
    if book.costs.budget is not None:
        return "budget"
    return "report-only"


def trading_cost_summary(model: HedgeModel, x: np.ndarray) -> dict | None:
    """Cost of moving from ``model.current`` to ``x``: per line and total, fixed/spread/impact.

    Returns None when the book has no cost model (every cost key zero or missing).
    """
    costs = model.costs
    if costs is None or not costs.any:
        return None
    x = np.asarray(x, dtype=float)
    trade = x - model.current
    parts = costs.parts(trade)
    lines = []
    for j, ins in enumerate(model.book.instruments):
        f, s, i = (float(parts[k][j]) for k in ("fixed", "spread", "impact"))
        t = float(trade[j])
        lines.append({"id": ins.id, "trade": int(t) if t.is_integer() else t, "fixed": f,
                      "spread": s,
                      "impact": i, "total": f + s + i})
    total = {k: float(parts[k].sum()) for k in ("fixed", "spread", "impact")}
    cost_total = sum(total.values())
    std_now = math.sqrt(model.variance(model.current))
    std_after = math.sqrt(model.variance(x))
    removed = std_now - std_after
    book = model.book
    return {
        "mode": cost_mode(book),
        "price_of_risk": book.costs.price_of_risk,
        "budget": book.costs.budget,
        "no_trade_ratio": book.costs.no_trade_ratio,
        "lines": lines,
        "fixed": total["fixed"], "spread": total["spread"], "impact": total["impact"],
        "total": cost_total,
        "std_before_trades": std_now,
        "std_after_trades": std_after,
        "risk_removed_std": removed,
        "std_removed_per_cost": removed / cost_total if cost_total > 0 else None,
        "variance_points_removed": 100.0 * (model.variance(model.current) - model.variance(x))
        / model.variance0,
    }
