"""Tables for the trading side of a hedge: cost of the trades, frontier, schedule.

Built as :class:`~.render.Grid` so that every figure shows whole at any console width.
"""

from __future__ import annotations

from rich.console import Console

from .render import Column, Grid, show
from .tables import money, num

__all__ = ["print_execution"]


def cost_table(r) -> Grid | None:
    tc = r.trading_cost
    if tc is None:
        return None
    cur = r.currency
    t = Grid(f"Cost of the trades ({cur}, estimated; mode {tc['mode']})",
             [Column("instrument", "left"), Column("trade"), Column("fixed"), Column("spread"),
              Column("impact"), Column("total")])
    for ln in tc["lines"]:
        if ln["trade"] == 0:
            continue
        t.add_row(ln["id"], num(ln["trade"]), money(ln["fixed"], "", 2),
                  money(ln["spread"], "", 2), money(ln["impact"], "", 2),
                  money(ln["total"], "", 2))
    t.sections.add(len(t.rows) - 1)
    t.add_row("all trades", "", money(tc["fixed"], "", 2), money(tc["spread"], "", 2),
              money(tc["impact"], "", 2), money(tc["total"], "", 2))
    per = tc["std_removed_per_cost"]
    t.caption = (f"risk removed by the trades: std {money(tc['std_before_trades'], cur)} → "
                 f"{money(tc['std_after_trades'], cur)} ({money(tc['risk_removed_std'], cur)}, "
                 f"{tc['variance_points_removed']:.1f} points of variance reduction); "
                 f"{'—' if per is None else f'{per:,.1f}'} {cur} of std removed per {cur} of "
                 "cost")
    if tc["price_of_risk"] is not None:
        t.caption += (f"; price of risk {money(tc['price_of_risk'], cur)} per point of "
                      "variance reduction")
    return t


def frontier_table(r) -> Grid | None:
    if not r.cost_frontier:
        return None
    cur = r.currency
    t = Grid("Risk–cost frontier (▶ = the book's setting)",
             [Column("setting", "left"), Column(f"cost {cur}"), Column(f"hedged std {cur}"),
              Column("contracts"), Column("share of unhedged std", "left", wrap=True)])
    for p in r.cost_frontier:
        share = p["hedged_std"] / r.unhedged_std if r.unhedged_std > 0 else 0.0
        mark = "▶ " if p["chosen"] else "  "
        t.add_row(mark + p["label"], money(p["cost"]), money(p["hedged_std"]),
                  str(p["contracts"]), "█" * max(1, round(20 * share)))
    return t


def schedule_table(r) -> Grid | None:
    s = r.schedule
    if s is None or not s["needed"]:
        return None
    t = Grid(f"Execution schedule: {s['days']} days at the participation caps (contracts per "
             "day; book std at the end of each day)",
             [Column("day"), Column("trades", "left", wrap=True),
              Column(f"book std {r.currency}")])
    for d, std in enumerate(s["std_end_of_day"], start=1):
        legs = [f"{x['side']} {x['contracts']} {x['instrument']}" for x in s["rows"]
                if x["day"] == d]
        t.add_row(str(d), ", ".join(legs) or "—", money(std))
    return t


def print_execution(r, console: Console) -> None:
    """Cost, frontier and schedule tables of a report (those that apply)."""
    show(console, [g for g in (cost_table(r), frontier_table(r), schedule_table(r))
                   if g is not None])
