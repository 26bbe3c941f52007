"""Scale run: 500 exposures × 100 futures × 5,000 days — estimation plus continuous solve.

Goal (issue 3): wall time ≤ 2 s and peak memory ≤ 1 GiB on a 2-core machine. Baseline named in
the output: the same pipeline with the sample covariance and the unconstrained closed form
``n* = −A⁻¹ b`` by numpy (no limits, no cvxpy), i.e. the least work any method must do.

Run: ``python benchmarks/scale_estimation.py [--exposures 500 --instruments 100 --days 5000]``.
"""

from __future__ import annotations

import argparse
import time
import tracemalloc

import numpy as np
import pandas as pd

from basiswise.data_adapters.book import Book
from basiswise.optimizer.estimation.changes import horizon_changes
from basiswise.optimizer.estimation.covariance import estimate_covariance
from basiswise.optimizer.problem.model import build_hedge_model
from basiswise.optimizer.solvers.dispatch import solve_qp


def synthetic(n_exp: int, n_ins: int, days: int, seed: int = 5):
    """Invented prices: a few factors, exposures as noisy mixes of futures; positive levels."""
    rng = np.random.default_rng(seed)
    k = n_exp + n_ins
    f = rng.normal(size=(days, 8)) * 0.01
    load = rng.normal(size=(8, k))
    r = f @ load / np.sqrt(8) + rng.normal(size=(days, k)) * 0.006
    prices = 50.0 * np.exp(np.cumsum(r, axis=0))
    cols = [f"x{i}" for i in range(n_exp)] + [f"f{j}" for j in range(n_ins)]
    frame = pd.DataFrame(prices, columns=cols,
                         index=pd.bdate_range("2000-01-03", periods=days))
    data = {
        "book": {"name": "scale", "currency": "USD", "horizon_days": 20},
        "data": {"prices": "unused.csv"},
        "estimation": {"window": days, "changes": "relative", "estimator": "ledoit-wolf",
                       "sampling": "overlapping"},
        "series": {c: {"unit": "USD/bbl"} for c in cols},
        "exposure": [{"id": f"e{i}", "series": f"x{i}", "unit": "bbl",
                      "quantity": float(rng.integers(-50_000, 50_000) or 1)}
                     for i in range(n_exp)],
        "instrument": [{"id": f"F{j}", "series": f"f{j}", "unit": "bbl", "contract_size": 1000.0,
                        "position_limit": 500.0, "adv": 2000.0, "margin": 5000.0}
                       for j in range(n_ins)],
        "constraints": {"margin_budget": 2.0e7},
    }
    return Book.from_dict(data, ".", "scale.toml"), frame


def run(book: Book, frame: pd.DataFrame, estimator: str, baseline: bool) -> tuple[float, float]:
    tracemalloc.start()
    t0 = time.perf_counter()
    ch = horizon_changes(frame, horizon_days=20, kind="relative", sampling="overlapping")
    est = estimate_covariance(ch.values, estimator)
    model = build_hedge_model(book, ch, est, fractional=True)
    if baseline:
        np.linalg.solve(model.qp.A + 1e-12 * np.eye(model.qp.n), -model.qp.b)
    else:
        sol = solve_qp(model.qp, "continuous")
        assert sol.ok, sol.status
    dt = time.perf_counter() - t0
    peak = tracemalloc.get_traced_memory()[1] / 2**20
    tracemalloc.stop()
    return dt, peak


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--exposures", type=int, default=500)
    ap.add_argument("--instruments", type=int, default=100)
    ap.add_argument("--days", type=int, default=5000)
    a = ap.parse_args()
    book, frame = synthetic(a.exposures, a.instruments, a.days)
    print(f"scale run: {a.exposures} exposures × {a.instruments} futures × {a.days} days "
          f"(Python heap peak by tracemalloc; numpy buffers included)")
    base_t, base_m = run(book, frame, "sample", baseline=True)
    print(f"{'pipeline':54s} {'wall s':>8s} {'peak MiB':>9s} {'vs baseline':>12s}")
    print(f"{'baseline: sample cov + numpy closed form':54s} {base_t:8.2f} {base_m:9.0f} "
          f"{1.0:11.2f}×")
    for est in ("ledoit-wolf", "constant-correlation", "sample"):
        run(book, frame, est, baseline=False)  # warm caches and imports
        t, m = run(book, frame, est, baseline=False)
        print(f"{'estimate (' + est + ') + limits + cvxpy solve':54s} {t:8.2f} {m:9.0f} "
              f"{t / base_t:11.2f}×")
    print("goal: ≤ 2.00 s and ≤ 1024 MiB for estimation + continuous solve")


if __name__ == "__main__":
    main()
