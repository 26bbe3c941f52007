"""A hedge report as a Markdown document for the hedge file (what was decided, on what basis).

Every text that comes from the user (book name, ids, series, units, file names, notes) goes
through :func:`md_text`: it cannot start a line, close a table cell, open a link or emphasis, or
carry an HTML tag into the rendered page.
"""

from __future__ import annotations

import html
import math
import re
from datetime import UTC, datetime

from .report import HedgeReport

_CONTROL = re.compile(r"[\x00-\x1f\x7f-\x9f]")
_MD_SPECIAL = re.compile(r"([\\`*_\[\]{}|#~!])")


def md_text(value: object) -> str:
    r"""``value`` as inert Markdown text: one line, markup escaped, ``& < >`` as HTML entities.

    Examples
    --------
    >>> print(md_text("a|b <x>"))
    a\|b &lt;x&gt;
    """
    text = _CONTROL.sub(" ", str(value))
    text = html.escape(text, quote=False)
    return _MD_SPECIAL.sub(r"\\\1", text)


def _m(v: float | None, cur: str = "") -> str:
    if v is None or not math.isfinite(v):
        return "—"
    return f"{_n(v, 0)} {cur}".strip()


def _p(v: float | None) -> str:
    return "—" if v is None or not math.isfinite(v) else f"{100 * v:.1f} %"


def _table(header: list[str], rows: list[list[str]]) -> str:
    lines = ["| " + " | ".join(header) + " |", "|" + "---|" * len(header)]
    lines += ["| " + " | ".join(r) + " |" for r in rows]
    return "\n".join(lines)


def _n(v: float, digits: int) -> str:
    s = f"{v:,.{digits}f}"
    return "0" if float(s.replace(",", "")) == 0 else s


def _positions(r: HedgeReport) -> list[str]:
    cur = r.currency
    digits = 2 if r.method == "continuous" else 0
    rows = [[md_text(i.id), _n(i.current, digits), _n(i.target, digits), _n(i.trade, digits),
             i.side, _m(i.target_notional), _m(i.target_margin), _m(i.margin_change),
             md_text(i.on_limit)]
            for i in r.instruments]
    return ["## Futures positions", "",
            "Contracts; negative = short. Trade = target − current. Target notional and target "
            "margin are those of the position after the trade; margin change is what the trade "
            "adds to the margin of the current position.", "",
            _table(["instrument", "current", "target", "trade", "side", f"target notional {cur}",
                    f"target margin {cur}", f"margin change {cur}", "on limit"], rows), ""]


def _exposures(r: HedgeReport) -> list[str]:
    """Exposure rows, the futures row and the book row: risk after adds up to the hedged std."""
    cur = r.currency
    rows = [[md_text(e.id), md_text(e.series), md_text(f"{_n(e.quantity, 0)} {e.unit}"),
             _m(e.value),
             _m(e.standalone_std), _m(e.risk_before), _m(e.risk_after)] for e in r.exposures]
    legs = sum(i.risk_contribution for i in r.instruments)
    rows.append(["futures, all lines", "", "", "", "", _m(0.0), _m(legs)])
    rows.append(["**book**", "", "", "", "", _m(r.unhedged_std), _m(r.hedged_std)])
    return ["## Exposures", "",
            "Quantity negative = must buy. Risk = Euler contribution to the P&L std; the rows "
            "add up to the book row.", "",
            _table(["exposure", "series", "quantity", f"value {cur}", f"alone std {cur}",
                    f"risk before {cur}", f"risk after {cur}"], rows), ""]


def to_markdown(r: HedgeReport, *, source: str = "", now: datetime | None = None) -> str:
    """Render ``r`` as Markdown: summary, positions, exposures, binding limits, notes, cautions."""
    now = now or datetime.now(UTC)
    cur, h = r.currency, r.horizon_days
    out = [f"# Hedge report — {md_text(r.book)}", "",
           f"Generated {now:%Y-%m-%d %H:%M} UTC from {md_text(source)}." if source else
           f"Generated {now:%Y-%m-%d %H:%M} UTC.", ""]
    shrink = "" if r.shrinkage is None else f", shrinkage intensity {r.shrinkage:.3f}"
    budget = "none" if r.margin_budget is None else _m(r.margin_budget, cur)
    overrides = md_text(", ".join(f"{k} = {v}" for k, v in sorted(r.overrides.items()))
                        or "none")
    whole = "fractional (method continuous, for analysis only)" if r.method == "continuous" \
        else "whole contracts"
    out += ["## Summary", "", _table(["measure", "value"], [
        ["method / status", md_text(f"{r.method} / {r.status} ({whole})")],
        ["decision date (as_of)", r.as_of or "not set: the last price date"],
        ["last price date used", r.price_date or "—"],
        ["estimator", f"{r.estimator}{shrink}"],
        ["covariance data", f"{r.observations} observations of {r.changes} {h}-day changes "
                            f"({r.sampling})"],
        ["overrides of the book", overrides],
        [f"unhedged P&L std over {h} days", _m(r.unhedged_std, cur)],
        [f"hedged P&L std over {h} days", _m(r.hedged_std, cur)],
        ["continuous relaxation (lower bound)", _m(r.relaxed_hedged_std, cur)],
        ["basis-risk floor (no limits)", _m(r.basis_floor_std, cur)],
        ["variance reduction", _p(r.variance_reduction)],
        ["VaR 95 % (normal, loss) unhedged → hedged",
         f"{_m(r.var95_unhedged, cur)} → {_m(r.var95_hedged, cur)}"],
        ["VaR 99 % (normal, loss) unhedged → hedged",
         f"{_m(r.var99_unhedged, cur)} → {_m(r.var99_hedged, cur)}"],
        ["initial margin of the targets", _m(r.margin_used, cur)],
        ["margin budget", budget],
    ]), ""]
    if r.ok:
        out += _positions(r) + _exposures(r)
        binding = [x for x in r.limits if x.binding]
        if binding:
            out += ["## Binding limits", "",
                    "Shadow price: hedged P&L std removed per extra unit of limit "
                    "(continuous relaxation).", "",
                    _table(["limit", "kind", f"shadow price {cur}", "per"],
                           [[md_text(x.name), md_text(x.kind), _m(x.shadow), md_text(x.unit)]
                            for x in binding]), ""]
    if r.warnings:
        out += ["## Warnings", ""] + [f"- {md_text(w)}" for w in r.warnings] + [""]
    from .cost_markdown import execution_sections

    out += execution_sections(r)
    if r.notes:
        out += ["## Notes", ""] + [f"- {md_text(n)}" for n in r.notes] + [""]
    out += ["## Cautions", ""] + [f"- {c}" for c in r.cautions] + [""]
    return "\n".join(out)
