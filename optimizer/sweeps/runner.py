"""Run many limit scenarios of one book: serially, in local worker processes, or on Dask.

Each scenario is solved as its own hedge problem. What is shared:

- prices are read once per process;
- the covariance is estimated once per distinct estimation setting (horizon, window, estimator,
  sampling) and the model's loadings and factor ``M, u`` once per setting and instrument set;
- scenarios that change only numbers (limits, ADV, participation, margins) keep the problem's
  structure, so :func:`optimizer.problem.formulation.formulation_for` hands back the one cached
  cvxpy problem and only its Parameters change (``reuse=False`` rebuilds it every time, the
  baseline).

Limits are checked for conflicts before solving (an instrument whose limits leave no room, a
group whose members' minimum positions exceed the group limit, a margin budget below the margin
of the minimum positions); such a scenario is reported infeasible with the conflict named and
the others still run.

Parallel runs send only small picklable payloads: the book as a path (or a dict with its folder)
and ``(index, name, settings)`` triples; each worker process loads the prices itself, so workers
must see the same files (one machine, or a shared file system for a Dask cluster).
"""

from __future__ import annotations

import os
import time
from collections.abc import Callable
from concurrent.futures import ProcessPoolExecutor
from dataclasses import asdict, dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from basiswise.data_adapters.book import Book, Constraints, load_book
from basiswise.data_adapters.errors import InputError

from ..estimation.estimate import estimate
from ..pipeline import prepare
from ..problem.conflicts import limit_conflicts
from ..problem.model import HedgeModel, build_hedge_model, with_limits
from ..results.cautions import CAUTIONS
from ..results.jsonsafe import finite
from ..results.report import build_report
from ..solvers.dispatch import METHODS, solve_qp
from .local_pool import _chunks, _collect, run_local
from .scenario_file import Scenario, ScenarioSet, apply_scenario
from .stress import historical_moves, shock_vector, stress_pnl, worst_window

__all__ = ["ScenarioResult", "SweepResult", "SweepRunner", "run_sweep"]

Progress = Callable[[int, int], None]


@dataclass(frozen=True)
class ScenarioResult:
    """Outcome of one scenario. Money in the book's currency over the horizon."""

    name: str
    status: str
    feasible: bool
    unhedged_std: float | None
    hedged_std: float | None
    relaxed_std: float | None
    variance_reduction: float | None
    margin_used: float | None
    margin_budget: float | None
    contracts: dict[str, int | float]   # target contracts (int unless method continuous)
    binding: list[dict]                 # name, kind, shadow, unit: as solve's limits[]
    conflicts: list[str]
    stress: dict | None
    settings: dict
    estimation: str
    seconds: float
    limit_scale: float | None = None
    frontier_group: str = ""

    def to_dict(self, horizon_days: int | None = None) -> dict:
        """JSON-ready (finite numbers or ``None``), keys named as in ``solve --json``."""
        d = asdict(self)
        d["relaxed_hedged_std"] = d.pop("relaxed_std")
        d["horizon_days"] = self.settings.get("horizon_days", horizon_days)
        return finite(d)


@dataclass(frozen=True)
class SweepResult:
    book: str
    currency: str
    horizon_days: int
    method: str
    mode: str
    results: list[ScenarioResult]
    seconds: float
    cautions: tuple[str, ...] = CAUTIONS
    instruments: list[str] = field(default_factory=list)

    def to_dict(self) -> dict:
        from .frontier import frontier_lines

        return finite({
            "book": self.book, "currency": self.currency, "horizon_days": self.horizon_days,
            "method": self.method, "mode": self.mode, "seconds": self.seconds,
            "scenarios": [r.to_dict(self.horizon_days) for r in self.results],
            "frontier": [ln.to_dict() for ln in frontier_lines(self.results)],
            "cautions": list(self.cautions),
        })

    def to_frame(self):
        """One row per scenario (contracts as ``contracts_<id>`` columns)."""
        import pandas as pd

        rows = []
        for r in self.results:
            st = r.stress or {}
            row = {"scenario": r.name, "status": r.status, "unhedged_std": r.unhedged_std,
                   "horizon_days": r.settings.get("horizon_days", self.horizon_days),
                   "hedged_std": r.hedged_std, "relaxed_hedged_std": r.relaxed_std,
                   "variance_reduction": r.variance_reduction, "margin_used": r.margin_used,
                   "margin_budget": r.margin_budget, "stress": st.get("label"),
                   "stress_unhedged": st.get("unhedged"), "stress_hedged": st.get("hedged")}
            for inst in self.instruments:
                row[f"contracts_{inst}"] = r.contracts.get(inst)
            row["binding"] = "; ".join(f"{b['name']} ({b['shadow']:.2f} per {b['unit']})"
                                       for b in r.binding)
            row["conflicts"] = "; ".join(r.conflicts)
            rows.append(finite(row))
        frame = pd.DataFrame(rows)
        if self.method != "continuous":  # whole counts stay integers where a scenario has none
            for inst in self.instruments:
                frame[f"contracts_{inst}"] = frame[f"contracts_{inst}"].astype("Int64")
        return frame


