"""Rolling out-of-sample backtest of hedging strategies and covariance estimators.

For price rows ``P_0 … P_{N−1}``, trailing window ``W``, horizon ``H`` and rebalance step ``k``,
the rebalance rows are ``t = W−1, W−1+k, …`` while ``t + H ≤ N−1``. At each one:

1. the horizon changes of rows ``t−W+1 … t`` only, as known on date ``t`` (rolled series
   back-adjusted with the rolls up to ``t`` and ending at the held contracts' real prices,
   :meth:`~data_adapters.prices.PricePanel.as_of`), are estimated with each covariance estimator;
2. every strategy of :mod:`optimizer.strategies` picks its target positions ``n_t``; the joint
   strategies solve the book's hedge problem with ``current`` = the strategy's previous target,
   so liquidity limits apply to the change ``|n_t − n_{t−k}|``;
3. the realised P&L over the next horizon is recorded,
   ``exposures = Eᵀ1 · (P_{t+H} − P_t)`` and ``hedge leg = (Cᵀ n_t) · (P_{t+H} − P_t)``, together
   with the P&L over the holding period to the next rebalance, ``P_{t+k} − P_t`` (the path that
   is drawn and tested for effectiveness; the two coincide when ``k = H``). For rolled series
   ``P`` is the P&L level (:attr:`~data_adapters.prices.PricePanel.pnl_levels`): across a roll
   the old contract is closed and the new one opened.

Metrics per strategy and estimator, over the ``R`` out-of-sample horizon P&Ls: realised variance
reduction ``1 − Var(hedged) / Var(unhedged)`` (Ederington 1979), hedged P&L standard deviation,
worst horizon loss, contracts traded ``Σ_t Σ_j |n_t,j − n_{t−1},j|`` (from the book's ``current``)
and trading cost ``Σ |trade| × cost_per_contract``. When ``k < H`` the horizon P&Ls overlap.

Every rebalance builds a problem of the same *structure* (the ``M`` factor padded to all series,
every bound made finite), so the cvxpy problem is canonicalised once and re-solved through its
Parameters (:func:`optimizer.formulation.formulation_for`).

References
----------
Ederington, L. H. (1979), "The hedging performance of the new futures markets", Journal of
Finance 34(1) (variance reduction as hedging effectiveness, out of sample).
Anderson, R. W. & Danthine, J.-P. (1981), "Cross hedging", Journal of Political Economy 89(6).
"""

from __future__ import annotations

import dataclasses
import math
import time
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from basiswise.data_adapters.book import Book
from basiswise.data_adapters.choices import WHOLE_METHODS as _WHOLE_METHODS
from basiswise.data_adapters.errors import InputError
from basiswise.data_adapters.prices import PricePanel

from ..estimation.changes import dollar_covariance, horizon_changes
from ..estimation.covariance import ESTIMATORS, estimate_covariance
from ..pipeline import Prepared, prepare
from ..problem.model import build_hedge_model, loadings
from ..problem.qp import HedgeQP
from ..results.cautions import CAUTIONS
from ..results.jsonsafe import finite
from ..solvers.dispatch import solve_qp
from .effectiveness import EVIDENCE_NOTE, Effectiveness, effectiveness_by_group
from .strategies import (
    ESTIMATOR_FREE,
    STRATEGIES,
    check_strategies,
    one_to_one,
    predicted_variance,
    resolve_proxies,
    single_mv,
)

WHOLE_METHODS = _WHOLE_METHODS  # defined once, in data_adapters.choices
MIN_REBALANCES = 3
_BIG = 1e6  # stand-in for an infinite bound (contracts), keeps the problem structure fixed


@dataclass(frozen=True)
class Run:
    """Decisions and realised P&L of one strategy with one estimator (``None`` = needs none).

    Arrays have one row per rebalance date; instrument columns in book order; currency amounts.
    ``predicted_vr`` is the in-sample variance reduction the estimate promised at each date and
    ``predicted_var0`` the unhedged variance it assumed (currency²).
    """

    strategy: str
    estimator: str | None
    targets: np.ndarray
    trades: np.ndarray
    horizon_leg: np.ndarray
    held_leg: np.ndarray
    predicted_vr: np.ndarray
    predicted_var0: np.ndarray
    statuses: tuple[str, ...]
    seconds: float

    @property
    def label(self) -> str:
        return self.strategy if self.estimator is None else f"{self.strategy} / {self.estimator}"


@dataclass(frozen=True)
class RunMetrics:
    """Out-of-sample figures of one run (currency over the horizon; VR as a fraction).

    ``held`` counts rebalances where no feasible target was found and the positions were kept.
    """

    strategy: str
    estimator: str | None
    variance_reduction: float
    hedged_std: float
    unhedged_std: float
    worst_loss: float
    contracts_traded: float
    trading_cost: float
    predicted_vr: float
    rebalances: int
    held: int


