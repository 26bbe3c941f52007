"""The risk–cost frontier: hedged std against trading cost over a range of prices of risk.

Prices of risk from P/512 to P (``frontier_points − 2`` steps, geometric) and 4 P, 16 P; budgets
from B/8 to 8 B.

Each point re-solves the book's whole-contract hedge with another price of risk (or, in the
budget form, another cost budget) on the same covariance and limits. The ends are "no trade"
(today's positions, zero cost) and "risk only" (cost ignored). The book's own setting is marked
as the chosen point.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from basiswise.data_adapters.output import atomic_path

from ..problem.model import HedgeModel, with_limits
from ..results.cost_report import cost_mode
from ..solvers.dispatch import solve_qp

__all__ = ["FrontierPoint", "cost_frontier", "frontier_table_rows", "write_cost_frontier_png"]


@dataclass(frozen=True)
class FrontierPoint:
    """One point: the setting, the hedged std (currency) and the trades' cost (currency)."""

    label: str
    price_of_risk: float | None
    budget: float | None
    hedged_std: float
    cost: float
    contracts: int
    status: str
    chosen: bool

    def to_dict(self) -> dict:
        return dict(self.__dict__)


def _settings(model: HedgeModel) -> list[tuple[str, float | None, float | None, bool]]:
    spec = model.book.costs
    k = spec.frontier_points
    mode = cost_mode(model.book)
    if mode == "budget":
        base = float(spec.budget)
        fr = np.geomspace(1 / 8, 8, k)
        return [(f"budget {b:,.0f}", None, float(b), bool(abs(f - 1) < 1e-9))
                for f, b in zip(fr, base * fr, strict=True)]
    base = float(spec.price_of_risk) if mode == "price-of-risk" else 1000.0
    # most of the risk is cheap to remove: reach far below the chosen price, a little above it
    fr = np.concatenate([np.geomspace(1 / 512, 1, max(k - 2, 2)), [4.0, 16.0]])
    return [(f"price {p:,.0f}", float(p), None, bool(mode == "price-of-risk" and abs(f - 1) < 1e-9))
            for f, p in zip(fr, base * fr, strict=True)]


def _point(model, label, por, budget, chosen, time_limit) -> FrontierPoint | None:
    spec = model.book.costs.model_copy(update={"price_of_risk": por, "budget": budget})
    book = model.book.model_copy(update={"costs": spec})
    qp = with_limits(model, book).qp
    sol = solve_qp(qp, "exact", time_limit=time_limit, start=model.current)
    if not sol.ok:
        return None
    x = np.asarray(sol.x, float)
    trade = x - model.current
    return FrontierPoint(label, por, budget, math.sqrt(model.variance(x)),
                         model.costs.total(trade), int(np.abs(trade).sum()), sol.status, chosen)


def cost_frontier(model: HedgeModel, *, time_limit: float = 5.0) -> list[FrontierPoint]:
    """Points from no trade to risk only, through the book's range of prices of risk."""
    if model.costs is None or not model.costs.any:
        return []
    cur = model.current
    pts = [FrontierPoint("no trade", None, None, math.sqrt(model.variance(cur)), 0.0, 0,
                         "held", False)]
    for label, por, budget, chosen in _settings(model):
        p = _point(model, label, por, budget, chosen, time_limit)
        if p is not None:
            pts.append(p)
    p = _point(model, "risk only", None, None, cost_mode(model.book) == "report-only",
               time_limit)
    if p is not None:
        pts.append(p)
    return pts


def frontier_table_rows(points: list[FrontierPoint], unhedged_std: float) -> list[list[str]]:
    """Rows of the terminal table, with a bar for the hedged std (share of unhedged)."""
    rows = []
    for p in points:
        bar = "█" * max(1, round(30 * p.hedged_std / unhedged_std)) if unhedged_std > 0 else ""
        rows.append([("▶ " if p.chosen else "  ") + p.label, f"{p.cost:,.0f}",
                     f"{p.hedged_std:,.0f}", str(p.contracts), bar])
    return rows


def write_cost_frontier_png(points: list[FrontierPoint], path: str | Path, *,
                            currency: str = "", unhedged_std: float | None = None) -> Path:
    """Hedged std against trading cost, chosen point marked; written atomically as PNG."""
    import matplotlib

    matplotlib.use("Agg", force=True)
    from matplotlib.figure import Figure

    fig = Figure(figsize=(7.5, 4.5), dpi=110)
    ax = fig.add_subplot(1, 1, 1)
    pts = sorted(points, key=lambda p: p.cost)
    ax.plot([p.cost for p in pts], [p.hedged_std for p in pts], marker="o", label="hedge")
    for p in pts:
        if p.chosen:
            ax.plot([p.cost], [p.hedged_std], marker="*", markersize=16, color="red",
                    linestyle="none", label=f"chosen: {p.label}")
    if unhedged_std is not None:
        ax.axhline(unhedged_std, color="grey", linestyle="--", label="unhedged")
    ax.set_xlabel(f"trading cost of the trades ({currency})".replace(" ()", ""))
    ax.set_ylabel(f"hedged P&L std over the horizon ({currency})".replace(" ()", ""))
    ax.set_ylim(bottom=0)
    ax.set_title("Risk–cost frontier")
    ax.grid(True, alpha=0.3)
    ax.legend(fontsize=8)
    fig.text(0.01, 0.01, "Estimates from price history and a cost model; not a forecast.",
             fontsize=7, color="grey")
    fig.tight_layout()
    with atomic_path(path) as tmp:
        fig.savefig(tmp, format="png")
    return Path(path)
