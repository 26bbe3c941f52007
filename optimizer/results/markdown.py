"""A hedge report as a Markdown document for the hedge file (what was decided, on what basis)."""

from __future__ import annotations

import math
from datetime import UTC, datetime

from .report import HedgeReport


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
    out = [f"# Hedge report — {r.book}", "",
           f"Generated {now:%Y-%m-%d %H:%M} UTC from `{source}`." if source else
           f"Generated {now:%Y-%m-%d %H:%M} UTC.", ""]
    shrink = "" if r.shrinkage is None else f", shrinkage intensity {r.shrinkage:.3f}"
    out += ["## Summary", "", _table(["measure", "value"], [
        ["method / status", f"{r.method} / {r.status}"],
        ["covariance", f"{r.estimator}{shrink}; {r.observations} observations of {r.changes} "
                       f"{h}-day changes ({r.sampling})"],
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
                       [[i.id, f"{i.current:g}", f"{i.target:g}", f"{i.trade:g}", i.side,
                         _m(i.notional), _m(i.margin), i.binding or ""]
                        for i in r.instruments]), ""]
        out += ["## Exposures", "",
                "Quantity negative = must buy. Risk = Euler contribution to the P&L std.", "",
                _table(["exposure", "series", "quantity", f"value {cur}",
                        f"risk before {cur}", f"risk after {cur}"],
                       [[e.id, e.series, f"{e.quantity:,.0f} {e.unit}", _m(e.value),
                         _m(e.risk_before), _m(e.risk_after)] for e in r.exposures]), ""]
        binding = [x for x in r.limits if x.binding]
        if binding:
            out += ["## Binding limits", "",
                    "Shadow price: hedged P&L std removed per extra unit of limit "
                    "(continuous relaxation).", "",
                    _table(["limit", "kind", f"shadow price {cur}", "per"],
                           [[x.name, x.kind, _m(x.shadow), x.unit] for x in binding]), ""]
    if r.notes:
        out += ["## Notes", ""] + [f"- {n}" for n in r.notes] + [""]
    out += ["## Cautions", ""] + [f"- {c}" for c in r.cautions] + [""]
    return "\n".join(out)