@dataclass(frozen=True)
class BacktestResult:
    """Everything a rolling backtest produced; see the module docstring for the definitions."""

    book: Book
    step: int
    window: int
    horizon_days: int
    method: str
    dates: pd.DatetimeIndex
    horizon_end: pd.DatetimeIndex
    held_end: pd.DatetimeIndex
    exposure_horizon: np.ndarray
    exposure_held: np.ndarray
    runs: list[Run]
    seconds: float
    notes: list[str] = field(default_factory=list)

    @property
    def currency(self) -> str:
        return self.book.book.currency

    @property
    def unhedged_horizon(self) -> np.ndarray:
        return self.exposure_horizon.sum(axis=1)

    def hedged_horizon(self, run: Run) -> np.ndarray:
        return self.unhedged_horizon + run.horizon_leg.sum(axis=1)

    def hedged_held(self, run: Run) -> np.ndarray:
        return self.exposure_held.sum(axis=1) + run.held_leg.sum(axis=1)

    def metrics(self) -> list[RunMetrics]:
        """One line per run, ranked by realised variance reduction (best first)."""
        un = self.unhedged_horizon
        var_un = float(np.var(un, ddof=1))
        cost = np.array([float(i.cost_per_contract) for i in self.book.instruments])
        out = []
        for run in self.runs:
            hedged = self.hedged_horizon(run)
            var_h = float(np.var(hedged, ddof=1))
            traded = np.abs(run.trades)
            out.append(RunMetrics(
                run.strategy, run.estimator, 1.0 - var_h / var_un, math.sqrt(var_h),
                math.sqrt(var_un), float(max(0.0, -hedged.min())), float(traded.sum()),
                float((traded @ cost).sum()), _pooled(run), len(hedged),
                sum(s.startswith("held") for s in run.statuses)))
        return sorted(out, key=lambda m: -m.variance_reduction)

    def run(self, strategy: str, estimator: str | None = None) -> Run:
        """The run of ``strategy`` (with ``estimator`` unless the strategy needs none)."""
        for r in self.runs:
            if r.strategy == strategy and (r.estimator == estimator or r.estimator is None):
                return r
        raise KeyError((strategy, estimator))

    def best(self) -> Run:
        """The run with the highest realised variance reduction among hedging strategies."""
        ranked = [m for m in self.metrics() if m.strategy != "unhedged"] or self.metrics()
        return self.run(ranked[0].strategy, ranked[0].estimator)

    def effectiveness(self, run: Run | None = None) -> list[Effectiveness]:
        """Effectiveness evidence per hedge relationship over the holding-period P&Ls."""
        run = self.best() if run is None else run
        return effectiveness_by_group(self.book, self.exposure_held, run.held_leg)

    def to_dict(self) -> dict:
        """JSON-ready summary: settings, ranked metrics, effectiveness of the best run, cautions."""
        best = self.best()
        return finite({
            "book": self.book.book.name, "currency": self.currency,
            "horizon_days": self.horizon_days, "window": self.window, "step": self.step,
            "method": self.method, "rebalances": len(self.dates),
            "first_date": str(self.dates[0].date()), "last_date": str(self.horizon_end[-1].date()),
            "seconds": self.seconds,
            "ranking": [_metrics_dict(m) for m in self.metrics()],
            "effectiveness": {"strategy": best.strategy, "estimator": best.estimator,
                              "groups": [e.to_dict() for e in self.effectiveness(best)],
                              "note": EVIDENCE_NOTE},
            "notes": list(self.notes), "cautions": list(CAUTIONS),
        })


def _pooled(run: Run) -> float:
    """In-sample VR pooled like the realised one: ``1 − Σ_t v_h,t / Σ_t v_0,t``."""
    v0 = run.predicted_var0
    total = float(v0.sum())
    return float(1.0 - ((1.0 - run.predicted_vr) * v0).sum() / total) if total > 0 else 0.0


def _metrics_dict(m: RunMetrics) -> dict:
    """One ranked run for JSON: whole counts as int, the in-sample VR under its shown name."""
    d = dataclasses.asdict(m)
    d["in_sample_vr"] = d.pop("predicted_vr")
    d["whole_contracts"] = m.strategy != "joint-continuous"
    if d["whole_contracts"]:
        d["contracts_traded"] = int(round(m.contracts_traded))
    return d


def rebalance_rows(n_rows: int, window: int, horizon: int, step: int) -> np.ndarray:
    """Row positions of the rebalance dates (0-based), see the module docstring."""
    if isinstance(step, bool) or not isinstance(step, (int, np.integer)) or step < 1:
        raise InputError(f"rebalance step must be a whole number of days ≥ 1, got {step!r}",
                         key="backtest.step")
    rows = np.arange(window - 1, n_rows - horizon, step)
    if rows.size < MIN_REBALANCES:
        raise InputError(
            f"{n_rows} price rows with a window of {window} rows, a horizon of {horizon} days and "
            f"a step of {step} days give {rows.size} rebalance dates; at least {MIN_REBALANCES} "
            "are needed (shorten the window or the step, or add history)",
            key="estimation.window")
    return rows


