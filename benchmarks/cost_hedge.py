"""Trading cost in the hedge: the demo backtest net of cost, and the exact solver with costs.

Part 1 — the demo book's backtest (window, horizon and step of the book, Ledoit–Wolf, exact
whole contracts), printed in one run against two named baselines:

* ``joint-whole`` — today's variance-only joint whole-contract hedge (baseline 1),
* ``joint-whole-cost`` — the same with the book's ``[costs] price_of_risk`` in the problem,
* ``single-mv`` — the single-ratio rule per exposure (baseline 2),

with realised variance reduction gross and net of cost, contracts traded and cost paid.
Goals: the cost-aware hedge trades ≤ 1/2 of baseline 1's contracts, keeps VR within 0.5 pp of
it, and beats single-mv net of cost.

Part 2 — the exact whole-contract solver with costs on the 48-instrument curve books of
``benchmarks/curve_books.py`` (small and large regimes, 5 seeds each), with invented costs:
positions held now are a random share of the risk-only hedge, and the linear and impact cost
coefficients are set so that the risk-only hedge's trades cost about 0.02 + 0.02 of the unhedged
variance at the price of risk. Baseline: the same books without costs. Goal: all certified,
median ≤ 5 s.

Run: ``python benchmarks/cost_hedge.py [--quick]`` (quick: 2 seeds per regime).
"""

from __future__ import annotations

import argparse
import os
import platform
import statistics
import sys
import time
from dataclasses import replace
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "benchmarks"))  # curve_books; basiswise is installed

BOOK = ROOT / "scenarios" / "demo" / "book.toml"


def backtest_part() -> list[str]:
    from basiswise.optimizer.backtest.engine import run_backtest

    t0 = time.perf_counter()
    res = run_backtest(BOOK, strategies=["single-mv", "joint-whole", "joint-whole-cost"],
                       method="exact")
    secs = time.perf_counter() - t0
    m = {x.strategy: x for x in res.metrics()}
    lines = [f"demo backtest: {len(res.dates)} rebalances every {res.step} days, window "
             f"{res.window}, horizon {res.horizon_days} d, ledoit-wolf, exact ({secs:.1f} s)",
             f"{'strategy':18s} {'VR gross':>9s} {'VR net':>9s} {'contracts':>10s} "
             f"{'cost USD':>10s} {'turnover USD':>14s}"]
    for name in ("joint-whole", "joint-whole-cost", "single-mv"):
        x = m[name]
        lines.append(f"{name:18s} {100 * x.variance_reduction:8.2f}% "
                     f"{100 * x.net_variance_reduction:8.2f}% {x.contracts_traded:10.0f} "
                     f"{x.trading_cost:10,.0f} {x.turnover:14,.0f}")
    base, cost, single = m["joint-whole"], m["joint-whole-cost"], m["single-mv"]
    share = cost.contracts_traded / base.contracts_traded
    dvr = 100 * (base.variance_reduction - cost.variance_reduction)
    beat = cost.net_variance_reduction - single.net_variance_reduction
    por = res.book.costs.price_of_risk
    for f in (0.25, 4.0):  # how the trade-off moves with the price of risk
        other = run_backtest(BOOK, strategies=["joint-whole-cost"], method="exact",
                             price_of_risk=por * f).metrics()[0]
        lines.append(f"{'  at P = ' + format(por * f, ',.0f'):18s} "
                     f"{100 * other.variance_reduction:8.2f}% "
                     f"{100 * other.net_variance_reduction:8.2f}% "
                     f"{other.contracts_traded:10.0f} {other.trading_cost:10,.0f} "
                     f"{other.turnover:14,.0f}")
    lines += [
        f"(joint-whole-cost above at the book's P = {por:,.0f} USD per point of VR)",
        f"goal contracts ≤ 1/2 of joint-whole: {share:.2f} of it — "
        f"{'met' if share <= 0.5 else 'not met'}",
        f"goal VR within 0.5 pp of joint-whole: {dvr:+.2f} pp below — "
        f"{'met' if dvr <= 0.5 else 'not met'}",
        f"goal beats single-mv net of cost: {100 * beat:+.2f} pp — "
        f"{'met' if beat > 0 else 'not met'}",
    ]
    return lines


def with_costs(qp, seed: int):
    """The curve book with invented current positions and cost terms (price-of-risk form)."""
    from basiswise.optimizer.problem.cost_terms import CostTerms
    from basiswise.optimizer.problem.formulation import solve_relaxed

    rng = np.random.default_rng(seed + 777)
    x_star = solve_relaxed(qp).x
    cur = np.clip(np.round(x_star * rng.uniform(0.0, 1.0, qp.n)), qp.lo, qp.hi)
    t = np.abs(x_star - cur) + 1.0
    lin = rng.uniform(0.5, 1.5, qp.n)
    lin *= 0.02 / float(lin @ t)
    imp = rng.uniform(0.5, 1.5, qp.n)
    imp *= 0.02 / float(imp @ t ** 1.5)
    ct = CostTerms(current=cur, lin=lin, imp=imp, in_objective=True, budget=None,
                   min_trade=np.ones(qp.n, dtype=np.int64), to_currency=1.0)
    return replace(qp, cost=ct)


def solver_part(seeds: int, time_limit: float) -> list[str]:
    from curve_books import curve_book

    from basiswise.optimizer.solvers.dispatch import solve_qp

    lines = [f"exact solver on 48-instrument curve books ({seeds} seeds per regime, time limit "
             f"{time_limit:.0f} s)",
             f"{'book':14s} {'with costs s':>12s} {'status':>12s} {'nodes':>10s} "
             f"{'no costs s':>11s} {'status':>12s}"]
    times, certified, base_times = [], 0, []
    for regime in ("small", "large"):
        for seed in range(seeds):
            qp0 = curve_book(48, regime, seed)
            qp = with_costs(qp0, seed)
            t0 = time.perf_counter()
            sol = solve_qp(qp, "exact", time_limit=time_limit, start=qp.cost.current)
            dt = time.perf_counter() - t0
            t1 = time.perf_counter()
            ref = solve_qp(qp0, "exact", time_limit=time_limit)
            dt0 = time.perf_counter() - t1
            times.append(dt)
            base_times.append(dt0)
            certified += sol.status == "certified"
            nodes = sol.detail.split(",")[1].strip() if "," in sol.detail else ""
            lines.append(f"{regime + ' #' + str(seed):14s} {dt:12.2f} {sol.status:>12s} "
                         f"{nodes:>10s} {dt0:11.2f} {ref.status:>12s}")
    med = statistics.median(times)
    lines += [f"median with costs {med:.2f} s (no costs {statistics.median(base_times):.2f} s: "
              f"{med / max(statistics.median(base_times), 1e-9):.1f}x); certified "
              f"{certified}/{len(times)}",
              f"goal all certified: {'met' if certified == len(times) else 'not met'}; "
              f"goal median ≤ 5 s: {'met' if med <= 5 else 'not met'}"]
    return lines


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true")
    ap.add_argument("--time-limit", type=float, default=30.0)
    args = ap.parse_args()
    load = os.getloadavg()[0]
    print(f"{platform.machine()} {os.cpu_count()} cores, Python {platform.python_version()}, "
          f"load average {load:.2f} at start")
    for line in backtest_part():
        print(line)
    for line in solver_part(2 if args.quick else 5, args.time_limit):
        print(line)
    print(f"load average {os.getloadavg()[0]:.2f} at end")


if __name__ == "__main__":
    main()
