"""From a validated book and estimated covariance to the normalised hedge problem.

The book's P&L over the horizon is ``dV = qᵀ dS + (c∘n)ᵀ dF``. Both exposures and futures load on
price *series*; with ``k`` series, ``E`` (exposures × k) holds each exposure's quantity in its
series' price unit and ``C`` (instruments × k) each contract's size in its series' price unit, so
the book's position per series is ``y = Eᵀ1 + Cᵀ n`` and ``Var(dV) = yᵀ Σ$ y`` with ``Σ$`` the
covariance of horizon price moves in currency per price unit, squared.

For relative or log changes ``Σ$ = D Σ_r D`` with ``D`` the current prices, which makes the
contract counts value-based (``N* = h* V_S / V_F``). The unconstrained optimum is
``(c∘n)* = −Σ_FF⁻¹ Σ_FS q`` (Anderson & Danthine 1981); with one exposure and one future it is the
minimum-variance hedge ratio ``h* = ρ σ_S / σ_F`` (Johnson 1960; Ederington 1979).

References
----------
Anderson, R. W. & Danthine, J.-P. (1981), "Cross hedging", Journal of Political Economy 89(6).
Ederington, L. H. (1979), "The hedging performance of the new futures markets", Journal of
Finance 34(1).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from functools import lru_cache

import numpy as np

from basiswise.data_adapters.book import Book
from basiswise.data_adapters.errors import InputError
from basiswise.data_adapters.units import units_in_price_unit

from ..estimation.changes import Changes, dollar_covariance
from ..estimation.covariance import CovarianceEstimate
from .cost_problem import apply_costs
from .costs import CostModel, cost_model
from .qp import HedgeQP


@dataclass(frozen=True)
class LimitSources:
    """Which limit sets each instrument's effective lower and upper bound."""

    lo: tuple[str, ...]
    hi: tuple[str, ...]


@dataclass(frozen=True)
class HedgeModel:
    """Everything numeric about one hedging cycle of a book.

    Attributes
    ----------
    series : list of str
        Price series, in the order of the covariance rows.
    prices : ndarray (k,)
        Current price of each series (price units).
    cov : ndarray (k, k)
        Covariance of horizon price moves, (currency / price unit)².
    E, C : ndarray
        Exposure and contract loadings on the series (price units of quantity).
    current : ndarray (n,)
        Positions held today, in contracts.
    variance0 : float
        Unhedged variance of the book's horizon P&L, currency².
    qp : HedgeQP
        The normalised problem handed to solvers.
    sources : LimitSources
        Which limit binds each bound, for reporting.
    """

    book: Book
    series: list[str]
    prices: np.ndarray
    cov: np.ndarray
    estimate: CovarianceEstimate
    changes: Changes
    E: np.ndarray
    C: np.ndarray
    current: np.ndarray
    variance0: float
    qp: HedgeQP
    sources: LimitSources
    costs: CostModel | None = None  # trading-cost coefficients (problem.costs), currency

    @property
    def exposure_ids(self) -> list[str]:
        return [e.id for e in self.book.exposures]

    @property
    def instrument_ids(self) -> list[str]:
        return [i.id for i in self.book.instruments]

    @property
    def unhedged_std(self) -> float:
        return math.sqrt(self.variance0)

    def position(self, n: np.ndarray) -> np.ndarray:
        """Book position per series for futures positions ``n``."""
        return book_position(self.E, self.C, n)

    def variance(self, n: np.ndarray) -> float:
        """Variance of the horizon P&L with positions ``n`` (currency²)."""
        y = self.position(n)
        return float(max(y @ self.cov @ y, 0.0))

    def value_per_contract(self) -> np.ndarray:
        """Notional of one contract of each instrument at current prices (currency)."""
        return self.C @ self.prices

    def exposure_values(self) -> np.ndarray:
        """Signed value of each exposure at current prices (currency)."""
        return self.E @ self.prices


def book_position(E: np.ndarray, C: np.ndarray, n: np.ndarray) -> np.ndarray:
    """The book's position per series, ``y = Eᵀ1 + Cᵀn``, for futures positions ``n``."""
    return np.asarray(E, dtype=float).sum(axis=0) + np.asarray(C, dtype=float).T @ np.asarray(
        n, dtype=float)


@lru_cache(maxsize=1024)
def _cached_factor(unit: str, price_unit: str) -> float:
    return units_in_price_unit(unit, price_unit, key="")


