"""Rich tables for the trading side of a hedge: cost of the trades, frontier, schedule."""

from __future__ import annotations

from rich.console import Console
from rich.table import Table

from .tables import money, num

__all__ = ["print_execution"]


def cost_table(r) -> Table | None:
    tc = r.trading_cost
    if tc is None:
        return None
    cur = r.currency
    t = Table(title=f"Cost of the trades ({cur}, estimated; mode {tc['mode']})",
              title_justify="left")
    t.add_column("instrument", no_wrap=True)
    for c in ("trade", "fixed", "spread", "impact", "total"):
        t.add_column(c, justify="right")
    for ln in tc["lines"]:
        if ln["trade"] == 0:
            continue
        t.add_row(ln["id"], num(ln["trade"]), money(ln["fixed"], "", 2),
                  money(ln["spread"], "", 2), money(ln["impact"], "", 2),
                  money(ln["total"], "", 2))
    t.add_row("[bold]all trades[/]", "", money(tc["fixed"], "", 2), money(tc["spread"], "", 2),
              money(tc["impact"], "", 2), f"[bold]{money(tc['total'], '', 2)}[/]",
              end_section=True)
    per = tc["std_removed_per_cost"]
    t.caption = (f"risk removed by the trades: std {money(tc['std_before_trades'], cur)} → "
                 f"{money(tc['std_after_trades'], cur)} ({money(tc['risk_removed_std'], cur)}, "
                 f"{tc['variance_points_removed']:.1f} points of variance reduction); "
                 f"{'—' if per is None else f'{per:,.1f}'} {cur} of std removed per {cur} of "
                 "cost")
    if tc["price_of_risk"] is not None:
        t.caption += (f"; price of risk {money(tc['price_of_risk'], cur)} per point of "
                      "variance reduction")
    t.caption_justify = "left"
    return t


def frontier_table(r) -> Table | None:
    if not r.frontier:
        return None
    cur = r.currency
    t = Table(title="Risk–cost frontier (▶ = the book's setting)", title_justify="left")
    t.add_column("setting", no_wrap=True)
    t.add_column(f"cost {cur}", justify="right")
    t.add_column(f"hedged std {cur}", justify="right")
    t.add_column("contracts", justify="right")
    t.add_column("hedged std (bar = share of unhedged)", no_wrap=True)
    for p in r.frontier:
        share = p["hedged_std"] / r.unhedged_std if r.unhedged_std > 0 else 0.0
        mark = "▶ " if p["chosen"] else "  "
        t.add_row(mark + p["label"], money(p["cost"]), money(p["hedged_std"]),
                  str(p["contracts"]), "█" * max(1, round(40 * share)))
    return t


def schedule_table(r) -> Table | None:
    s = r.schedule
    if s is None or not s["needed"]:
        return None
    t = Table(title=f"Execution schedule: {s['days']} days at the participation caps "
                    "(contracts per day; book std at the end of each day)", title_justify="left")
    t.add_column("day", justify="right")
    t.add_column("trades")
    t.add_column(f"book std {r.currency}", justify="right")
    for d, std in enumerate(s["std_end_of_day"], start=1):
        legs = [f"{x['side']} {x['contracts']} {x['instrument']}" for x in s["rows"]
                if x["day"] == d]
        t.add_row(str(d), ", ".join(legs) or "—", money(std))
    return t


def print_execution(r, console: Console) -> None:
    """Cost, frontier and schedule tables of a report (those that apply)."""
    for table in (cost_table(r), frontier_table(r), schedule_table(r)):
        if table is not None:
            console.print(table)