def _with_current(book: Book, current: np.ndarray) -> Book:
    """The book with other current positions (no re-validation; they come from the solver)."""
    ins = [i.model_copy(update={"current": float(c)}) for i, c in zip(book.instruments, current,
                                                                       strict=True)]
    return book.model_copy(update={"instruments": ins})


def stable_qp(qp: HedgeQP, rows: int) -> HedgeQP:
    """``qp`` with ``M``/``u`` padded by zero rows to ``rows`` and infinite bounds set to ±1e6.

    Zero rows leave ``‖M n + u‖²`` unchanged; the finite stand-ins only fix the structure.
    """
    M, u = qp.M, qp.u
    if M.shape[0] < rows:
        M = np.vstack([M, np.zeros((rows - M.shape[0], M.shape[1]))])
        u = np.concatenate([u, np.zeros(rows - u.shape[0])])
    lo = np.where(np.isfinite(qp.lo), qp.lo, -_BIG)
    hi = np.where(np.isfinite(qp.hi), qp.hi, _BIG)
    return dataclasses.replace(qp, M=M, u=u, lo=lo, hi=hi)


def _solve_joint(book: Book, changes, estimate, current: np.ndarray, *, whole: bool, method: str,
                 time_limit: float, reuse: bool) -> tuple[np.ndarray, str]:
    """Target of a joint strategy; on failure the previous positions are held."""
    try:
        model = build_hedge_model(_with_current(book, current), changes, estimate,
                                  fractional=not whole)
    except InputError as exc:
        return current.copy(), f"held: {exc.message}"
    qp = stable_qp(model.qp, len(model.series))
    how = method if whole else "continuous"
    start = np.round(current) if whole else None  # yesterday's hedge: a good first incumbent
    sol = solve_qp(qp, how, time_limit=time_limit, reuse=reuse, start=start)
    if sol.ok and np.any(np.abs(sol.x) >= _BIG / 2):  # a stand-in bound binds: solve as given
        sol = solve_qp(model.qp, how, time_limit=time_limit, reuse=False)
    if not sol.ok:
        return current.copy(), f"held: {sol.status}"
    x = np.asarray(sol.x, dtype=float)
    return (np.round(x) if whole else x), sol.status


