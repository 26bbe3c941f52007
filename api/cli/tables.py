"""Rich tables for a hedge report. Every figure carries its unit; none shows NaN."""

from __future__ import annotations

import math
from typing import TYPE_CHECKING

from rich.console import Console
from rich.panel import Panel

from .render import Column, Grid, show, text

if TYPE_CHECKING:  # the report module pulls in the solvers; tables only need its shape
    from basiswise.optimizer.results.report import HedgeReport


def _fixed(v: float, digits: int) -> str:
    """``v`` with thousands separators; a value that rounds to zero is ``0``, never ``-0``."""
    s = f"{v:,.{digits}f}"
    return "0" if float(s.replace(",", "")) == 0 else s


def money(v: float | None, cur: str = "", digits: int = 0) -> str:
    if v is None or not math.isfinite(v):
        return "—"
    return f"{_fixed(v, digits)} {cur}".strip()


def pct(v: float | None, digits: int = 1) -> str:
    return "—" if v is None or not math.isfinite(v) else f"{_fixed(100 * v, digits)} %"


def num(v: float | None, digits: int = 0) -> str:
    return "—" if v is None or not math.isfinite(v) else _fixed(v, digits)


def summary_table(r: HedgeReport) -> Grid:
    cur, h = r.currency, r.horizon_days
    t = Grid(f"Hedge summary — {r.book}", [Column("what", "left", wrap=True, style="bold"),
                                            Column("value", "right", wrap=True)],
             show_header=False)
    t.add_row("method / status", f"{r.method} / {r.status}")
    if r.method == "continuous":
        t.add_row("contracts", "fractional (method continuous, for analysis only)")
    shrink = "" if r.shrinkage is None else f", shrinkage {r.shrinkage:.3f}"
    t.add_row("covariance", f"{r.estimator}{shrink}, {r.observations} obs ({r.changes}, "
                            f"{r.sampling})")
    dates = f"prices to {r.price_date}" if r.price_date else ""
    if r.as_of:
        dates = f"as of {r.as_of}, " + dates
    if dates:
        t.add_row("decision date", dates)
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
        t.add_row("initial margin of the targets", money(r.margin_used, cur) + budget)
    t.add_row("solve time", f"{r.solve_seconds:.2f} s")
    return t


SIDE_STYLE = {"BUY": "green", "SELL": "red", "HOLD": "dim"}


def instrument_table(r: HedgeReport) -> Grid:
    cur = r.currency
    digits = 2 if r.method == "continuous" else 0
    unit = "fractional contracts" if digits else "contracts"
    t = Grid(f"Futures positions ({unit}; negative = short)",
             [Column("instrument", "left")]
             + [Column(n) for n in ("now", "target", "trade", "side", f"target notional {cur}",
                                    f"target margin {cur}", f"margin change {cur}", "% ADV",
                                    "% limit")]
             + [Column("on limit", "left", wrap=True)])
    for i in r.instruments:
        t.add_row(i.id, num(i.current, digits), num(i.target, digits), num(i.trade, digits),
                  text(i.side, SIDE_STYLE[i.side]), money(i.target_notional),
                  money(i.target_margin), money(i.margin_change), pct(i.adv_share, 2),
                  pct(i.limit_use, 0), i.on_limit)
    return t


def exposure_table(r: HedgeReport) -> Grid:
    cur = r.currency
    t = Grid("Exposures (quantity negative = must buy; risk = Euler share of P&L std)",
             [Column("exposure", "left"), Column("series", "left"), Column("quantity")]
             + [Column(n) for n in (f"value {cur}", f"alone std {cur}", f"risk before {cur}",
                                    f"risk after {cur}")])
    for e in r.exposures:
        t.add_row(e.id, e.series, f"{num(e.quantity)} {e.unit}", money(e.value),
                  money(e.standalone_std), money(e.risk_before), money(e.risk_after))
    legs = sum(i.risk_contribution for i in r.instruments)
    t.add_row(text("futures, all lines", "dim"), "", "", "", "", money(0.0), money(legs),
              end_section=True)
    t.add_row(text("book", "bold"), "", "", "", "", money(r.unhedged_std), money(r.hedged_std))
    return t


def limits_table(r: HedgeReport) -> Grid | None:
    rows = [x for x in r.limits if x.binding]
    if not rows:
        return None
    t = Grid("Binding limits (continuous optimum; shadow price = hedged std removed per "
             "extra unit)", [Column("limit", "left", wrap=True), Column("kind", "left"),
                             Column(f"shadow price {r.currency}"),
                             Column("per", "left", wrap=True)])
    for x in rows:
        t.add_row(x.name, x.kind, money(x.shadow), x.unit)
    return t


def cautions_panel(r) -> Panel:
    """The cautions of any result that carries them (``r.cautions``), or a list of lines."""
    lines = r if isinstance(r, list | tuple) else r.cautions
    body = text("\n".join(f"• {c}" for c in lines))
    return Panel(body, title="Cautions", border_style="yellow")


def note(console: Console, line: str, prefix: str = "note: ") -> None:
    """One dim line of plain text (never read as markup)."""
    console.print(text(prefix + line, "dim"))


def print_report(r: HedgeReport, console: Console) -> None:
    show(console, summary_table(r))
    if r.ok:
        show(console, [instrument_table(r), exposure_table(r)])
        lt = limits_table(r)
        if lt is not None:
            show(console, lt)
    for w in r.warnings:
        console.print(text("warning: " + w, "yellow"))
    for n in r.notes:
        note(console, n)
    console.print(cautions_panel(r))
