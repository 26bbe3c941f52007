"""Rich tables for a hedge report. Every figure carries its unit; none shows NaN."""

from __future__ import annotations

import math
from typing import TYPE_CHECKING

from rich.console import Console
from rich.panel import Panel
from rich.table import Table

if TYPE_CHECKING:  # the report module pulls in the solvers; tables only need its shape
    from basiswise.optimizer.results.report import HedgeReport


def money(v: float | None, cur: str = "", digits: int = 0) -> str:
    if v is None or not math.isfinite(v):
        return "—"
    s = f"{v:,.{digits}f}"
    return f"{s} {cur}".strip()


def pct(v: float | None, digits: int = 1) -> str:
    return "—" if v is None or not math.isfinite(v) else f"{100 * v:.{digits}f} %"


def num(v: float | None, digits: int = 0) -> str:
    return "—" if v is None or not math.isfinite(v) else f"{v:,.{digits}f}"


def summary_table(r: HedgeReport) -> Table:
    cur, h = r.currency, r.horizon_days
    t = Table(title=f"Hedge summary — {r.book}", show_header=False, title_justify="left")
    t.add_column("what", style="bold")
    t.add_column("value", justify="right")
    t.add_row("method / status", f"{r.method} / {r.status}")
    shrink = "" if r.shrinkage is None else f", shrinkage {r.shrinkage:.3f}"
    t.add_row("covariance", f"{r.estimator}{shrink}, {r.observations} obs ({r.changes}, "
                            f"{r.sampling})")
    t.add_row(f"unhedged P&L std over {h} d", money(r.unhedged_std, cur))
    t.add_row(f"hedged P&L std over {h} d", money(r.hedged_std, cur))
    t.add_row("bound: continuous relaxation std", money(r.relaxed_hedged_std, cur))
    t.add_row("cost of whole contracts (std)", money(r.rounding_cost_std, cur))
    t.add_row("basis-risk floor: best std with no limits", money(r.basis_floor_std, cur))
    t.add_row("variance reduction (hedged vs unhedged)", pct(r.variance_reduction))
    t.add_row("variance reduction bound (relaxation)", pct(r.relaxed_variance_reduction))
    t.add_row("VaR 95 % unhedged → hedged (loss)",
              f"{money(r.var95_unhedged, cur)} → {money(r.var95_hedged, cur)}")
    t.add_row("VaR 99 % unhedged → hedged (loss)",
              f"{money(r.var99_unhedged, cur)} → {money(r.var99_hedged, cur)}")
    if r.margin_used is not None:
        budget = "" if r.margin_budget is None else f" of {money(r.margin_budget, cur)}"
        t.add_row("initial margin used", money(r.margin_used, cur) + budget)
    t.add_row("solve time", f"{r.solve_seconds:.2f} s")
    return t


def instrument_table(r: HedgeReport) -> Table:
    cur = r.currency
    digits = 2 if r.method == "continuous" else 0
    t = Table(title="Futures positions (contracts; negative = short)", title_justify="left")
    t.add_column("instrument", no_wrap=True)
    for name in ["now", "target", "trade", "side", f"notional {cur}", f"margin {cur}",
                 "% ADV", "% limit", "on limit"]:
        t.add_column(name, justify="left" if name == "on limit" else "right")
    style = {"BUY": "green", "SELL": "red", "HOLD": "dim"}
    for i in r.instruments:
        t.add_row(i.id, num(i.current), num(i.target, digits), num(i.trade, digits),
                  f"[{style[i.side]}]{i.side}[/]", money(i.notional), money(i.margin),
                  pct(i.adv_share, 2), pct(i.limit_use, 0), i.binding or "")
    return t


def exposure_table(r: HedgeReport) -> Table:
    cur = r.currency
    t = Table(title="Exposures (quantity negative = must buy; risk = Euler share of P&L std)",
              title_justify="left")
    t.add_column("exposure", no_wrap=True)
    t.add_column("series", no_wrap=True)
    t.add_column("quantity", justify="right", no_wrap=True)
    for name in [f"value {cur}", f"alone std {cur}", f"risk before {cur}", f"risk after {cur}"]:
        t.add_column(name, justify="right")
    for e in r.exposures:
        t.add_row(e.id, e.series, f"{e.quantity:,.0f} {e.unit}", money(e.value),
                  money(e.standalone_std), money(e.risk_before), money(e.risk_after))
    legs = sum(i.risk_contribution for i in r.instruments)
    t.add_row("[dim]futures, all lines[/]", "", "", "", "", money(0.0), money(legs),
              end_section=True)
    t.add_row("[bold]book[/]", "", "", "", "", money(r.unhedged_std), money(r.hedged_std))
    return t


def limits_table(r: HedgeReport) -> Table | None:
    rows = [x for x in r.limits if x.binding]
    if not rows:
        return None
    t = Table(title="Binding limits (continuous optimum; shadow price = hedged std removed per "
                    "extra unit)", title_justify="left")
    t.add_column("limit", no_wrap=True)
    t.add_column("kind")
    t.add_column(f"shadow price {r.currency}", justify="right")
    t.add_column("per")
    for x in rows:
        t.add_row(x.name, x.kind, money(x.shadow), x.unit)
    return t


def cautions_panel(r) -> Panel:
    """The cautions of any result that carries them (``r.cautions``), or a list of lines."""
    lines = r if isinstance(r, list | tuple) else r.cautions
    text = "\n".join(f"• {c}" for c in lines)
    return Panel(text, title="Cautions", border_style="yellow")


def print_report(r: HedgeReport, console: Console) -> None:
    console.print(summary_table(r))
    if r.ok:
        console.print(instrument_table(r))
        console.print(exposure_table(r))
        lt = limits_table(r)
        if lt is not None:
            console.print(lt)
    for n in r.notes:
        console.print(f"[dim]note: {n}[/]")
    console.print(cautions_panel(r))