# --------------------------------------------------------------------------- limits


# --------------------------------------------------------------------------- the runner


def _limit_free(book: Book) -> Book:
    free = [i.model_copy(update={"position_limit": None, "min_position": None,
                                 "max_position": None, "adv": None}) for i in book.instruments]
    return book.model_copy(update={"instruments": free, "group_limits": [],
                                   "constraints": Constraints()})


def _book_from(ref: Any) -> Book:
    if isinstance(ref, Book):
        return ref
    if isinstance(ref, dict):
        if "path" in ref:
            return load_book(ref["path"])
        return Book.from_dict(ref["book"], ref["folder"], ref["source"])
    return load_book(ref)


class SweepRunner:
    """Solves scenarios of one book, caching prices, estimates and models (one per process)."""

    def __init__(self, book: Any, *, method: str = "exact", reuse: bool = True,
                 time_limit: float = 30.0, source: str = "scenarios") -> None:
        if method not in METHODS:
            raise InputError(f"unknown method {method!r}; valid: {', '.join(METHODS)}",
                             key="method")
        self.prep = prepare(_book_from(book))
        self.method, self.reuse, self.time_limit = method, reuse, time_limit
        self.fractional = method == "continuous"
        self.source = source
        self._est: dict[tuple, tuple] = {}
        self._models: dict[tuple, HedgeModel] = {}
        self._hist: dict[tuple, Any] = {}

    @property
    def book(self) -> Book:
        return self.prep.book

    def estimation(self, sc: Scenario) -> tuple[tuple, Book, Any, Any]:
        """Book with ``sc``'s estimation keys, its horizon changes and covariance (cached)."""
        key = tuple(sorted(sc.estimation.items()))
        if key not in self._est:
            try:
                book = self.book.with_overrides(**sc.estimation) if key else self.book
                ch, cov = estimate(self.prep.panel.prices, book)
            except InputError as exc:
                name = (exc.key or "estimation").split(".")[-1]
                raise InputError(exc.message, file=self.source,
                                 key=f"scenario {sc.name!r}.{name}") from None
            self._est[key] = (book, ch, cov)
        return (key, *self._est[key])

    def model(self, sc: Scenario) -> tuple[HedgeModel, Book]:
        key, est_book, ch, cov = self.estimation(sc)
        mkey = (key, sc.removed)
        if mkey not in self._models:
            only_removed = Scenario(sc.name, {"remove": sorted(sc.removed)} if sc.removed else {})
            free = _limit_free(apply_scenario(est_book, only_removed))
            vol = None  # daily volatility for the impact term of the cost model
            if any((i.impact_coefficient or 0) > 0 for i in est_book.instruments):
                from ..problem.costs import daily_volatility

                vol = daily_volatility(self.prep.panel.prices, est_book.estimation.window)
            self._models[mkey] = build_hedge_model(free, ch, cov, fractional=self.fractional,
                                                   daily_vol=vol)
        return self._models[mkey], apply_scenario(est_book, sc)

    def _stress(self, sc: Scenario, model: HedgeModel, x: np.ndarray | None) -> dict | None:
        e = model.E.sum(axis=0)
        if "shock_pct" in sc.settings:
            pct = sc.settings["shock_pct"]
            from basiswise.data_adapters.currency import book_currency_shocks

            dP = shock_vector(model.series, model.prices, book_currency_shocks(model.book, pct))
            label = "shock " + ", ".join(f"{k} {v:+g} %" for k, v in pct.items())
        elif "replay_worst" in sc.settings:
            hkey = (model.changes.horizon_days, model.changes.kind)
            if hkey not in self._hist:
                self._hist[hkey] = historical_moves(self.prep.panel.prices,
                                                    horizon_days=hkey[0], kind=hkey[1])
            hist = self._hist[hkey]
            who = sc.settings["replay_worst"]
            if who == "hedged" and x is None:
                return None
            y = e if who == "unhedged" else model.position(x)
            _, dP, label = worst_window(hist, y)
            label += f" (worst for the {who} book)"
        else:
            return None
        if x is None:
            return {"label": label, "unhedged": float(e @ dP), "hedged": None, "futures": None}
        return stress_pnl(model.E, model.C, x, dP, label).to_dict()

    def run(self, sc: Scenario) -> ScenarioResult:
        """Solve one scenario; limit conflicts give an infeasible result, not an error."""
        t0 = time.perf_counter()
        base, book = self.model(sc)
        common = dict(name=sc.name, settings=dict(sc.settings),
                      estimation=f"{base.estimate.method}, window {base.book.estimation.window}, "
                                 f"{base.changes.horizon_days} d {base.changes.sampling}",
                      limit_scale=sc.frontier_scale, frontier_group=sc.frontier_group,
                      unhedged_std=base.unhedged_std,
                      margin_budget=book.constraints.margin_budget)
        try:
            model = with_limits(base, book, fractional=self.fractional)
            conflicts = limit_conflicts(model)
        except InputError as exc:
            model, conflicts = None, [f"{exc.key}: {exc.message}" if exc.key else exc.message]
        sol = None
        if not conflicts:
            sol = solve_qp(model.qp, self.method, time_limit=self.time_limit, reuse=self.reuse)
            if not sol.ok:
                conflicts = [f"the limits admit no position together ({sol.detail or sol.status})"]
        if conflicts:
            return ScenarioResult(status="infeasible", feasible=False, hedged_std=None,
                                  relaxed_std=None, variance_reduction=None, margin_used=None,
                                  contracts={}, binding=[], conflicts=conflicts,
                                  stress=self._stress(sc, base, None),
                                  seconds=time.perf_counter() - t0, **common)
        rep = build_report(model, sol)
        binding = [{"name": ln.name, "kind": ln.kind, "shadow": ln.shadow, "unit": ln.unit}
                    for ln in rep.limits if ln.binding]
        x = np.asarray(sol.x, dtype=float)
        return ScenarioResult(
            status=sol.status, feasible=True, hedged_std=rep.hedged_std,
            relaxed_std=rep.relaxed_hedged_std, variance_reduction=rep.variance_reduction,
            margin_used=rep.margin_used, contracts={i.id: i.target for i in rep.instruments},
            binding=binding, conflicts=[], stress=self._stress(sc, model, x),
            seconds=time.perf_counter() - t0, **common)


