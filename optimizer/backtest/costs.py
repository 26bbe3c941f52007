"""Trading cost in the backtest: each rebalance's cost, net-of-cost figures, the cost-aware hedge.

At each rebalance date the cost model of :mod:`optimizer.problem.costs` is rebuilt from what is
known then (current prices, daily volatility of the trailing window) and applied to every
strategy's trade, so strategies are compared net of the same costs. ``joint-whole-cost`` is the
joint whole-contract hedge with the book's ``[costs]`` setting (price of risk or budget) in the
problem; ``joint-whole`` and ``joint-continuous`` ignore it (variance only).

Net of cost: with ``c_t ≥ 0`` the cost paid at rebalance ``t`` and ``h_t`` the gross hedged
horizon P&L, the net P&L is ``h_t − c_t``; its spread is measured around the gross mean,
``E[(h − c − mean h)²] = Var(h − c) + mean(c)²``, so the average cost counts as a loss and not
only its variation, and net VR = 1 − that / Var(unhedged). Turnover is the traded notional
(currency, |trade| × contract value at the date) summed over the rebalances.
"""

from __future__ import annotations

import numpy as np

from basiswise.data_adapters.book import Book, CostSpec
from basiswise.data_adapters.errors import InputError

from ..problem.costs import cost_model, daily_volatility

__all__ = ["COST_STRATEGY", "DateCosts", "book_for", "check_cost_strategy", "net_figures"]

COST_STRATEGY = "joint-whole-cost"


def check_cost_strategy(book: Book, strategies) -> None:
    """The cost-aware strategy needs a cost setting in the book (InputError naming the key)."""
    if COST_STRATEGY in strategies and book.costs.price_of_risk is None \
            and book.costs.budget is None:
        raise InputError(f"strategy {COST_STRATEGY!r} needs [costs] price_of_risk or budget",
                         file=book.source, key="costs.price_of_risk")


def book_for(book: Book, strategy: str) -> Book:
    """The book a joint strategy solves: with its cost setting only for the cost-aware one."""
    if strategy == COST_STRATEGY:
        return book
    return book.model_copy(update={"costs": CostSpec()})


class DateCosts:
    """Cost coefficients of every rebalance date (currency), filled as the backtest walks."""

    def __init__(self, book: Book, C: np.ndarray, series: list[str], rows: int) -> None:
        n = len(book.instruments)
        self.book, self.C, self.series = book, C, series
        self.lin, self.imp = np.zeros((rows, n)), np.zeros((rows, n))
        self.value = np.zeros((rows, n))  # notional of one contract at the date
        self.impact = any((i.impact_coefficient or 0) > 0 for i in book.instruments)

    def vol(self, hist, window: int):
        """Daily volatility of the trailing history (None when no line has an impact term)."""
        return daily_volatility(hist, window) if self.impact else None

    def record(self, r: int, prices: np.ndarray, vol) -> None:
        cm = cost_model(self.book, self.C, prices, self.series, vol)
        self.lin[r], self.imp[r] = cm.linear, cm.impact
        self.value[r] = self.C @ prices

    def of(self, trades: np.ndarray) -> np.ndarray:
        """Cost paid at each rebalance for a run's trades (R,), currency."""
        a = np.abs(trades)
        return (self.lin * a + self.imp * a ** 1.5).sum(axis=1)

    def turnover(self, trades: np.ndarray) -> float:
        return float((np.abs(trades) * np.abs(self.value)).sum())


def net_figures(hedged: np.ndarray, costs: np.ndarray, var_un: float) -> tuple[float, float]:
    """``(net VR, net std)`` of a run (see the module docstring)."""
    dev = hedged - costs - hedged.mean()
    second = float(np.mean(dev ** 2)) * len(dev) / max(len(dev) - 1, 1)
    return 1.0 - second / var_un, float(np.sqrt(second))
