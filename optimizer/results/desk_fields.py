"""Columns of the trade list that the execution desk needs beyond the trade itself.

Per line: exchange symbol and exchange (free text from the book), the contract held now and its
last trading day (rolled books, from the expiries file; ``last_trade`` in the book wins), the
estimated cost of the trade split into fixed, spread and impact (book currency, ≥ 0) and the
days it needs at the participation cap. On every row: the as-of date, SHA-256 of the book file
and of the price data, and the tool version.
"""

from __future__ import annotations

import math

import pandas as pd

__all__ = ["add_desk_columns", "schedule_frame"]


def add_desk_columns(report, frame: pd.DataFrame) -> pd.DataFrame:
    """``frame`` (one row per traded instrument) with the desk columns appended."""
    cur = report.currency
    meta = report.desk or {}
    costs = {}
    if report.trading_cost is not None:
        costs = {ln["id"]: ln for ln in report.trading_cost["lines"]}
    caps = {} if report.schedule is None else report.schedule.get("caps_by_id", {})
    extra = []
    for inst in frame["instrument"] if len(frame) else []:
        ln = costs.get(inst, {})
        m = next((x for x in meta.get("lines", []) if x["id"] == inst), {})
        cap = caps.get(inst)
        contracts = int(frame.loc[frame["instrument"] == inst, "contracts"].iloc[0])
        extra.append({
            "symbol": m.get("symbol"), "exchange": m.get("exchange"),
            "contract": m.get("contract"), "last_trade": m.get("last_trade"),
            f"cost_fixed_{cur}": round(ln.get("fixed", 0.0), 2),
            f"cost_spread_{cur}": round(ln.get("spread", 0.0), 2),
            f"cost_impact_{cur}": round(ln.get("impact", 0.0), 2),
            f"cost_total_{cur}": round(ln.get("total", 0.0), 2),
            "days_at_cap": None if cap is None or not math.isfinite(cap)
            else math.ceil(contracts / cap),
        })
    cols = ["symbol", "exchange", "contract", "last_trade", f"cost_fixed_{cur}",
            f"cost_spread_{cur}", f"cost_impact_{cur}", f"cost_total_{cur}", "days_at_cap"]
    out = pd.concat([frame.reset_index(drop=True), pd.DataFrame(extra, columns=cols)], axis=1)
    prov = report.provenance or {}
    for key in ("as_of", "book_sha256", "prices_sha256", "tool_version"):
        out[key] = prov.get(key)
    return out


def schedule_frame(report) -> pd.DataFrame:
    """The execution schedule file: one row per day and instrument traded that day."""
    cols = ["day", "instrument", "side", "contracts", "position_end_of_day", "daily_cap",
            "book_std_end_of_day"]
    rows = [] if report.schedule is None else report.schedule["rows"]
    frame = pd.DataFrame(rows, columns=cols)
    prov = report.provenance or {}
    frame["as_of"] = prov.get("as_of")
    return frame
