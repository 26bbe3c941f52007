"""Trading cost of a trade, per instrument, in the book currency.

For a trade of ``t`` contracts (either side) of instrument ``j``:

    cost_j(t) = F_j |t| + S_j |t| + Y_j σ_j V_j |t| √(|t| / ADV_j)

- ``F_j``: fixed cost per contract, commission and fees (``cost_per_contract``, currency).
- ``S_j``: half the quoted bid–ask spread per contract: ``spread / 2`` (series price unit) times
  the contract's quantity in that unit, or ``spread_ticks / 2 × tick_value``. Crossing half the
  spread is what a marketable order pays against the mid price.
- Impact (square-root law): the average price move caused by an order of ``Q`` contracts is
  ``Y σ √(Q / V)`` of the price, with ``σ`` the daily volatility of the series' relative price
  changes, ``V`` the average daily volume (ADV, contracts) and ``Y`` a coefficient of order one
  (``impact_coefficient``); the cost is that move times the order's notional ``Q × V_j``, with
  ``V_j`` the notional of one contract at the current price. The whole trade is treated as one
  order; the square-root law is found to hold roughly whatever the order's duration.

Every term is zero at ``t = 0``, non-negative and convex in ``t`` (``|t|`` and ``|t|^1.5``), so
the hedge problem with costs stays convex and separable in the trades.

References
----------
Almgren, Thum, Hauptmann & Li (2005), "Direct estimation of equity market impact", Risk 18(7),
58–62 (impact grows with the square root — there, power 0.6 — of the participation; from memory).
Tóth, Lempérière, Deremble, de Lataillade, Kockelkoren & Bouchaud (2011), "Anomalous price impact
and the critical nature of liquidity in financial markets", Phys. Rev. X 1, 021006 (square-root
law ``Y σ √(Q/V)`` with ``Y`` of order one, largely independent of duration; from memory).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import pandas as pd

__all__ = ["CostModel", "cost_model", "daily_volatility"]


@dataclass(frozen=True)
class CostModel:
    """Per-instrument cost coefficients in the book currency.

    Attributes
    ----------
    fixed : ndarray (n,)
        Currency per contract traded (commission and fees).
    spread : ndarray (n,)
        Currency per contract traded (half the bid–ask spread).
    impact : ndarray (n,)
        Currency coefficient of ``|t|^1.5`` (``Y σ V_j / √ADV``).
    daily_vol : ndarray (n,)
        Daily volatility of each instrument's series (relative changes), used by the impact.
    """

    fixed: np.ndarray
    spread: np.ndarray
    impact: np.ndarray
    daily_vol: np.ndarray

    @property
    def linear(self) -> np.ndarray:
        """Currency per contract that does not depend on the trade size (fixed + spread)."""
        return self.fixed + self.spread

    @property
    def any(self) -> bool:
        """Whether any term is nonzero."""
        return bool(np.any(self.linear > 0) or np.any(self.impact > 0))

    def parts(self, trade: np.ndarray) -> dict[str, np.ndarray]:
        """Cost of each line's trade split into ``fixed``, ``spread``, ``impact`` (currency)."""
        a = np.abs(np.asarray(trade, dtype=float))
        return {"fixed": self.fixed * a, "spread": self.spread * a,
                "impact": self.impact * a ** 1.5}

    def line_costs(self, trade: np.ndarray) -> np.ndarray:
        """Total cost of each line's trade (currency)."""
        a = np.abs(np.asarray(trade, dtype=float))
        return self.linear * a + self.impact * a ** 1.5

    def total(self, trade: np.ndarray) -> float:
        """Total cost of all trades (currency)."""
        return float(self.line_costs(trade).sum())


def daily_volatility(prices: pd.DataFrame, window: int) -> pd.Series:
    """Standard deviation of daily relative price changes over the last ``window`` rows.

    Series with fewer than three usable changes get 0 (no impact can be estimated); the price
    history is validated positive before this is used with relative changes.
    """
    tail = prices.iloc[-(int(window) + 1):]
    with np.errstate(divide="ignore", invalid="ignore"):
        rel = tail.pct_change(fill_method=None).iloc[1:]
    vol = rel.std(ddof=1)
    return vol.where(np.isfinite(vol) & (rel.count() >= 3), 0.0)


def cost_model(book, C: np.ndarray, prices: np.ndarray, series: list[str],
               vol: pd.Series | None) -> CostModel:
    """The cost coefficients of ``book``'s instruments.

    Parameters
    ----------
    book : Book
        Validated book (its instruments' cost keys).
    C : ndarray (n, k)
        Contract loadings on the series (quantity of one contract in each series' price unit).
    prices : ndarray (k,)
        Current price of each series.
    series : list of str
        Series names in the column order of ``C``.
    vol : pandas.Series or None
        Daily volatility per series (:func:`daily_volatility`); ``None`` means no impact term.
    """
    n = len(book.instruments)
    col = {s: i for i, s in enumerate(series)}
    fixed, spread, impact, dvol = (np.zeros(n) for _ in range(4))
    for j, ins in enumerate(book.instruments):
        k = col[ins.series]
        units = float(C[j, k])
        fixed[j] = float(ins.cost_per_contract)
        if ins.spread is not None:
            spread[j] = 0.5 * float(ins.spread) * units
        elif ins.spread_ticks is not None and ins.tick_value is not None:
            spread[j] = 0.5 * float(ins.spread_ticks) * float(ins.tick_value)
        sigma = 0.0 if vol is None else float(vol.get(ins.series, 0.0))
        dvol[j] = sigma
        y = float(ins.impact_coefficient or 0.0)
        if y > 0 and ins.adv:
            impact[j] = y * sigma * units * float(prices[k]) / math.sqrt(float(ins.adv))
    return CostModel(fixed=fixed, spread=spread, impact=impact, daily_vol=dvol)