def _factor_of(unit: str, price_unit: str, key: str) -> float:
    try:
        return _cached_factor(unit, price_unit)
    except InputError:
        return units_in_price_unit(unit, price_unit, key=key)  # raises, naming the key


def loadings(book: Book, series: list[str]) -> tuple[np.ndarray, np.ndarray]:
    """Exposure and contract loadings on ``series`` with units converted to price units."""
    col = {s: i for i, s in enumerate(series)}
    E = np.zeros((len(book.exposures), len(series)))
    for r, e in enumerate(book.exposures):
        f = _factor_of(e.unit, book.series[e.series].unit, f"exposure '{e.id}'.unit")
        E[r, col[e.series]] = e.quantity * f
    C = np.zeros((len(book.instruments), len(series)))
    for r, ins in enumerate(book.instruments):
        f = _factor_of(ins.unit, book.series[ins.series].unit, f"instrument '{ins.id}'.unit")
        C[r, col[ins.series]] = ins.contract_size * f
    return E, C


def _compress(A: np.ndarray, b: np.ndarray) -> tuple[np.ndarray, np.ndarray, float]:
    """``M, u, r`` with ``‖M n + u‖² + r = nᵀAn + 2bᵀn + 1`` for a symmetric PSD ``A``.

    Eigen-directions with (numerically) zero curvature are dropped: they are combinations of
    futures that carry no risk (e.g. two contracts on one series), and ``b`` has no component
    along them.
    """
    w, V = np.linalg.eigh((A + A.T) / 2)
    keep = w > max(w.max(), 0.0) * 1e-12
    w, V = w[keep], V[:, keep]
    M = np.sqrt(w)[:, None] * V.T
    u = (V.T @ b) / np.sqrt(w)
    return M, u, max(1.0 - float(u @ u), 0.0)


_NO_LIQUIDITY_CAP = 1e12  # contracts: a liquidity cap above this is no cap


def _bounds(book: Book, current: np.ndarray, b: np.ndarray, fractional: bool):
    """Intersect position limits, liquidity and hedge-only signs; record which limit binds."""
    n = len(book.instruments)
    lo, hi = np.full(n, -np.inf), np.full(n, np.inf)
    slo, shi = ["none"] * n, ["none"] * n

    def tighten(j: int, new_lo: float, new_hi: float, name: str) -> None:
        if new_lo > lo[j]:
            lo[j], slo[j] = new_lo, name
        if new_hi < hi[j]:
            hi[j], shi[j] = new_hi, name

    for j, ins in enumerate(book.instruments):
        pmin, pmax = ins.bounds()
        tighten(j, pmin, pmax, "position limit")
        if ins.adv is not None:
            cap = ins.max_participation * ins.adv * ins.execution_days
            if not math.isfinite(cap) or cap > _NO_LIQUIDITY_CAP:
                cap = math.inf  # more than any position limit can use: liquidity does not bind
            elif not fractional:
                cap = math.floor(cap + 1e-9)
            tighten(j, current[j] - cap, current[j] + cap, "liquidity")
        if book.constraints.hedge_only and abs(b[j]) > 1e-12:
            # a long position raises risk when b_j > 0: allow only the risk-reducing side
            tighten(j, 0.0 if b[j] < 0 else -np.inf, 0.0 if b[j] > 0 else np.inf, "hedge-only")
        if not fractional:
            lo[j], hi[j] = np.ceil(lo[j] - 1e-9), np.floor(hi[j] + 1e-9)
        if lo[j] > hi[j]:
            raise InputError(
                f"limits conflict: {slo[j]} sets minimum {lo[j]:g} but {shi[j]} sets maximum "
                f"{hi[j]:g} contracts (current {current[j]:g})",
                key=f"instrument '{ins.id}'",
            )
    return lo, hi, LimitSources(tuple(slo), tuple(shi))


