"""PNG chart of a backtest: cumulative hedged vs unhedged P&L over the holding periods.

The curve of a strategy is ``Σ_{s ≤ t} (exposures + hedge leg)`` of the P&L realised between
consecutive rebalance dates (currency), drawn with matplotlib's non-interactive Agg backend and
written atomically (temporary file, then rename).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from basiswise.data_adapters.output import atomic_path

from .engine import BacktestResult, Run


def chart_runs(result: BacktestResult, limit: int = 4) -> list[Run]:
    """The runs drawn: the unhedged book and the best run of each hedging strategy (≤ limit)."""
    picked: dict[str, Run] = {}
    for m in result.metrics():
        if m.strategy not in picked:
            picked[m.strategy] = result.run(m.strategy, m.estimator)
    hedges = [r for s, r in picked.items() if s != "unhedged"][:limit]
    return [result.run("unhedged")] + hedges if "unhedged" in picked else hedges


def write_backtest_png(result: BacktestResult, path: str | Path, *, limit: int = 4) -> Path:
    """Draw cumulative P&L of the unhedged book and the best runs; write ``path`` (PNG)."""
    import matplotlib

    matplotlib.use("Agg")
    from matplotlib.figure import Figure

    fig = Figure(figsize=(10, 5.5), dpi=110)
    ax = fig.add_subplot(1, 1, 1)
    dates = result.held_end
    unhedged = np.cumsum(result.exposure_held.sum(axis=1))
    ax.plot(dates, unhedged, color="0.45", lw=1.6, label="unhedged exposures")
    for run in chart_runs(result, limit):
        if run.strategy == "unhedged":
            continue
        ax.plot(dates, np.cumsum(result.hedged_held(run)), lw=1.3, label=f"hedged: {run.label}")
    ax.axhline(0.0, color="0.8", lw=0.8)
    cur = result.currency
    ax.set_title(f"{result.book.book.name}: cumulative P&L, rebalanced every {result.step} days "
                 f"(out of sample)", fontsize=10)
    ax.set_ylabel(f"cumulative P&L ({cur})")
    ax.yaxis.set_major_formatter(matplotlib.ticker.FuncFormatter(lambda v, _: f"{v:,.0f}"))
    ax.legend(loc="best", fontsize=8)
    ax.grid(alpha=0.3)
    fig.text(0.01, 0.01, "Estimates from price history; past hedge performance does not promise "
             "future performance.", fontsize=7, color="0.4")
    fig.tight_layout(rect=(0, 0.03, 1, 1))
    target = Path(path)
    with atomic_path(target) as tmp:
        fig.savefig(tmp, format="png")
    return target
