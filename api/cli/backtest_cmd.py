"""The ``basiswise backtest BOOK`` command: rolling out-of-sample comparison of hedges."""

from __future__ import annotations

import json
from pathlib import Path

import typer
from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeElapsedColumn
from rich.table import Table

from .common import book_inputs, check_outputs, err, fail, guarded, out
from .tables import cautions_panel, money, num, pct


def _names(text: str | None, valid: tuple[str, ...], default: list[str], what: str) -> list[str]:
    if text is None:
        return default
    if text.strip() == "all":
        return list(valid)
    names = [t.strip() for t in text.split(",") if t.strip()]
    bad = [t for t in names if t not in valid]
    if bad or not names:
        fail(f"unknown {what} {', '.join(bad) or repr(text)}; valid: {', '.join(valid)}, all")
    return names


def ranking_table(result) -> Table:
    """Runs ranked by realised out-of-sample variance reduction."""
    cur, h = result.currency, result.horizon_days
    t = Table(title=f"Backtest — {result.book.book.name}: {len(result.dates)} rebalances every "
                    f"{result.step} days, {h}-day horizon, window {result.window} rows "
                    f"({result.dates[0].date()} to {result.horizon_end[-1].date()})",
              title_justify="left")
    for name, just in [("rank", "right"), ("strategy", "left"), ("estimator", "left"),
                       ("realised VR", "right"), ("in-sample VR", "right"),
                       (f"hedged std {cur}", "right"), (f"worst {h}-d loss {cur}", "right"),
                       ("contracts traded", "right"), (f"trading cost {cur}", "right"),
                       ("held", "right")]:
        wide = {"strategy": 16, "estimator": 11}.get(name)
        t.add_column(name, justify=just, min_width=wide, no_wrap=wide is not None)
    for rank, m in enumerate(result.metrics(), 1):
        t.add_row(str(rank), m.strategy, m.estimator or "—", pct(m.variance_reduction),
                  pct(m.predicted_vr), money(m.hedged_std), money(m.worst_loss),
                  num(m.contracts_traded), money(m.trading_cost), str(m.held))
    return t


def effectiveness_table(result) -> Table:
    """Regression and dollar-offset evidence for the best run, per hedge relationship."""
    best = result.best()
    t = Table(title=f"Effectiveness evidence — {best.label} (holding-period P&L)",
              title_justify="left")
    for name in ["relationship", "periods", "slope", "R²", "regression test",
                 "cumulative dollar offset", "offset test"]:
        t.add_column(name, justify="left" if name == "relationship" else "right")
    word = {True: "[green]inside[/]", False: "[red]outside[/]", None: "—"}
    for e in result.effectiveness(best):
        t.add_row(e.group, str(e.periods), num(e.slope, 3), num(e.r2, 3),
                  word[e.regression_ok], pct(e.dollar_offset), word[e.offset_ok])
    t.caption = ("Each test against its common-practice band. A cumulative dollar offset is "
                 "unstable when the exposure's summed P&L is near zero; over long histories "
                 "the regression test is the steadier evidence.")
    return t


def register(app: typer.Typer) -> None:
    """Add the ``backtest`` command to ``app``."""

    @app.command()
    @guarded
    def backtest(
        book: Path = typer.Argument(..., help="Book file (TOML).", show_default=False),
        every: int | None = typer.Option(
            None, "--every", "-k", help="Business days between rebalances [default: horizon]."),
        strategies: str | None = typer.Option(
            None, "--strategies", help="Comma list or 'all' [default: all]: unhedged, "
            "one-to-one, single-mv, joint-continuous, joint-whole."),
        estimators: str | None = typer.Option(
            None, "--estimators", help="Comma list or 'all' [default: the book's]: sample, "
            "ledoit-wolf, oas, constant-correlation, ewma."),
        method: str = typer.Option("exact", "--method", "-m",
                                   help="Whole contracts for joint-whole: exact | round."),
        window: int | None = typer.Option(None, help="Override [estimation].window (rows)."),
        horizon: int | None = typer.Option(None, help="Override [book].horizon_days."),
        time_limit: float = typer.Option(10.0, help="Seconds per whole-contract solve."),
        as_json: bool = typer.Option(False, "--json", help="Print one JSON object on stdout."),
        png: Path | None = typer.Option(None, "--png", help="Write the cumulative P&L chart."),
        workers: int = typer.Option(1, "--workers",
                                    help="Local processes (one estimator per job)."),
    ) -> None:
        """Rolling out-of-sample backtest: each strategy and estimator, ranked by realised
        variance reduction, with hedge-effectiveness evidence."""
        from basiswise.optimizer.backtest.effectiveness import EVIDENCE_NOTE
        from basiswise.optimizer.backtest.engine import WHOLE_METHODS, run_backtest
        from basiswise.optimizer.backtest.strategies import STRATEGIES
        from basiswise.optimizer.estimation.covariance import ESTIMATORS
        from basiswise.optimizer.pipeline import prepare
        from basiswise.optimizer.results.cautions import CAUTIONS

        if method not in WHOLE_METHODS:
            fail(f"unknown method '{method}'; valid: {', '.join(WHOLE_METHODS)}")
        check_outputs({"--png": png}, book_inputs(book))
        prep = prepare(book, window=window, horizon_days=horizon)
        strat = _names(strategies, STRATEGIES, list(STRATEGIES), "strategy")
        ests = _names(estimators, ESTIMATORS, [prep.book.estimation.estimator], "estimator")
        with Progress(TextColumn("backtest"), BarColumn(), MofNCompleteColumn(),
                      TimeElapsedColumn(), console=err, transient=True,
                      disable=as_json) as bar:
            task = bar.add_task("rebalances", total=None)
            tick = lambda done, total: bar.update(task, completed=done, total=total)  # noqa: E731
            if workers > 1 and len(ests) > 1:
                from basiswise.optimizer.backtest.parallel import run_backtest_parallel

                result = run_backtest_parallel(prep, step=every, strategies=strat,
                                               estimators=ests, method=method,
                                               time_limit=time_limit, workers=workers,
                                               progress=tick)
            else:
                result = run_backtest(prep, step=every, strategies=strat, estimators=ests,
                                      method=method, time_limit=time_limit, progress=tick)
        if png is not None:
            from basiswise.optimizer.backtest.chart import write_backtest_png

            write_backtest_png(result, png)
        if as_json:
            print(json.dumps(result.to_dict(), indent=2))
            return
        out.print(ranking_table(result))
        out.print("[dim]VR = variance reduction 1 − Var(hedged)/Var(unhedged) of the realised "
                  "horizon P&Ls; in-sample VR = what the estimate promised; held = rebalances "
                  "where the previous positions were kept.[/]")
        out.print(effectiveness_table(result))
        out.print(f"[dim]{EVIDENCE_NOTE}[/]")
        for note in prep.notes + result.notes:
            out.print(f"[dim]note: {note}[/]")
        if png is not None:
            out.print(f"chart written to [bold]{png}[/]")
        out.print(cautions_panel(CAUTIONS))
