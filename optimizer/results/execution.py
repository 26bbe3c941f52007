"""Attach the execution side to a hedge report: schedule, frontier, provenance, desk fields."""

from __future__ import annotations

from dataclasses import replace

import numpy as np

from ..problem.model import HedgeModel
from ..solvers.dispatch import HedgeSolution
from .provenance import provenance
from .report import HedgeReport
from .schedule import execution_schedule, schedule_rows

__all__ = ["execution_fields"]


def _desk(book, last_price_date=None) -> dict:
    """Per line: symbol and exchange from the book; last trading day from the book's
    ``last_trade``, else from the expiries file of a rolled book (the contract held now)."""
    from basiswise.data_adapters.held_contracts import held_contracts

    held = held_contracts(book, last_price_date)
    lines = []
    for ins in book.instruments:
        contract, last = held.get(ins.series, (None, None))
        if ins.last_trade is not None:
            last = str(ins.last_trade)
        lines.append({"id": ins.id, "symbol": ins.symbol, "exchange": ins.exchange,
                      "contract": contract, "last_trade": last})
    return {"lines": lines}


def execution_fields(rep: HedgeReport, model: HedgeModel, sol: HedgeSolution, *,
                     frontier: bool = False, time_limit: float = 5.0,
                     last_price_date=None) -> HedgeReport:
    """``rep`` with schedule (whole-contract answers), frontier (if asked) and provenance."""
    upd: dict = {"provenance": provenance(model.book, last_price_date),
                 "desk": _desk(model.book, last_price_date)}
    if sol.ok and sol.method != "continuous":
        plan = execution_schedule(model, np.asarray(sol.x, float))
        caps = plan["caps"]
        upd["schedule"] = {
            "days": plan["days"], "needed": plan["needed"],
            "std_end_of_day": plan["std_end_of_day"],
            "caps_by_id": {i: float(c) for i, c in zip(model.instrument_ids, caps, strict=True)},
            "rows": schedule_rows(model, plan),
        }
    if frontier and sol.ok:
        from ..sweeps.cost_frontier import cost_frontier

        upd["cost_frontier"] = [p.to_dict() for p in cost_frontier(model, time_limit=time_limit)]
    return replace(rep, **upd)
