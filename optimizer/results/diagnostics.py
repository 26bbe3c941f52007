"""What a hedge does to the book: risk before and after, limits that bind and what they cost.

- Standard deviation of the horizon P&L, ``σ = sqrt(yᵀ Σ$ y)`` (currency).
- Variance reduction (hedging effectiveness, Ederington 1979): ``1 − σ²_hedged / σ²_unhedged``.
- Normal VaR at confidence α: ``z_α σ`` with a zero mean (a loss, shown positive).
- Euler risk contributions (Tasche 1999): for a component with series loading ``w``,
  ``RC = wᵀ Σ$ y / σ``; contributions add up to ``σ``.
- Shadow price of a limit from the continuous relaxation's dual ``λ`` (normalised objective):
  relaxing the limit by one contract lowers hedged variance by ``λ v₀`` and the hedged standard
  deviation by about ``λ v₀ / (2 σ_relaxed)`` (currency per contract).

References
----------
Ederington, L. H. (1979), Journal of Finance 34(1), 157–170.
Tasche, D. (1999), "Risk contributions and performance measurement", TU München working paper.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.stats import norm

from ..problem.model import HedgeModel
from ..solvers.dispatch import HedgeSolution

Z95, Z99 = float(norm.ppf(0.95)), float(norm.ppf(0.99))
DUAL_TOL = 1e-7
SHADOW_ZERO = 0.005  # a shadow price below half a cent of currency is shown and written as 0


@dataclass(frozen=True)
class InstrumentLine:
    id: str
    series: str
    contract_month: str
    current: int | float    # contracts held now (int; float only for method continuous)
    target: int | float     # contracts after the trade (int unless method continuous)
    trade: int | float      # target − current
    side: str               # BUY / SELL / HOLD, from the trade as shown
    price: float
    target_notional: float  # target × contract value, currency, sign of the position
    trade_notional: float   # |trade| × contract value, currency
    target_margin: float    # |target| × initial margin per contract, currency
    margin_change: float    # target margin − margin of the current position, currency
    adv_share: float | None  # |trade| / ADV
    days_to_execute: float | None  # |trade| / (participation × ADV)
    limit_use: float | None  # |target| / the position limit on its side
    on_limit: str           # which limit the target sits on ("" if none)
    shadow: float           # σ reduction per extra contract of that limit, currency (relaxation)
    risk_contribution: float  # Euler contribution to hedged σ, currency


@dataclass(frozen=True)
class ExposureLine:
    id: str
    series: str
    quantity: float
    unit: str
    value: float            # quantity × current price, currency (negative = must buy)
    standalone_std: float   # σ of this exposure alone, currency
    risk_before: float      # Euler contribution to unhedged σ, currency
    risk_after: float       # Euler contribution to hedged σ, currency


@dataclass(frozen=True)
class LimitLine:
    name: str
    kind: str
    binding: bool           # binds in the continuous relaxation
    shadow: float           # σ reduction per unit of relaxation, currency per `unit`
    unit: str


def side_of(trade: float, digits: int = 0) -> str:
    """BUY / SELL / HOLD of ``trade`` as it is shown, rounded to ``digits`` decimals."""
    shown = round(float(trade), digits)
    return "BUY" if shown > 0 else "SELL" if shown < 0 else "HOLD"


def whole(v: float) -> int | float:
    """``v`` as an int when it is a whole count (within solver round-off), else unchanged."""
    r = round(float(v))
    return int(r) if abs(float(v) - r) <= 1e-6 else float(v)


def contributions(model: HedgeModel, x: np.ndarray) -> tuple[np.ndarray, np.ndarray, float]:
    """Euler contributions of exposures and instruments to σ at positions ``x``."""
    y = model.position(x)
    sigma = math.sqrt(max(float(y @ model.cov @ y), 0.0))
    if sigma <= 0:
        return np.zeros(len(model.E)), np.zeros(len(model.C)), 0.0
    g = model.cov @ y / sigma
    return model.E @ g, (model.C @ g) * x, sigma


def _shadow_std(dual: float, model: HedgeModel, relaxed_var: float) -> float:
    s = math.sqrt(max(relaxed_var, 0.0))
    v = 0.0 if s <= 0 or dual <= 0 else dual * model.variance0 / (2 * s)
    return v if v >= SHADOW_ZERO else 0.0


def instrument_lines(model: HedgeModel, sol: HedgeSolution) -> list[InstrumentLine]:
    x = sol.x
    qp, rel = model.qp, sol.relaxed
    relaxed_var = (rel.objective or 0.0) * model.variance0
    value = model.value_per_contract()
    _, rc, _ = contributions(model, x)
    fractional = sol.method == "continuous"
    lines = []
    for j, ins in enumerate(model.book.instruments):
        cur = float(model.current[j])
        tgt = float(x[j]) if fractional else whole(x[j])
        trade = float(x[j] - model.current[j]) if fractional else whole(tgt - cur)
        adv = ins.adv
        on_hi = x[j] >= qp.hi[j] - 1e-6 and math.isfinite(qp.hi[j])
        on_lo = x[j] <= qp.lo[j] + 1e-6 and math.isfinite(qp.lo[j])
        on_limit, dual = "", 0.0
        if on_hi:
            on_limit, dual = f"{model.sources.hi[j]} (max)", float(rel.dual_hi[j])
        elif on_lo:
            on_limit, dual = f"{model.sources.lo[j]} (min)", float(rel.dual_lo[j])
        pmin, pmax = ins.bounds()
        cap = pmax if x[j] > 0 else -pmin
        lines.append(InstrumentLine(
            id=ins.id, series=ins.series, contract_month=ins.contract_month or "",
            current=cur if fractional else whole(cur), target=tgt, trade=trade,
            side=side_of(trade, 2 if fractional else 0),
            price=float(model.prices[model.series.index(ins.series)]),
            target_notional=float(tgt * value[j]), trade_notional=abs(trade) * float(value[j]),
            target_margin=abs(float(tgt)) * float(ins.margin),
            margin_change=(abs(float(tgt)) - abs(cur)) * float(ins.margin),
            adv_share=abs(trade) / adv if adv else None,
            days_to_execute=abs(trade) / (ins.max_participation * adv) if adv else None,
            limit_use=abs(float(x[j])) / cap if math.isfinite(cap) and cap > 0 else None,
            on_limit=on_limit, shadow=_shadow_std(dual, model, relaxed_var),
            risk_contribution=float(rc[j]),
        ))
    return lines


def exposure_lines(model: HedgeModel, x: np.ndarray) -> list[ExposureLine]:
    before, _, _ = contributions(model, np.zeros(len(model.C)))
    after, _, _ = contributions(model, x)
    values = model.exposure_values()
    out = []
    for i, e in enumerate(model.book.exposures):
        w = model.E[i]
        out.append(ExposureLine(
            id=e.id, series=e.series, quantity=float(e.quantity), unit=e.unit,
            value=float(values[i]), standalone_std=math.sqrt(max(float(w @ model.cov @ w), 0.0)),
            risk_before=float(before[i]), risk_after=float(after[i]),
        ))
    return out


def limit_lines(model: HedgeModel, sol: HedgeSolution) -> list[LimitLine]:
    """Instrument bounds, group limits and the margin budget with relaxation shadow prices."""
    rel, qp = sol.relaxed, model.qp
    relaxed_var = (rel.objective or 0.0) * model.variance0
    out = []
    for j, name in enumerate(qp.names):
        for side, duals, source in (("max", rel.dual_hi, model.sources.hi),
                                    ("min", rel.dual_lo, model.sources.lo)):
            d = float(duals[j]) if duals is not None else 0.0
            if d > DUAL_TOL:
                out.append(LimitLine(f"{name} {side}", source[j], True,
                                     _shadow_std(d, model, relaxed_var), "contract"))
    if rel.dual_rows is not None:
        for i, name in enumerate(qp.row_names):
            d = float(rel.dual_rows[i]) if i < len(rel.dual_rows) else 0.0
            if name.startswith("no over-hedge"):
                # rows are normalised by the exposures' value: quote per 1 % of that value
                on = d > DUAL_TOL
                out.append(LimitLine(name, "no over-hedge", on,
                                     _shadow_std(d / 100, model, relaxed_var) if on else 0.0,
                                     "1 % of the group's exposure value"))
            else:
                on = d > DUAL_TOL
                out.append(LimitLine(name, "group limit", on,
                                     _shadow_std(d, model, relaxed_var) if on else 0.0,
                                     "contract"))
    if qp.margin_budget is not None and rel.dual_margin is not None:
        budget = float(model.book.constraints.margin_budget)
        # the dual is per whole budget (normalised to 1); quote it per 100,000 of currency
        d = rel.dual_margin * 1e5 / budget
        on = rel.dual_margin > DUAL_TOL
        out.append(LimitLine("margin budget", "margin", on,
                             _shadow_std(d, model, relaxed_var) if on else 0.0,
                             f"100,000 {model.book.book.currency} of budget"))
    return out
