"""Integer hedge at desk scale: exact enumeration vs cvxpy+SCIP vs naive rounding vs relaxation.

Run ``python benchmarks/integer_scale.py`` (full, several minutes) or ``--quick`` (smoke run).
For n = 8, 16, 24, 48 curve-structured books (:mod:`curve_books`) in the small-count and the
large-count regime it prints, per book: wall time and residual variance (fraction of unhedged) of
``optimizer.solvers.exact.solve_exact``, of cvxpy+SCIP under a time limit, of naive rounding and of
the continuous relaxation, the speed-up against SCIP and the objective ratio against rounding. For
n = 48 the median over several seeds is printed as well. All times are wall-clock seconds on this
machine; the relaxation time is included in the exact solver's time. At the end one exact solve
of the demo book (``scenarios/demo/book.toml``, group limits and a margin budget) is timed, as the
backtest calls it (own relaxation passed in, constant offset stripped), median of 7 runs.
"""

from __future__ import annotations

import argparse
import statistics
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))  # curve_books; basiswise is installed

from curve_books import curve_book  # noqa: E402

from basiswise.optimizer.problem.formulation import solve_relaxed, solve_scip  # noqa: E402
from basiswise.optimizer.solvers.exact import solve_exact  # noqa: E402
from basiswise.optimizer.solvers.rounding import naive_round  # noqa: E402


def run_one(n: int, regime: str, seed: int, exact_limit: float, scip_limit: float,
            repeats: int = 9) -> dict:
    """Solve one book every way and return the measurements.

    When SCIP finishes in under a second, both solvers are timed ``repeats`` times, alternating
    (exact, SCIP, exact, SCIP, …) so that each call follows the other solver's, and the medians
    are reported; otherwise one call each.
    """
    qp = curve_book(n, regime, seed)
    t = time.perf_counter()
    rel = solve_relaxed(qp, reuse=False)
    t_rel = time.perf_counter() - t
    t = time.perf_counter()
    ex = solve_exact(qp, time_limit=exact_limit)
    t_ex = time.perf_counter() - t
    xr = naive_round(qp, rel.x)
    t = time.perf_counter()
    sc = solve_scip(qp, time_limit=scip_limit, reuse=False)
    t_sc = time.perf_counter() - t
    sc_obj = sc.objective if sc.x is not None else float("nan")
    sc_done = sc.status == "optimal" and t_sc < scip_limit * 0.98
    runs = 1
    if sc_done and t_sc < 1.0 and ex.status == "certified":
        te, ts = [t_ex], [t_sc]
        for _ in range(repeats - 1):
            t = time.perf_counter()
            solve_exact(qp, time_limit=exact_limit)
            te.append(time.perf_counter() - t)
            t = time.perf_counter()
            solve_scip(qp, time_limit=scip_limit, reuse=False)
            ts.append(time.perf_counter() - t)
        t_ex, t_sc, runs = statistics.median(te), statistics.median(ts), repeats
    return dict(n=n, regime=regime, seed=seed, rel=rel.objective, t_rel=t_rel,
                ex=ex.objective, ex_bound=ex.bound, ex_status=ex.status, ex_gap=ex.gap,
                ex_nodes=ex.nodes, t_ex=t_ex, rnd=qp.value(xr), rnd_ok=qp.is_feasible(xr),
                sc=sc_obj, sc_status=sc.status, sc_done=sc_done, t_sc=t_sc, runs=runs)


def demo_book_timing(repeats: int = 7) -> dict:
    """Median wall time and nodes of one exact solve of the demo book, as the backtest runs it."""
    from dataclasses import replace

    from basiswise.optimizer.pipeline import model_of, prepare

    book = Path(__file__).resolve().parents[1] / "scenarios" / "demo" / "book.toml"
    qp = replace(model_of(prepare(book)).qp, offset=0.0)
    times, res = [], None
    for _ in range(repeats):
        rel = solve_relaxed(qp)
        t = time.perf_counter()
        res = solve_exact(qp, relaxed=rel)
        times.append(time.perf_counter() - t)
    t = time.perf_counter()
    warm = solve_exact(qp, relaxed=solve_relaxed(qp), start=res.x)
    t_warm = time.perf_counter() - t
    return dict(seconds=statistics.median(times), nodes=res.nodes, status=res.status,
                warm_seconds=t_warm, warm_nodes=warm.nodes)


def _secs(t: float) -> str:
    return f"{t:.4f}" if t < 0.1 else f"{t:.2f}"