def run_backtest(
    book: Book | Prepared | str | Path,
    *,
    step: int | None = None,
    strategies: Sequence[str] = STRATEGIES,
    estimators: Sequence[str] | None = None,
    method: str = "exact",
    time_limit: float = 10.0,
    reuse: bool = True,
    prices: pd.DataFrame | None = None,
    progress: Callable[[int, int], None] | None = None,
    **overrides,
) -> BacktestResult:
    """Run the rolling out-of-sample backtest of a book.

    Parameters
    ----------
    book : Book, Prepared or path
        The book; its window, horizon, change kind and sampling drive the estimation
        (``overrides`` such as ``window=`` or ``horizon_days=`` replace them).
    step : int, optional
        Business days between rebalances; defaults to the horizon.
    strategies : sequence of str
        Names from :data:`optimizer.strategies.STRATEGIES`.
    estimators : sequence of str, optional
        Names from :data:`optimizer.covariance.ESTIMATORS`; the book's estimator by default.
    method : {"exact", "round"}
        How ``joint-whole`` reaches whole contracts.
    time_limit : float
        Seconds per whole-contract solve.
    reuse : bool
        Re-use the canonicalised cvxpy problem (``False`` rebuilds it every time: the baseline).
    prices : DataFrame, optional
        Plain price levels to use instead of the book's file (columns = the book's series),
        each row taken as known on its date; not for globally back-adjusted rolled levels.
    progress : callable, optional
        Called as ``progress(done, total)`` after each rebalance date.
    """
    t_start = time.perf_counter()
    prep = book if isinstance(book, Prepared) else prepare(book, **overrides)
    if isinstance(book, Prepared) and overrides:
        prep = prepare(book.book, **overrides)
    bk = prep.book
    strategies = check_strategies(list(strategies))
    estimators = list(estimators) if estimators else [bk.estimation.estimator]
    for e in estimators:
        if e not in ESTIMATORS:
            raise InputError(f"unknown estimator {e!r}; valid: {', '.join(ESTIMATORS)}",
                             key="estimators")
    estimators = list(dict.fromkeys(estimators))
    if method not in WHOLE_METHODS:
        raise InputError(f"unknown method {method!r}; valid: {', '.join(WHOLE_METHODS)}",
                         key="method")
    est_cfg, H = bk.estimation, bk.book.horizon_days
    panel = prep.panel
    if prices is not None:  # plain levels: what they show is what was known on each date
        missing = sorted(set(bk.series_ids()) - set(prices.columns))
        if missing:
            raise InputError(f"price panel lacks series {', '.join(missing)}", key="data.prices")
        panel = PricePanel(prices[bk.series_ids()], panel.source, 0)
    frame = panel.prices
    W = est_cfg.window
    if W > len(frame):
        raise InputError(f"window of {W} rows is longer than the price history of {len(frame)} "
                         "rows", key="estimation.window")
    k = H if step is None else step
    rows = rebalance_rows(len(frame), W, H, k)
    values = panel.pnl_levels.to_numpy(dtype=float)  # P&L of the contracts actually held
    series = list(frame.columns)
    E, C = loadings(bk, series)
    R, n, N = len(rows), len(bk.instruments), len(frame)
    held_rows = np.minimum(rows + k, N - 1)
    dP_h, dP_k = values[rows + H] - values[rows], values[held_rows] - values[rows]

    keys = [(s, None) for s in strategies if s in ESTIMATOR_FREE]
    keys += [(s, e) for e in estimators for s in strategies if s not in ESTIMATOR_FREE]
    start = np.array([float(i.current) for i in bk.instruments])
    tgt = {key: np.zeros((R, n)) for key in keys}
    pvr = {key: np.zeros(R) for key in keys}
    pv0 = {key: np.zeros(R) for key in keys}
    stat: dict = {key: [] for key in keys}
    secs = dict.fromkeys(keys, 0.0)
    prev = {key: start.copy() for key in keys}
    fixed_one = None
    for r, t in enumerate(rows):
        changes = horizon_changes(panel.as_of(t, t - W + 1), horizon_days=H, kind=est_cfg.changes,
                                  sampling=est_cfg.sampling, window=None)
        sample_cov = dollar_covariance(
            np.atleast_2d(np.cov(changes.values, rowvar=False)), changes)
        v0_sample = predicted_variance(E, C, sample_cov, np.zeros(n))
        ests: dict = {}
        for key in keys:
            strategy, name = key
            t0 = time.perf_counter()
            if name is None:
                if strategy == "unhedged":
                    x, status = np.zeros(n), "ok"
                else:
                    if fixed_one is None or any(e.proxy is None for e in bk.exposures):
                        fixed_one = one_to_one(bk, resolve_proxies(bk, E, C, sample_cov,
                                                                   same_units=True))
                    x, status = fixed_one, "ok"
                cov, v0 = sample_cov, v0_sample
            else:
                if name not in ests:
                    ests[name] = estimate_covariance(changes.values, name,
                                                     ewma_lambda=est_cfg.ewma_lambda,
                                                     horizon_days=H, columns=changes.columns)
                est = ests[name]
                cov = dollar_covariance(est.matrix, changes)
                v0 = predicted_variance(E, C, cov, np.zeros(n))
                if strategy == "single-mv":
                    x, status = single_mv(E, C, cov, resolve_proxies(bk, E, C, cov)), "ok"
                else:
                    x, status = _solve_joint(bk, changes, est, prev[key],
                                             whole=(strategy == "joint-whole"), method=method,
                                             time_limit=time_limit, reuse=reuse)
            tgt[key][r] = x
            prev[key] = x
            pvr[key][r] = 1.0 - predicted_variance(E, C, cov, x) / v0 if v0 > 0 else 0.0
            pv0[key][r] = v0
            stat[key].append(status)
            secs[key] += time.perf_counter() - t0
        if progress is not None:
            progress(r + 1, R)

    per_h, per_k = dP_h @ C.T, dP_k @ C.T  # P&L of one contract of each instrument
    runs = []
    for key in keys:
        T = tgt[key]
        # "unhedged" is the book without any futures, today's included: it trades nothing
        first = np.zeros(n) if key[0] == "unhedged" else start
        trades = np.diff(np.vstack([first, T]), axis=0)
        runs.append(Run(key[0], key[1], T, trades, T * per_h, T * per_k, pvr[key], pv0[key],
                        tuple(stat[key]), secs[key]))
    notes = []
    if k < H:
        notes.append(f"rebalancing every {k} days with a {H}-day horizon: horizon P&Ls overlap")
    if any(e.proxy is None for e in bk.exposures) and set(strategies) & {"one-to-one",
                                                                          "single-mv"}:
        notes.append("exposures without a proxy use the most correlated instrument")
    return BacktestResult(bk, k, W, H, method, frame.index[rows], frame.index[rows + H],
                          frame.index[held_rows], dP_h @ E.T, dP_k @ E.T, runs,
                          time.perf_counter() - t_start, notes)