# --------------------------------------------------------------------------- parallel


_WORKER_RUNNERS: dict[str, SweepRunner] = {}


def _run_chunk(payload: dict, items: list[tuple[int, str, dict]]) -> list[tuple[int, Any]]:
    """Worker entry: solve ``items`` for the book in ``payload`` (runner cached per process)."""
    key = repr(sorted((k, repr(v)) for k, v in payload.items()))
    runner = _WORKER_RUNNERS.get(key)
    if runner is None:
        runner = SweepRunner(payload["ref"], method=payload["method"], reuse=payload["reuse"],
                             time_limit=payload["time_limit"], source=payload["source"])
        _WORKER_RUNNERS.clear()
        _WORKER_RUNNERS[key] = runner
    return [(i, runner.run(Scenario(name, settings))) for i, name, settings in items]


def _payload_ref(book: Any) -> dict:
    if isinstance(book, Book):
        return {"book": book.model_dump(by_alias=True, exclude_none=True),
                "folder": str(book.folder.resolve()), "source": book.source}
    return {"path": str(Path(book).resolve())}


def _connect(client_cls, address: str):
    """A dask client for ``address``, or one clear error naming the address."""
    try:
        return client_cls(address, timeout=30)
    except (OSError, ValueError, TimeoutError) as exc:
        raise InputError(f"cannot reach a dask scheduler at {address!r}: {exc}",
                         key="--scheduler") from None


