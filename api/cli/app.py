"""``basiswise`` command line: a thin typer layer over :mod:`optimizer.pipeline`."""

from __future__ import annotations

import contextlib
import json
import shutil
import sys
from importlib import resources
from pathlib import Path

import typer
from rich.table import Table

from .common import EXIT_NO_HEDGE, err, fail, guarded, out

app = typer.Typer(add_completion=False, no_args_is_help=True,
                  help="Joint minimum-variance cross hedges in whole futures contracts.")

BookArg = typer.Argument(..., help="Book file (TOML).", show_default=False, metavar="BOOK")
MethodOpt = typer.Option("exact", "--method", "-m",
                         help="exact (whole contracts, proven) | round | continuous")


def _write_trades(report, path: Path) -> None:
    from basiswise.data_adapters.output import write_csv_atomic

    write_csv_atomic(report.trade_list(), path)


def _schedule_path(trades: Path | None, schedule: Path | None, report) -> Path | None:
    """Where the schedule goes: ``--schedule``, else beside the trade list when it is needed."""
    if schedule is not None:
        return schedule
    if trades is not None and report.schedule is not None and report.schedule["needed"]:
        return trades.with_name(f"{trades.stem}_schedule.csv")
    return None


def _write_execution(report, trades, schedule, frontier_png, frontier_csv=None) -> list[str]:
    from basiswise.data_adapters.output import write_csv_atomic
    from basiswise.optimizer.results.desk_fields import schedule_frame

    done = []
    path = _schedule_path(trades, schedule, report)
    if path is not None:
        write_csv_atomic(schedule_frame(report), path)
        done.append(f"execution schedule written to [bold]{path}[/]")
    if frontier_csv is not None and report.frontier:
        import pandas as pd

        write_csv_atomic(pd.DataFrame(report.frontier), frontier_csv)
        done.append(f"risk–cost frontier written to [bold]{frontier_csv}[/]")
    if frontier_png is not None and report.frontier:
        from basiswise.optimizer.sweeps.cost_frontier import FrontierPoint, write_cost_frontier_png

        pts = [FrontierPoint(**p) for p in report.frontier]
        write_cost_frontier_png(pts, frontier_png, currency=report.currency,
                                unhedged_std=report.unhedged_std)
        done.append(f"risk–cost frontier chart written to [bold]{frontier_png}[/]")
    return done


def _solve_and_show(book, method, trades, as_json, time_limit, schedule=None,
                    frontier_png=None, frontier=True, frontier_csv=None, **overrides) -> None:
    from basiswise.optimizer.pipeline import solve_book

    from .cost_tables import print_execution
    from .tables import print_report

    if method not in ("exact", "round", "continuous"):
        fail(f"unknown method '{method}'; valid: exact, round, continuous")
    if trades is not None and method == "continuous":
        fail("--trades needs whole contracts: use --method exact or round")
    busy = (err.status("estimating and solving the hedge…") if err.is_terminal
            else contextlib.nullcontext())
    with busy:
        report = solve_book(book, method, time_limit=time_limit, frontier=frontier,
                            **overrides)
    if not report.ok:
        if as_json:
            print(json.dumps(report.to_dict(), indent=2))
        else:
            print_report(report, out)
        fail(f"{book}: no feasible hedge ({report.status}); no trade list written",
             EXIT_NO_HEDGE)
    if trades is not None:
        _write_trades(report, trades)
    written = _write_execution(report, trades, schedule, frontier_png, frontier_csv)
    if as_json:
        print(json.dumps(report.to_dict(), indent=2))
    else:
        print_report(report, out)
        print_execution(report, out)
        if trades is not None:
            out.print(f"trade list written to [bold]{trades}[/]")
        for line in written:
            out.print(line)
        if report.schedule and report.schedule["needed"] and \
                _schedule_path(trades, schedule, report) is None:
            out.print("[dim]a line needs more than one day at its cap: --schedule FILE (or "
                      "--trades FILE) writes the schedule[/]")


