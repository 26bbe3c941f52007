"""Backtest scale: ten years of daily demo prices, 5 estimators × 5 strategies, every 20 days.

Measures, each configuration in a fresh subprocess (clean peak memory):

* wall time of :func:`optimizer.backtest.engine.run_backtest` (whole contracts by ``round`` and,
  unless ``--quick``, by ``exact``),
* peak resident memory of the process (``resource.getrusage``, ru_maxrss),
* the ratio against the baseline that rebuilds the cvxpy problem at every solve
  (``reuse=False``) instead of re-using its Parameters (DPP).

Run: ``python benchmarks/backtest_scale.py [--quick]``. Goal: ≤ 60 s for the full grid with reuse.
"""

from __future__ import annotations

import argparse
import json
import platform
import resource
import subprocess
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
BOOK = ROOT / "scenarios" / "demo" / "book.toml"
ESTIMATORS = ["sample", "ledoit-wolf", "oas", "constant-correlation", "ewma"]


def one(config: dict) -> dict:
    """Run one configuration in this process and measure it."""
    from basiswise.optimizer.backtest.engine import run_backtest
    from basiswise.optimizer.pipeline import prepare

    prep = prepare(BOOK)
    t0 = time.perf_counter()
    if config.get("workers", 1) > 1:
        from basiswise.optimizer.backtest.parallel import run_backtest_parallel

        res = run_backtest_parallel(prep, step=20, estimators=config["estimators"],
                                    method=config["method"], reuse=config["reuse"],
                                    workers=config["workers"])
    else:
        res = run_backtest(prep, step=20, estimators=config["estimators"],
                           method=config["method"], reuse=config["reuse"])
    wall = time.perf_counter() - t0
    best = res.metrics()[0]
    solves = len(res.dates) * len(config["estimators"]) * 2
    return {"wall": wall, "peak_mb": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024,
            "rows": len(prep.panel.prices), "rebalances": len(res.dates), "runs": len(res.runs),
            "solves": solves, "best": f"{best.strategy} / {best.estimator}",
            "best_vr": best.variance_reduction}


def measure(config: dict) -> dict:
    cmd = [sys.executable, __file__, "--one", json.dumps(config)]
    done = subprocess.run(cmd, capture_output=True, text=True, check=True, cwd=ROOT)
    return {**config, **json.loads(done.stdout.strip().splitlines()[-1])}


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="one estimator, round only")
    ap.add_argument("--one", help=argparse.SUPPRESS)
    args = ap.parse_args()
    if args.one:
        print(json.dumps(one(json.loads(args.one))))
        return
    ests = ["ledoit-wolf"] if args.quick else ESTIMATORS
    configs = [("round", True), ("round", False)]
    configs = [(m, r, 1) for m, r in configs]
    if not args.quick:
        configs += [("exact", True, 1), ("exact", True, 2)]
    rows = [measure({"estimators": ests, "method": m, "reuse": r, "workers": w})
            for m, r, w in configs]
    base = {r["method"]: r for r in rows if not r["reuse"]}
    serial_exact = next((r for r in rows if r["method"] == "exact" and r["workers"] == 1), None)
    print(f"backtest_scale on {platform.processor() or platform.machine()}, Python "
          f"{platform.python_version()}; demo book, {rows[0]['rows']} daily rows, "
          f"{rows[0]['rebalances']} rebalances every 20 days, {len(ests)} estimator(s) × 5 "
          f"strategies = {rows[0]['runs']} runs")
    head = f"{'whole contracts':16s} {'cvxpy problem':24s} {'wall s':>8s} {'peak MB':>8s} " \
           f"{'ms/solve':>9s} {'vs rebuild':>11s}"
    print(head)
    print("-" * len(head))
    for r in rows:
        ref = base.get(r["method"]) if r["reuse"] else None
        ratio = f"{ref['wall'] / r['wall']:.1f}x faster" if ref else (
            "baseline" if not r["reuse"] else "—")
        how = "built once, re-used" if r["reuse"] else "rebuilt every solve"
        if r["workers"] > 1:
            how = f"re-used, {r['workers']} processes"
            ratio = f"{serial_exact['wall'] / r['wall']:.1f}x serial"
        print(f"{r['method']:16s} {how:24s} {r['wall']:8.1f} {r['peak_mb']:8.0f} "
              f"{1000 * r['wall'] / r['solves']:9.1f} {ratio:>11s}")
    goal = next(r for r in rows if r["method"] == "round" and r["reuse"])
    for r in rows:
        if r["reuse"]:
            print(f"goal ≤ 60 s for the grid ({r['method']}, {r['workers']} process(es)): "
                  f"{r['wall']:.1f} s — {'met' if r['wall'] <= 60 else 'NOT met'}")
    print(f"best run: {goal['best']}, realised variance reduction {100 * goal['best_vr']:.1f} %")


if __name__ == "__main__":
    main()
