"""Hedging strategies compared by the backtest, as plain array math.

Notation as in :mod:`optimizer.problem.model`: ``E`` (exposures × k) and ``C`` (instruments × k)
load the exposures and one contract of each instrument on the ``k`` price series (price units of
quantity), ``Σ$`` is the covariance of horizon price moves in (currency / price unit)², and the
book's horizon P&L with positions ``n`` is ``dV = (Eᵀ1 + Cᵀn)ᵀ dP``.

Strategies (names are the ``--strategies`` values of ``basiswise backtest``):

``unhedged``
    ``n = 0``: the exposures alone, the reference every other strategy is measured against.
``one-to-one``
    each exposure ``i`` hedged quantity for quantity in its ``proxy`` instrument ``j(i)``:
    ``n_j = −Σ_{i: j(i)=j} q_i φ_i / s_j`` with ``φ_i`` converting the exposure's unit into the
    contract's unit and ``s_j`` the contract size; summed per instrument, then rounded.
``single-mv``
    the textbook single-instrument minimum-variance hedge per exposure, value based:
    ``n_j = −Σ_{i: j(i)=j} (E_i Σ$ C_jᵀ) / (C_j Σ$ C_jᵀ)``, i.e. ``h* = Cov(ΔS, ΔF) / Var(ΔF)``
    times the exposure over the contract (``N* = h* V_S / V_F`` for relative changes); summed per
    instrument, then rounded.
``joint-continuous``
    the joint minimum-variance hedge over all instruments under the book's limits, fractional.
``joint-whole``
    the same in whole contracts (method ``exact`` or ``round``).

The first three ignore the book's position, liquidity and margin limits, as the textbook rules do;
the joint strategies are solved by :mod:`optimizer.backtest.engine` through the hedge problem.

References
----------
Johnson, L. L. (1960), "The theory of hedging and speculation in commodity futures", Review of
Economic Studies 27(3).
Ederington, L. H. (1979), "The hedging performance of the new futures markets", Journal of
Finance 34(1).
Hull, J. C., Options, Futures, and Other Derivatives, ch. 3 (minimum-variance hedge ratio,
tailing the hedge).
"""

from __future__ import annotations

import numpy as np

from basiswise.data_adapters.book import Book
from basiswise.data_adapters.errors import InputError
from basiswise.data_adapters.units import units_in_price_unit

from ..problem.model import book_position

STRATEGIES = ("unhedged", "one-to-one", "single-mv", "joint-continuous", "joint-whole")
#: strategies whose positions do not depend on the covariance estimator
ESTIMATOR_FREE = ("unhedged", "one-to-one")
#: strategies solved through the hedge problem with the book's limits
JOINT = ("joint-continuous", "joint-whole")


def check_strategies(names: list[str] | tuple[str, ...]) -> list[str]:
    """Validate strategy names (``InputError`` naming the unknown one), keep order, drop repeats."""
    out: list[str] = []
    for name in names:
        if name not in STRATEGIES:
            raise InputError(f"unknown strategy {name!r}; valid: {', '.join(STRATEGIES)}",
                             key="strategies")
        if name not in out:
            out.append(name)
    if not out:
        raise InputError("no strategy chosen", key="strategies")
    return out


def _unit_factor(book: Book, i: int, j: int) -> float | None:
    """Exposure ``i``'s quantity unit in instrument ``j``'s quantity unit (None if incompatible)."""
    e, ins = book.exposures[i], book.instruments[j]
    try:
        return units_in_price_unit(e.unit, f"{book.book.currency}/{ins.unit}",
                                   key=f"exposure '{e.id}'.proxy")
    except InputError:
        return None


def resolve_proxies(book: Book, E: np.ndarray, C: np.ndarray, cov: np.ndarray,
                    *, same_units: bool = False) -> list[int | None]:
    """Instrument index hedging each exposure in the single-instrument strategies.

    The book's ``proxy`` where given; otherwise the instrument whose price moves are most
    correlated (in absolute value) with the exposure's under ``cov``, among the instruments whose
    unit converts into the exposure's when ``same_units``. ``None`` when no instrument qualifies.
    """
    ids = {ins.id: j for j, ins in enumerate(book.instruments)}
    var_c = np.einsum("jk,kl,jl->j", C, cov, C)
    out: list[int | None] = []
    for i, e in enumerate(book.exposures):
        if e.proxy is not None:
            out.append(ids[e.proxy])
            continue
        var_e = float(E[i] @ cov @ E[i])
        best, best_rho = None, -1.0
        for j in range(len(book.instruments)):
            if same_units and _unit_factor(book, i, j) is None:
                continue
            denom = np.sqrt(max(var_e, 0.0) * max(var_c[j], 0.0))
            rho = abs(float(E[i] @ cov @ C[j])) / denom if denom > 0 else 0.0
            if rho > best_rho:
                best, best_rho = j, rho
        out.append(best)
    return out


def one_to_one(book: Book, proxies: list[int | None]) -> np.ndarray:
    """Quantity-for-quantity positions in each exposure's proxy, rounded to whole contracts.

    ``n_j = round(−Σ_{i: j(i)=j} q_i φ_i / s_j)``; ``φ_i`` converts the exposure's unit to the
    contract's (1 bbl = 42 gal). A named proxy whose unit does not convert raises ``InputError``
    naming ``exposure '<id>'.proxy``.
    """
    n = np.zeros(len(book.instruments))
    for i, j in enumerate(proxies):
        if j is None:
            continue
        e, ins = book.exposures[i], book.instruments[j]
        phi = _unit_factor(book, i, j)
        if phi is None:
            raise InputError(
                f"a quantity-for-quantity hedge needs the proxy's unit {ins.unit!r} to convert "
                f"from the exposure's unit {e.unit!r}", key=f"exposure '{e.id}'.proxy")
        n[j] -= e.quantity * phi / ins.contract_size
    return np.round(n)


def single_mv_fractional(E: np.ndarray, C: np.ndarray, cov: np.ndarray,
                         proxies: list[int | None]) -> np.ndarray:
    """Per-exposure minimum-variance contracts in the proxy, summed per instrument (fractional).

    For exposure ``i`` hedged with instrument ``j``: ``n = −(E_i Σ$ C_jᵀ) / (C_j Σ$ C_jᵀ)``, the
    OLS slope of the exposure's P&L on one contract's P&L, sign reversed (Johnson 1960;
    Ederington 1979). An instrument whose price does not move (zero variance) gets nothing.
    """
    n = np.zeros(C.shape[0])
    for i, j in enumerate(proxies):
        if j is None:
            continue
        var_f = float(C[j] @ cov @ C[j])
        if var_f > 0:
            n[j] -= float(E[i] @ cov @ C[j]) / var_f
    return n


def single_mv(E: np.ndarray, C: np.ndarray, cov: np.ndarray,
              proxies: list[int | None]) -> np.ndarray:
    """:func:`single_mv_fractional` rounded to whole contracts."""
    return np.round(single_mv_fractional(E, C, cov, proxies))


def predicted_variance(E: np.ndarray, C: np.ndarray, cov: np.ndarray, n: np.ndarray) -> float:
    """Model variance ``yᵀ Σ$ y`` of the horizon P&L, ``y = Eᵀ1 + Cᵀn`` (currency², ≥ 0)."""
    y = book_position(E, C, n)
    return float(max(y @ cov @ y, 0.0))