def build_hedge_model(
    book: Book,
    changes: Changes,
    estimate: CovarianceEstimate,
    *,
    fractional: bool = False,
    daily_vol=None,
) -> HedgeModel:
    """Assemble the hedge problem of ``book`` from horizon changes and their covariance.

    Parameters
    ----------
    book : Book
        Validated book.
    changes : Changes
        Horizon changes of the book's series (columns in ``book.series_ids()`` order).
    estimate : CovarianceEstimate
        Covariance of ``changes.values``.
    fractional : bool
        Keep fractional bounds (continuous analysis) instead of whole-contract bounds.
    daily_vol : pandas.Series, optional
        Daily volatility of each series (:func:`optimizer.problem.costs.daily_volatility`) for the
        impact term of the cost model; without it impact is 0.
    """
    series = list(changes.columns)
    cov = dollar_covariance(estimate.matrix, changes)
    E, C = loadings(book, series)
    e = E.sum(axis=0)
    v0 = float(e @ cov @ e)
    if not math.isfinite(v0) or v0 <= 0:
        raise InputError("the book's exposures carry no price risk (unhedged variance is 0)",
                         key="exposure")
    scaled = cov / v0
    CS = C @ scaled
    M, u, offset = _compress(CS @ C.T, CS @ e)
    n = len(book.instruments)
    free = HedgeQP(M=M, u=u, lo=np.full(n, -np.inf), hi=np.full(n, np.inf), offset=offset,
                   names=tuple(i.id for i in book.instruments))
    base = HedgeModel(
        book=book, series=series, prices=np.asarray(changes.last_prices, dtype=float), cov=cov,
        estimate=estimate, changes=changes, E=E, C=C, current=np.zeros(n), variance0=v0,
        qp=free, sources=LimitSources(("none",) * n, ("none",) * n),
        costs=cost_model(book, C, np.asarray(changes.last_prices, dtype=float), series,
                         daily_vol),
    )
    return with_limits(base, book, fractional=fractional)


def _limit_rows(book: Book, E: np.ndarray, C: np.ndarray, prices: np.ndarray):
    """Rows ``G n ≤ h`` of the group limits and, if asked, the no-over-hedge caps."""
    idx = {ins.id: j for j, ins in enumerate(book.instruments)}
    rows, h, names = [], [], []
    for g in book.group_limits:
        row = np.zeros(len(idx))
        row[[idx[i] for i in g.instruments]] = 1.0
        rows += [row, -row]
        h += [float(g.limit), float(g.limit)]
        names += [f"group '{g.id}' long", f"group '{g.id}' short"]
    if book.constraints.no_over_hedge:
        value, exp_value = C @ prices, E @ prices
        for g in book.group_limits:
            members = set(g.instruments)
            cap = abs(sum(v for v, e in zip(exp_value, book.exposures, strict=True)
                          if e.proxy in members))
            if cap == 0:
                continue  # no exposure names this group: it is a pure cross hedge, not capped
            cols = [idx[i] for i in g.instruments]
            row = np.zeros(len(idx))
            row[cols] = value[cols] / cap
            rows += [row, -row]
            h += [1.0, 1.0]
            names += [f"no over-hedge '{g.id}' long", f"no over-hedge '{g.id}' short"]
    G = np.array(rows) if rows else np.zeros((0, len(idx)))
    return G, np.array(h) if h else np.zeros(0), tuple(names)


def with_limits(model: HedgeModel, book: Book, *, fractional: bool = False) -> HedgeModel:
    """``model`` with the limits and current positions of ``book``.

    ``book`` must hold the same instruments and exposures in the same order as ``model.book``
    (scenarios that only change limits, margins, liquidity or positions); loadings and the
    covariance factor are reused. Raises InputError naming an instrument whose limits conflict.
    """
    qp = model.qp
    current = np.array([float(i.current) for i in book.instruments])
    lo, hi, sources = _bounds(book, current, qp.b, fractional)
    G, h, row_names = _limit_rows(book, model.E, model.C, model.prices)
    margin = budget = None
    if book.constraints.margin_budget is not None:
        margin = (np.array([float(i.margin) for i in book.instruments])
                  / float(book.constraints.margin_budget))
        budget = 1.0
    qp = replace(qp, lo=lo, hi=hi, G=G, h=h, margin=margin, margin_budget=budget,
                 names=tuple(i.id for i in book.instruments), row_names=row_names, cost=None)
    costs = model.costs
    if costs is not None and book is not model.book:  # limits/costs of a scenario book
        costs = cost_model(book, model.C, model.prices, model.series,
                           _vol_of(model.series, costs, model.C))
    qp, sources = apply_costs(qp, book, costs, current, math.sqrt(model.variance0), sources)
    return replace(model, book=book, qp=qp, sources=sources, current=current, costs=costs)


def _vol_of(series: list[str], costs: CostModel, C: np.ndarray):
    """Daily volatility per series recovered from a cost model (each instrument's series)."""
    import pandas as pd

    vol = {}
    for j in range(C.shape[0]):
        k = int(np.flatnonzero(C[j])[0]) if np.any(C[j]) else 0
        vol[series[k]] = float(costs.daily_vol[j])
    return pd.Series(vol)