def run_sweep(book: Any, scenarios: ScenarioSet | list[Scenario], *, method: str = "exact",
              workers: int = 1, scheduler: Any = None, progress: Progress | None = None,
              reuse: bool = True, time_limit: float = 30.0, runner: SweepRunner | None = None,
              pool: ProcessPoolExecutor | None = None) -> SweepResult:
    """Solve every scenario of ``book``.

    Parameters
    ----------
    book : Book, str or Path
        The book (a path is sent to workers as is; a Book as a dict with its folder).
    scenarios : ScenarioSet or list of Scenario
        Validated scenarios (see :func:`optimizer.sweeps.scenario_file.load_scenarios`).
    method : {"exact", "round", "continuous"}
    workers : int
        1 runs serially in this process; more starts that many local worker processes.
    scheduler : str or distributed.Client, optional
        A dask.distributed scheduler address (or client): run the chunks there instead.
    progress : callable(done, total), optional
        Called as scenarios finish.
    reuse : bool
        Re-use the cached cvxpy problem per structure (``False`` rebuilds it every solve).
    runner, pool : optional
        An existing serial runner / process pool to use (benchmarks keep them warm).

    Raises
    ------
    InputError
        Bad estimation settings in a scenario (naming it), before anything is solved.
    """
    t0 = time.perf_counter()
    scs = list(scenarios)
    source = getattr(scenarios, "source", "scenarios")
    main = runner or SweepRunner(book, method=method, reuse=reuse, time_limit=time_limit,
                                 source=source)
    for sc in scs:  # preflight: every estimation setting is valid before anything runs
        main.estimation(sc)
    total, done = len(scs), 0
    results: list[Any] = [None] * total
    items = [(i, sc.name, sc.settings) for i, sc in enumerate(scs)]
    parallel = scheduler is not None or workers > 1
    if not parallel:
        mode = "serial"
        for i, sc in enumerate(scs):
            results[i] = main.run(sc)
            if progress:
                progress(i + 1, total)
    else:
        payload = {"ref": _payload_ref(book), "method": method, "reuse": reuse,
                   "time_limit": time_limit, "source": source}
        if scheduler is not None:
            from distributed import Client
            from distributed import as_completed as dask_completed

            client = scheduler if isinstance(scheduler, Client) else _connect(Client, scheduler)
            try:
                n_workers = max(1, len(client.scheduler_info().get("workers", {})))
                futs = [client.submit(_run_chunk, payload, ch, pure=False)
                        for ch in _chunks(items, 4 * n_workers)]
                mode = f"dask ({n_workers} workers at {client.scheduler.address})"
                done = _collect(dask_completed(futs), results, done, total, progress)
            finally:
                if client is not scheduler:
                    client.close()
        else:
            mode = f"{workers} local processes"
            done, note = run_local(_run_chunk, items, payload, workers, pool, results, total,
                                   progress)
            if note:
                mode += f" ({note})"
                for i, sc in enumerate(scs):
                    if results[i] is None:
                        results[i] = main.run(sc)
                        done += 1
                        if progress:
                            progress(done, total)
    b = main.book
    return SweepResult(book=b.book.name, currency=b.book.currency,
                       horizon_days=b.book.horizon_days, method=method, mode=mode,
                       results=results, seconds=time.perf_counter() - t0,
                       instruments=[i.id for i in b.instruments])


def default_workers(n_scenarios: int) -> int:
    """Local processes for an automatic choice: serial for small sweeps."""
    return 1 if n_scenarios < 64 else max(1, min(os.cpu_count() or 1, 4))
