"""The result of one hedging cycle as plain data: summary, lines, JSON and the trade list.

Units and signs: standard deviations and VaR are in the book's currency over ``horizon_days``;
VaR is a loss shown as a positive number; positions and trades are in contracts, negative = short
(SELL), whole numbers (int) unless the method is ``continuous``; ``target_notional`` carries the
sign of the position, ``trade_notional`` is the unsigned value traded; ``target_margin`` is the
initial margin of the target position and ``margin_change`` what the trade adds to (or frees
from) the margin of the current one; variance reduction is a fraction of the unhedged variance
(1 = all price risk removed).
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass, field

import numpy as np
import pandas as pd

from ..problem.model import HedgeModel
from ..solvers.dispatch import HedgeSolution
from .cautions import CAUTIONS, SAMPLING_NOTES
from .diagnostics import (
    Z95,
    Z99,
    ExposureLine,
    InstrumentLine,
    LimitLine,
    exposure_lines,
    instrument_lines,
    limit_lines,
)
from .jsonsafe import finite


@dataclass(frozen=True)
class HedgeReport:
    book: str
    currency: str
    horizon_days: int
    method: str
    status: str
    estimator: str
    estimator_detail: str
    shrinkage: float | None
    observations: int
    changes: str
    sampling: str
    unhedged_std: float
    hedged_std: float | None
    relaxed_hedged_std: float | None
    basis_floor_std: float               # lowest std any futures position reaches, no limits
    variance_reduction: float | None
    relaxed_variance_reduction: float | None
    rounding_cost_std: float | None      # hedged σ − relaxed σ, currency (≥ 0)
    var95_unhedged: float
    var99_unhedged: float
    var95_hedged: float | None
    var99_hedged: float | None
    margin_used: float | None
    margin_budget: float | None
    solve_seconds: float
    solver_detail: str
    instruments: list[InstrumentLine] = field(default_factory=list)
    exposures: list[ExposureLine] = field(default_factory=list)
    limits: list[LimitLine] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)
    cautions: tuple[str, ...] = CAUTIONS
    warnings: list[str] = field(default_factory=list)   # short history, singular covariance
    as_of: str | None = None             # decision date from [book] as_of (ISO), if set
    price_date: str | None = None        # last price date used (ISO)
    overrides: dict = field(default_factory=dict)   # settings replaced on the command line
    # trading cost and execution (results.cost_report, sweeps.cost_frontier, results.schedule)
    trading_cost: dict | None = None
    cost_frontier: list[dict] | None = None
    schedule: dict | None = None
    provenance: dict | None = None
    desk: dict | None = None              # per-line symbol, exchange, last trading day
    objective: float | None = None        # normalised objective (variance share + cost term)
    objective_bound: float | None = None  # proven lower bound on it

    @property
    def ok(self) -> bool:
        return self.hedged_std is not None

    def to_dict(self) -> dict:
        """JSON-ready dict; numbers are finite or ``None`` (never NaN)."""
        d = asdict(self)
        d["instruments"] = [
            {"id": i.id, **{k: v for k, v in asdict(i).items() if k != "id"}}
            for i in self.instruments
        ]
        return finite(d)

    def positions_frame(self) -> pd.DataFrame:
        """One row per instrument: every figure of the positions table (contracts, currency).

        Columns are the fields of :class:`~.diagnostics.InstrumentLine` with ``id`` named
        ``instrument``; counts are whole contracts except with ``method = "continuous"``.
        """
        return _frame(self.instruments, {"id": "instrument"})

    def exposures_frame(self) -> pd.DataFrame:
        """One row per exposure: quantity, value and risk before and after (currency)."""
        return _frame(self.exposures, {"id": "exposure"})

    def limits_frame(self) -> pd.DataFrame:
        """One row per limit: kind, whether it binds and its shadow price (currency per unit)."""
        return _frame(self.limits, {"name": "limit"})

    def trade_list(self) -> pd.DataFrame:
        """The execution desk's list: one row per instrument with a non-zero trade."""
        from .desk_fields import add_desk_columns

        return add_desk_columns(self, self._trade_rows())

    def _trade_rows(self) -> pd.DataFrame:
        rows = []
        for i in self.instruments:
            if i.side == "HOLD":
                continue
            rows.append({
                "instrument": i.id, "series": i.series, "contract_month": i.contract_month,
                "side": i.side, "contracts": abs(int(round(i.trade))),
                "current": int(round(i.current)), "target": int(round(i.target)),
                "reference_price": round(i.price, 6),
                f"trade_notional_{self.currency}": round(i.trade_notional, 2),
                f"target_margin_{self.currency}": round(i.target_margin, 2),
                f"margin_change_{self.currency}": round(i.margin_change, 2) + 0.0,
                "adv_share": None if i.adv_share is None else round(i.adv_share, 6),
                "days_to_execute": None if i.days_to_execute is None
                else round(i.days_to_execute, 3),
            })
        return pd.DataFrame(rows, columns=[
            "instrument", "series", "contract_month", "side", "contracts", "current", "target",
            "reference_price", f"trade_notional_{self.currency}",
            f"target_margin_{self.currency}", f"margin_change_{self.currency}",
            "adv_share", "days_to_execute"])


