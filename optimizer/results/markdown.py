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
    return f"{v:,.0f} {cur}".strip()


def _p(v: float | None) -> str:
    return "—" if v is None or not math.isfinite(v) else f"{100 * v:.1f} %"


def _table(header: list[str], rows: list[list[str]]) -> str:
    lines = ["| " + " | ".join(header) + " |", "|" + "---|" * len(header)]
    lines += ["| " + " | ".join(r) + " |" for r in rows]
    return "\n".join(lines)


def to_markdown(r: HedgeReport, *, source: str = "", now: datetime | None = None) -> str:
    """Render ``r`` as Markdown: summary, positions, exposures, binding limits, notes, cautions."""
    now = now or datetime.now(UTC)
    cur, h = r.currency, r.horizon_days
    out = [f"# Hedge report — {md_text(r.book)}", "",
           f"Generated {now:%Y-%m-%d %H:%M} UTC from {md_text(source)}." if source else
           f"Generated {now:%Y-%m-%d %H:%M} UTC.", ""]
    shrink = "" if r.shrinkage is None else f", shrinkage intensity {r.shrinkage:.3f}"
    out += ["## Summary", "", _table(["measure", "value"], [
        ["method / status", md_text(f"{r.method} / {r.status}")],
        ["covariance", md_text(f"{r.estimator}{shrink}; {r.observations} observations of "
                               f"{r.changes} {h}-day changes ({r.sampling})")],
        [f"unhedged P&L std over {h} days", _m(r.unhedged_std, cur)],
        [f"hedged P&L std over {h} days", _m(r.hedged_std, cur)],
        ["continuous relaxation (lower bound)", _m(r.relaxed_hedged_std, cur)],
        ["basis-risk floor (no limits)", _m(r.basis_floor_std, cur)],
        ["variance reduction", _p(r.variance_reduction)],
        ["VaR 95 % (normal, loss) unhedged → hedged",
         f"{_m(r.var95_unhedged, cur)} → {_m(r.var95_hedged, cur)}"],
        ["VaR 99 % (normal, loss) unhedged → hedged",
         f"{_m(r.var99_unhedged, cur)} → {_m(r.var99_hedged, cur)}"],
        ["initial margin used", _m(r.margin_used, cur)],
    ]), ""]
    if r.ok:
        out += ["## Futures positions", "",
                "Contracts; negative = short. Trade = target − current.", "",
                _table(["instrument", "current", "target", "trade", "side", f"notional {cur}",
                        f"margin {cur}", "on limit"],
                       [[md_text(i.id), f"{i.current:g}", f"{i.target:g}", f"{i.trade:g}", i.side,
                         _m(i.notional), _m(i.margin), md_text(i.binding or "")]
                        for i in r.instruments]), ""]
        out += ["## Exposures", "",
                "Quantity negative = must buy. Risk = Euler contribution to the P&L std.", "",
                _table(["exposure", "series", "quantity", f"value {cur}",
                        f"risk before {cur}", f"risk after {cur}"],
                       [[md_text(e.id), md_text(e.series), md_text(f"{e.quantity:,.0f} {e.unit}"),
                         _m(e.value),
                         _m(e.risk_before), _m(e.risk_after)] for e in r.exposures]), ""]
        binding = [x for x in r.limits if x.binding]
        if binding:
            out += ["## Binding limits", "",
                    "Shadow price: hedged P&L std removed per extra unit of limit "
                    "(continuous relaxation).", "",
                    _table(["limit", "kind", f"shadow price {cur}", "per"],
                           [[md_text(x.name), md_text(x.kind), _m(x.shadow), md_text(x.unit)]
                            for x in binding]), ""]
    if r.notes:
        out += ["## Notes", ""] + [f"- {md_text(n)}" for n in r.notes] + [""]
    out += ["## Cautions", ""] + [f"- {c}" for c in r.cautions] + [""]
    return "\n".join(out)
