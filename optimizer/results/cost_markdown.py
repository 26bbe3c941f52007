"""Markdown sections of the hedge report for trading cost, the frontier and the schedule."""

from __future__ import annotations

__all__ = ["execution_sections"]


def _t(value: object) -> str:
    """User text (ids, labels) made inert in Markdown, as in the main report."""
    from .markdown import md_text

    return md_text(value)


def _m(v, cur: str = "", digits: int = 0) -> str:
    return "—" if v is None else f"{v:,.{digits}f} {cur}".strip()


def _table(head: list[str], rows: list[list[str]]) -> str:
    lines = ["| " + " | ".join(head) + " |", "| " + " | ".join("---" for _ in head) + " |"]
    lines += ["| " + " | ".join(r) + " |" for r in rows]
    return "\n".join(lines)


def execution_sections(r) -> list[str]:
    """Lines of the cost, frontier and schedule sections (empty when they do not apply)."""
    cur, out = r.currency, []
    tc = r.trading_cost
    if tc is not None:
        rows = [[_t(ln["id"]), f"{ln['trade']:g}", _m(ln["fixed"], "", 2), _m(ln["spread"], "", 2),
                 _m(ln["impact"], "", 2), _m(ln["total"], "", 2)]
                for ln in tc["lines"] if ln["trade"] != 0]
        rows.append(["all trades", "", _m(tc["fixed"], "", 2), _m(tc["spread"], "", 2),
                     _m(tc["impact"], "", 2), _m(tc["total"], "", 2)])
        out += ["## Cost of the trades", "",
                f"Estimated, {cur}, ≥ 0 whichever the side (mode {_t(tc['mode'])}). The trades "
                f"take the horizon P&L std from {_m(tc['std_before_trades'], cur)} to "
                f"{_m(tc['std_after_trades'], cur)}.", "",
                _table(["instrument", "trade", "fixed", "spread", "impact", "total"], rows), ""]
    if r.cost_frontier:
        out += ["## Risk–cost frontier", "", "Chosen setting marked ▶.", "",
                _table(["setting", f"cost {cur}", f"hedged std {cur}", "contracts"],
                       [[("▶ " if p["chosen"] else "") + _t(p["label"]), _m(p["cost"]),
                         _m(p["hedged_std"]), str(p["contracts"])] for p in r.cost_frontier]), ""]
    s = r.schedule
    if s is not None and s["needed"]:
        rows = [[str(x["day"]), _t(x["instrument"]), x["side"], str(x["contracts"]),
                 str(x["daily_cap"] if x["daily_cap"] is not None else "—"),
                 _m(x["book_std_end_of_day"])] for x in s["rows"]]
        out += ["## Execution schedule", "",
                f"{s['days']} days at the participation caps; book std at the end of each day.",
                "", _table(["day", "instrument", "side", "contracts", "daily cap",
                            f"book std {cur}"], rows), ""]
    return out