def _frame(lines: list, rename: dict[str, str]) -> pd.DataFrame:
    """Dataclass lines as a DataFrame (an empty list keeps no columns)."""
    return pd.DataFrame([asdict(x) for x in lines]).rename(columns=rename)


def build_report(model: HedgeModel, sol: HedgeSolution, notes: list[str] | None = None
                 ) -> HedgeReport:
    """Assemble the report of ``sol`` on ``model``."""
    book = model.book
    s0 = model.unhedged_std
    notes = list(notes or [])
    notes.append(SAMPLING_NOTES[model.changes.sampling])
    if model.estimate.method == "ewma" and model.changes.sampling != "scaled":
        notes.append("EWMA λ is meant for daily data; here it weights horizon changes")
    rel_obj = sol.relaxed.objective
    if rel_obj is not None and sol.objective is not None:
        # the relaxation's optimum is at most any feasible point's value; this removes solver
        # round-off when the whole-contract point is itself the continuous optimum
        rel_obj = min(rel_obj, sol.objective)
    rel_std = math.sqrt(max(rel_obj, 0.0)) * s0 if rel_obj is not None else None
    diag = sol
    if model.qp.cost is not None and sol.relaxed.x is not None:
        # the cost-aware relaxation's value mixes risk and cost: bound the risk on its own
        from dataclasses import replace as _replace

        from ..problem.formulation import solve_relaxed

        risk_only = solve_relaxed(_replace(model.qp, cost=None), reuse=False)
        rel_obj = risk_only.objective
        if risk_only.x is not None:  # shadow prices: risk removed per unit of limit
            diag = _replace(sol, relaxed=risk_only)
        rel_std = math.sqrt(max(rel_obj, 0.0)) * s0 if rel_obj is not None else None
    hedged = vr = cost = None
    inst, expo, limits = [], [], []
    margin_used = None
    if sol.ok:
        x = np.asarray(sol.x, dtype=float)
        hedged = math.sqrt(model.variance(x))
        vr = 1.0 - hedged**2 / s0**2
        cost = max(hedged - rel_std, 0.0) if rel_std is not None else None
        if model.qp.cost is not None:
            cost = None  # the gap to the risk-only bound is partly chosen (cost saved)
        inst = instrument_lines(model, diag)
        expo = exposure_lines(model, x)
        limits = limit_lines(model, diag)
        margin_used = float(sum(i.target_margin for i in inst))
        if sol.status == "time-limited":
            notes.append(f"whole-contract search stopped at its time limit: {sol.detail}; the "
                         "answer is feasible but not proven optimal")
    else:
        notes.append(f"no hedge: {sol.detail}")
    return HedgeReport(
        book=book.book.name, currency=book.book.currency, horizon_days=book.book.horizon_days,
        method=sol.method, status=sol.status, estimator=model.estimate.method,
        estimator_detail=model.estimate.detail, shrinkage=model.estimate.shrinkage,
        observations=model.estimate.n_obs, changes=model.changes.kind,
        sampling=model.changes.sampling, unhedged_std=s0, hedged_std=hedged,
        relaxed_hedged_std=rel_std, variance_reduction=vr,
        basis_floor_std=math.sqrt(model.qp.offset) * s0,
        relaxed_variance_reduction=1.0 - rel_obj if rel_obj is not None else None,
        rounding_cost_std=cost, var95_unhedged=Z95 * s0, var99_unhedged=Z99 * s0,
        var95_hedged=None if hedged is None else Z95 * hedged,
        var99_hedged=None if hedged is None else Z99 * hedged,
        margin_used=margin_used, margin_budget=book.constraints.margin_budget,
        solve_seconds=sol.seconds, solver_detail=sol.detail, instruments=inst, exposures=expo,
        limits=limits, notes=notes,
        **_cost_fields(model, sol),
    )


def _cost_fields(model: HedgeModel, sol: HedgeSolution) -> dict:
    """Trading cost of the answer and the objective with its bound (optional report fields)."""
    from .cost_report import trading_cost_summary

    out: dict = {"objective": sol.objective, "objective_bound": sol.bound}
    if sol.ok:
        out["trading_cost"] = trading_cost_summary(model, np.asarray(sol.x, dtype=float))
    return out