def fmt_row(r: dict) -> list[str]:
    speed = r["t_sc"] / r["t_ex"] if r["t_ex"] > 0 else float("inf")
    sc_tag = "" if r["sc_done"] else " (limit)"
    return [
        f"{r['n']}", r["regime"], f"{r['seed']}", f"{r['runs']}",
        _secs(r["t_ex"]), r["ex_status"], f"{r['ex_gap']:.1e}", f"{r['ex_nodes']}",
        f"{r['ex']:.6f}", _secs(r["t_sc"]) + sc_tag, f"{r['sc']:.6f}", f"{r['rnd']:.6f}"
        + ("" if r["rnd_ok"] else "*"), f"{r['rel']:.6f}",
        f"{speed:.1f}x", f"{r['ex'] / r['rnd']:.4f}" if r["rnd"] > 0 else "-",
    ]


HEADER = ["n", "regime", "seed", "runs", "exact s", "status", "gap", "nodes", "exact var",
          "SCIP s", "SCIP var", "round var", "relaxed var", "speed-up", "exact/round"]


def print_table(rows: list[list[str]]) -> None:
    widths = [max(len(h), *(len(r[i]) for r in rows)) for i, h in enumerate(HEADER)]
    line = " | ".join(h.rjust(w) for h, w in zip(HEADER, widths, strict=True))
    print(line)
    print("-" * len(line))
    for r in rows:
        print(" | ".join(c.rjust(w) for c, w in zip(r, widths, strict=True)))


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="n = 8 and 16, one seed, short limits")
    ap.add_argument("--seeds", type=int, default=3, help="seeds for the n = 48 median")
    ap.add_argument("--exact-limit", type=float, default=30.0)
    ap.add_argument("--scip-limit", type=float, default=60.0)
    args = ap.parse_args(argv)
    sizes = [8, 16] if args.quick else [8, 16, 24, 48]
    exact_limit = 5.0 if args.quick else args.exact_limit
    scip_limit = 5.0 if args.quick else args.scip_limit
    seeds48 = 1 if args.quick else args.seeds
    from basiswise.optimizer.solvers.native_search import native_search

    print(f"exact time limit {exact_limit:g} s, SCIP time limit {scip_limit:g} s; "
          "variances are fractions of the unhedged variance; * = rounding breaks a limit; "
          f"search engine: {'compiled' if native_search() else 'pure Python'}; runs > 1: "
          "medians of alternating repeats")
    results = []
    for regime in ("small", "large"):
        for n in sizes:
            for seed in range(seeds48 if n == 48 else 1):
                r = run_one(n, regime, seed, exact_limit, scip_limit)
                results.append(r)
                print("  done", n, regime, seed, f"exact {r['t_ex']:.2f}s {r['ex_status']}, "
                      f"SCIP {r['t_sc']:.2f}s {r['sc_status']}", flush=True)
    print()
    print_table([fmt_row(r) for r in results])
    print()
    for regime in ("small", "large"):
        rs = [r for r in results if r["n"] == max(sizes) and r["regime"] == regime]
        if not rs:
            continue
        med_ex = statistics.median(r["t_ex"] for r in rs)
        cert = sum(r["ex_status"] == "certified" for r in rs)
        med_sc = statistics.median(r["t_sc"] for r in rs)
        print(f"n = {max(sizes)} {regime}: exact median {med_ex:.2f} s ({cert}/{len(rs)} "
              f"certified), SCIP median {med_sc:.2f} s, median gap "
              f"{statistics.median(r['ex_gap'] for r in rs):.1e}")
    finished = [r for r in results if r["sc_done"]]
    if finished:
        sp = [r["t_sc"] / r["t_ex"] for r in finished]
        print(f"speed-up where SCIP finished ({len(finished)} books): min {min(sp):.1f}x, "
              f"median {statistics.median(sp):.1f}x")
    worse = [r for r in results if r["rnd_ok"] and r["ex"] > r["rnd"] + 1e-12]
    print(f"books where exact is worse than feasible naive rounding: {len(worse)}")
    lower = [r for r in results if np.isfinite(r["sc"]) and r["sc"] < r["ex"] - 1e-9]
    print(f"books where SCIP found a better point than exact: {len(lower)}")
    d = demo_book_timing()
    print(f"demo book, one exact solve (relaxation passed in): median {d['seconds']:.3f} s, "
          f"{d['nodes']} nodes, {d['status']}; with its optimum as start "
          f"{d['warm_seconds']:.3f} s, {d['warm_nodes']} nodes")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
