"""Cross checks of a book's trading-cost keys (``[costs]`` and the instruments' cost keys).

Each problem raises :class:`~data_adapters.errors.InputError` naming the book key at fault:
a spread given both in price units and in ticks, ticks without a tick value, an impact term
without ADV, a cost budget or a no-trade rule when every cost is zero, both a price of risk and
a budget. Negative costs and spreads are refused by the schema itself (``ge=0``).
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from pydantic import BaseModel, ConfigDict, Field

from basiswise.data_adapters.errors import InputError

if TYPE_CHECKING:
    from basiswise.data_adapters.book import Book, Instrument

__all__ = ["CostSpec", "check_costs", "has_cost_model"]


class CostSpec(BaseModel):
    """``[costs]``: how trading cost enters the hedge problem (see :mod:`optimizer.problem.costs`).

    ``price_of_risk``: book currency the desk is willing to pay in trading cost to raise the
    variance reduction by one percentage point (of the unhedged variance); the problem then
    minimises hedged variance plus cost at that price. ``budget``: the most the trades may cost
    (book currency); the problem minimises variance under it. Give one or neither (then cost is
    only reported). ``no_trade_ratio``: a line is left alone unless trading it, on its own from
    the current book, removes at least this much P&L std (currency) per unit of its cost
    (currency). ``min_trade``: smallest trade in contracts on any line (0 or at least this).
    """

    model_config = ConfigDict(extra="forbid", frozen=True, strict=True, allow_inf_nan=False)

    price_of_risk: float | None = Field(None, gt=0.0, le=1e15)
    budget: float | None = Field(None, gt=0.0, le=1e15)
    no_trade_ratio: float | None = Field(None, gt=0.0, le=1e15)
    min_trade: int | None = Field(None, ge=1)
    frontier_points: int = Field(9, ge=2, le=60)


def _line_has_cost(inst: Instrument) -> bool:
    return bool(inst.cost_per_contract > 0 or (inst.spread or 0) > 0
                or ((inst.spread_ticks or 0) > 0 and (inst.tick_value or 0) > 0)
                or (inst.impact_coefficient or 0) > 0)


def has_cost_model(book: Book) -> bool:
    """Whether any instrument carries a nonzero cost term."""
    return any(_line_has_cost(i) for i in book.instruments)


def check_costs(book: Book, source: str) -> None:
    """Raise InputError naming the key when the cost keys of ``book`` do not fit together."""
    for inst in book.instruments:
        where = f"instrument {inst.id!r}"
        if inst.spread is not None and inst.spread_ticks is not None:
            raise InputError("give the spread either in price units (spread) or in ticks "
                             "(spread_ticks with tick_value), not both", file=source,
                             key=f"{where}.spread_ticks")
        if inst.spread_ticks is not None and inst.tick_value is None:
            raise InputError("spread_ticks needs tick_value (currency per tick per contract)",
                             file=source, key=f"{where}.tick_value")
        if (inst.impact_coefficient or 0) > 0 and not inst.adv:
            raise InputError("the impact term needs adv (contracts per day, > 0) of this line",
                             file=source, key=f"{where}.impact_coefficient")
        if inst.last_trade is not None and book.book.as_of is not None \
                and inst.last_trade < book.book.as_of:
            raise InputError(f"last trading day {inst.last_trade} is before the book's as_of "
                             f"{book.book.as_of}", file=source, key=f"{where}.last_trade")
    spec = book.costs
    if spec.price_of_risk is not None and spec.budget is not None:
        raise InputError("give either price_of_risk or budget, not both", file=source,
                         key="costs.budget")
    any_cost = has_cost_model(book)
    if spec.budget is not None and not any_cost:
        raise InputError("a cost budget needs a cost model: every instrument's "
                         "cost_per_contract, spread and impact_coefficient are zero or missing",
                         file=source, key="costs.budget")
    if spec.no_trade_ratio is not None and not any_cost:
        raise InputError("the no-trade rule compares risk removed with cost, but every "
                         "instrument's costs are zero or missing", file=source,
                         key="costs.no_trade_ratio")
    if spec.price_of_risk is not None and not any_cost:
        raise InputError("a price of risk needs a cost model: every instrument's costs are "
                         "zero or missing", file=source, key="costs.price_of_risk")