@app.command()
@guarded
def solve(
    book: Path = BookArg,
    method: str = MethodOpt,
    as_json: bool = typer.Option(False, "--json", help="Print one JSON object on stdout."),
    trades: Path | None = typer.Option(None, "--trades", help="Write the trade list (CSV)."),
    estimator: str | None = typer.Option(None, help="Override [estimation].estimator."),
    window: int | None = typer.Option(None, help="Override [estimation].window (rows)."),
    horizon: int | None = typer.Option(None, help="Override [book].horizon_days."),
    changes: str | None = typer.Option(None, help="Override [estimation].changes."),
    sampling: str | None = typer.Option(None, help="Override [estimation].sampling."),
    time_limit: float = typer.Option(30.0, help="Seconds allowed for the whole-contract search."),
    price_of_risk: float | None = typer.Option(
        None, "--price-of-risk",
        help="Override [costs].price_of_risk: currency paid per point of variance reduction."),
    cost_budget: float | None = typer.Option(
        None, "--cost-budget", help="Override [costs].budget: most the trades may cost."),
    schedule: Path | None = typer.Option(
        None, "--schedule", help="Write the per-day execution schedule (CSV)."),
    frontier_png: Path | None = typer.Option(
        None, "--frontier-png", help="Write the risk–cost frontier chart (PNG)."),
    frontier: bool = typer.Option(True, "--frontier/--no-frontier",
                                  help="Compute the risk–cost frontier (several solves)."),
    frontier_csv: Path | None = typer.Option(
        None, "--frontier-csv", help="Write the risk–cost frontier points (CSV)."),
) -> None:
    """Solve the book's hedge and show it; optionally write the trade list and schedule."""
    if price_of_risk is not None and cost_budget is not None:
        fail("give --price-of-risk or --cost-budget, not both")
    _solve_and_show(book, method, trades, as_json, time_limit, schedule=schedule,
                    frontier_png=frontier_png, frontier=frontier, frontier_csv=frontier_csv,
                    estimator=estimator,
                    window=window, horizon_days=horizon, changes=changes, sampling=sampling,
                    price_of_risk=price_of_risk, budget=cost_budget)


@app.command()
@guarded
def check(book: Path = BookArg) -> None:
    """Validate a book and its prices without solving."""
    from basiswise.optimizer.pipeline import prepare

    prep = prepare(book)
    b, p = prep.book, prep.panel
    t = Table(title=f"Book '{b.book.name}' is valid", title_justify="left")
    for c in ["series", "unit", "rows", "first date", "last date", "last price"]:
        t.add_column(c, justify="right" if c in ("rows", "last price") else "left")
    for s in p.prices.columns:
        t.add_row(s, b.series[s].unit, str(len(p.prices)), str(p.first_date.date()),
                  str(p.last_date.date()), f"{p.prices[s].iloc[-1]:,.4f}")
    out.print(t)
    out.print(f"{len(b.exposures)} exposures, {len(b.instruments)} instruments, "
              f"{len(b.group_limits)} group limits; {p.dropped_rows} rows dropped by alignment; "
              f"estimator {b.estimation.estimator}, window {b.estimation.window} rows, horizon "
              f"{b.book.horizon_days} days")


@app.command()
@guarded
def report(
    book: Path = BookArg,
    output: Path = typer.Option(..., "--out", "-o", help="Markdown file to write."),
    method: str = MethodOpt,
    time_limit: float = typer.Option(30.0, help="Seconds allowed for the whole-contract search."),
) -> None:
    """Solve the book and write the hedge report (Markdown) for the hedge file."""
    from basiswise.data_adapters.output import write_text_atomic
    from basiswise.optimizer.pipeline import solve_book
    from basiswise.optimizer.results.markdown import to_markdown

    if method not in ("exact", "round", "continuous"):
        fail(f"unknown method '{method}'; valid: exact, round, continuous")
    rep = solve_book(book, method, time_limit=time_limit, frontier=True)
    if not rep.ok:
        fail(f"{book}: no feasible hedge ({rep.status}); no report written", EXIT_NO_HEDGE)
    write_text_atomic(to_markdown(rep, source=str(book)), output)
    out.print(f"hedge report written to [bold]{output}[/] (hedged std "
              f"{rep.hedged_std:,.0f} {rep.currency} over {rep.horizon_days} days)")


@app.command()
@guarded
def demo(
    folder: Path = typer.Option(Path("basiswise-demo"), "--out",
                                help="Folder for the demo book, prices and trade list."),
    method: str = MethodOpt,
) -> None:
    """Write the invented demo book into a folder, solve it and write its trade list."""
    folder.mkdir(parents=True, exist_ok=True)
    src = resources.files("basiswise.scenarios") / "demo"
    for name in ("book.toml", "prices.csv", "limit_cuts.toml"):
        item = src / name
        if item.is_file():
            with resources.as_file(item) as f:
                shutil.copyfile(f, folder / name)
    out.print(f"demo book and invented prices written to [bold]{folder}[/]")
    _solve_and_show(folder / "book.toml", method, folder / "trades.csv", False, 30.0,
                    schedule=folder / "schedule.csv", frontier_png=folder / "frontier.png")


from . import backtest_cmd, sweep_cmd  # noqa: E402  (commands register themselves)

sweep_cmd.register(app)
backtest_cmd.register(app)


def main() -> None:
    """Console-script entry point."""
    try:
        app()
    except KeyboardInterrupt:
        sys.exit(130)


if __name__ == "__main__":
    main()
