"""Stress P&L of a book: explicit price shocks and the worst historical horizon move.

With ``E`` (exposures × k) and ``C`` (instruments × k) the loadings of the book on its ``k`` price
series (quantities in each series' price unit, see :mod:`optimizer.model`), ``n`` the futures
positions in contracts and ``dP`` a vector of price moves in each series' price unit, the P&L of
the book over the move is linear (currency; a loss is negative)::

    unhedged = (Eᵀ1) · dP
    hedged   = (Eᵀ1 + Cᵀn) · dP

Explicit shocks are given in percent of today's price, ``dP_s = pct_s / 100 × P_s``; series not
named do not move. The historical replay applies each horizon window of the price history to
today's prices — ``dP = P_now × (P[t+h] / P[t] − 1)`` for relative and log changes,
``dP = P[t+h] − P[t]`` for absolute changes — and picks the window with the lowest P&L of the
chosen position (historical simulation, a full-revaluation stress for a linear book).
The history is the one known today: rolled series are back-adjusted with every roll up to the
last date and end at the real prices of the contracts held. A replay as of a past date must
take :meth:`data_adapters.prices.PricePanel.as_of` of that date, not a slice of today's levels.

References
----------
Jorion, P. (2007), *Value at Risk*, 3rd ed., McGraw-Hill, ch. 10 (historical simulation) and
ch. 14 (stress testing).
Basel Committee on Banking Supervision (2009), "Principles for sound stress testing practices
and supervision" (historical scenarios).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from ..estimation.changes import horizon_changes
from ..problem.model import book_position

__all__ = ["HistoricalMoves", "StressPnL", "historical_moves", "shock_vector", "stress_pnl",
           "worst_window"]


@dataclass(frozen=True)
class StressPnL:
    """P&L of one price move, unhedged and hedged (currency, loss negative)."""

    label: str
    unhedged: float
    hedged: float

    @property
    def hedge_pnl(self) -> float:
        """P&L of the futures alone."""
        return self.hedged - self.unhedged

    def to_dict(self) -> dict:
        return {"label": self.label, "unhedged": self.unhedged, "hedged": self.hedged,
                "futures": self.hedge_pnl}


@dataclass(frozen=True)
class HistoricalMoves:
    """Every overlapping horizon window of a price history, as moves at today's prices.

    ``moves`` is (T × k) in price units; ``end_dates`` the last day of each window.
    """

    series: list[str]
    moves: np.ndarray
    end_dates: pd.DatetimeIndex
    horizon_days: int


def shock_vector(series: list[str], prices: np.ndarray, pct: dict[str, float]) -> np.ndarray:
    """Price moves ``dP_s = pct_s / 100 × P_s`` in each series' price unit (0 if not named).

    Names not in ``series`` are ignored (a declared series the book does not use cannot move
    its P&L).
    """
    prices = np.asarray(prices, dtype=float)
    out = np.zeros(len(series))
    pos = {s: i for i, s in enumerate(series)}
    for name, p in pct.items():
        if name in pos:
            out[pos[name]] = float(p) / 100.0 * prices[pos[name]]
    return out


def stress_pnl(E: np.ndarray, C: np.ndarray, n: np.ndarray, dP: np.ndarray,
               label: str = "") -> StressPnL:
    """Unhedged ``(Eᵀ1)·dP`` and hedged ``(Eᵀ1 + Cᵀn)·dP`` P&L of a price move (currency)."""
    dP = np.asarray(dP, dtype=float)
    e = book_position(E, C, np.zeros(np.shape(C)[0]))
    return StressPnL(label, float(e @ dP), float(book_position(E, C, n) @ dP))


def historical_moves(prices: pd.DataFrame, *, horizon_days: int, kind: str) -> HistoricalMoves:
    """All overlapping ``horizon_days`` windows of ``prices`` as moves at today's price level.

    Parameters
    ----------
    prices : DataFrame
        Aligned price panel (rows = days, columns = series), the whole history.
    horizon_days : int
        Window length in rows.
    kind : {"relative", "log", "absolute"}
        The book's change kind: relative and log windows are applied as percentage moves to
        today's prices, absolute windows as price differences.
    """
    ch = horizon_changes(prices, horizon_days=horizon_days, kind=kind, sampling="overlapping")
    if kind == "absolute":
        moves = ch.values.copy()
    else:
        rel = np.expm1(ch.values) if kind == "log" else ch.values
        moves = rel * ch.last_prices[None, :]
    return HistoricalMoves(list(ch.columns), moves, ch.end_dates, int(horizon_days))


def worst_window(hist: HistoricalMoves, y: np.ndarray) -> tuple[int, np.ndarray, str]:
    """The window with the lowest P&L ``y·dP`` of series position ``y``.

    Returns the row, its move vector and a label naming the window's dates.
    """
    pnl = hist.moves @ np.asarray(y, dtype=float)
    t = int(np.argmin(pnl))
    end = hist.end_dates[t].date()
    return t, hist.moves[t], f"worst {hist.horizon_days}-day window of the history, ending {end}"
