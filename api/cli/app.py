"""``basiswise`` command line: a thin typer layer over :mod:`optimizer.pipeline`."""

from __future__ import annotations

import contextlib
import json
import sys
from importlib import resources
from pathlib import Path

import typer

from basiswise.data_adapters.choices import METHODS, ChangeKind, Estimator, Method, Sampling

from .common import (
    EXIT_NO_HEDGE,
    BookArg,
    book_inputs,
    check_outputs,
    check_ranges,
    err,
    fail,
    guarded,
    out,
)
from .render import text

# help text follows the terminal width (COLUMNS) up to 200 columns; click alone stops at 80
app = typer.Typer(add_completion=False, no_args_is_help=True, rich_markup_mode=None,
                  context_settings={"max_content_width": 200},
                  help="Joint minimum-variance cross hedges in whole futures contracts.")

MethodOpt = typer.Option("exact", "--method", "-m",
                         help="exact (whole contracts, proven) | round | continuous")
JsonOpt = typer.Option(False, "--json", help="Print one JSON object on stdout.")
EstimatorOpt = typer.Option(None, help="Override [estimation].estimator.")
WindowOpt = typer.Option(None, help="Override [estimation].window (rows, at least 2).")
HorizonOpt = typer.Option(None, help="Override [book].horizon_days (at least 1).")
ChangesOpt = typer.Option(None, help="Override [estimation].changes.")
SamplingOpt = typer.Option(None, help="Override [estimation].sampling.")
TimeLimitOpt = typer.Option(30.0, help="Seconds allowed for the whole-contract search (> 0).")


def _door(method: str, time_limit: float, window: int | None, horizon: int | None) -> None:
    """Option values refused before any file is read."""
    if method not in METHODS:
        fail(f"unknown method '{method}'; valid: {', '.join(METHODS)}")
    check_ranges(time_limit=(time_limit, 0, True), window=(window, 2, False),
                 horizon=(horizon, 1, False))


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
        done.append(f"execution schedule written to {path}")
    if frontier_csv is not None and report.cost_frontier:
        import pandas as pd

        write_csv_atomic(pd.DataFrame(report.cost_frontier), frontier_csv)
        done.append(f"risk–cost frontier written to {frontier_csv}")
    if frontier_png is not None and report.cost_frontier:
        from basiswise.optimizer.sweeps.cost_frontier import FrontierPoint, write_cost_frontier_png

        pts = [FrontierPoint(**p) for p in report.cost_frontier]
        write_cost_frontier_png(pts, frontier_png, currency=report.currency,
                                unhedged_std=report.unhedged_std)
        done.append(f"risk–cost frontier chart written to {frontier_png}")
    return done


def _solve_and_show(book, method, trades, as_json, time_limit, schedule=None,
                    frontier_png=None, frontier=True, frontier_csv=None, **overrides) -> None:
    from basiswise.optimizer.pipeline import solve_book

    from .cost_tables import print_execution
    from .tables import print_report

    if trades is not None and method == "continuous":
        fail("--trades needs whole contracts: use --method exact or round")
    check_outputs({"--trades": trades, "--schedule": schedule, "--frontier-png": frontier_png,
                   "--frontier-csv": frontier_csv}, book_inputs(book))
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
    # everything is rendered before the trade list is written: a failure while showing the
    # result leaves no file behind
    if as_json:
        payload = json.dumps(report.to_dict(), indent=2)
        if trades is not None:
            _write_trades(report, trades)
        _write_execution(report, trades, schedule, frontier_png, frontier_csv)
        print(payload)
    else:
        print_report(report, out)
        print_execution(report, out)
        if trades is not None:
            _write_trades(report, trades)
            out.print(text(f"trade list written to {trades}"))
        for line in _write_execution(report, trades, schedule, frontier_png, frontier_csv):
            out.print(text(line))
        if report.schedule and report.schedule["needed"] and \
                _schedule_path(trades, schedule, report) is None:
            out.print(text("a line needs more than one day at its cap: --schedule FILE (or "
                           "--trades FILE) writes the schedule", "dim"))


@app.command()
@guarded
def solve(
    book: Path = BookArg,
    method: Method = MethodOpt,
    as_json: bool = JsonOpt,
    trades: Path | None = typer.Option(None, "--trades", help="Write the trade list (CSV)."),
    estimator: Estimator | None = EstimatorOpt,
    window: int | None = WindowOpt,
    horizon: int | None = HorizonOpt,
    changes: ChangeKind | None = ChangesOpt,
    sampling: Sampling | None = SamplingOpt,
    time_limit: float = TimeLimitOpt,
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
    _door(method, time_limit, window, horizon)
    if price_of_risk is not None and cost_budget is not None:
        fail("give --price-of-risk or --cost-budget, not both")
    _solve_and_show(book, method, trades, as_json, time_limit, schedule=schedule,
                    frontier_png=frontier_png, frontier=frontier, frontier_csv=frontier_csv,
                    estimator=estimator, window=window, horizon_days=horizon, changes=changes,
                    sampling=sampling, price_of_risk=price_of_risk, budget=cost_budget)


@app.command()
@guarded
def check(
    book: Path = BookArg,
    as_json: bool = JsonOpt,
    strict: bool = typer.Option(False, "--strict", help="Warnings and conflicts are errors."),
    stale_days: int = typer.Option(5, help="Rows of unchanged price that make a stale run."),
    jump_z: float = typer.Option(10.0, help="Robust z-score above which a move is a jump."),
) -> None:
    """Report the quality of the book's price history per series, validate the book, and warn
    about short history and limits that cannot hold together."""
    from .check_cmd import run_check

    check_ranges(stale_days=(stale_days, 2, False), jump_z=(jump_z, 0, True))
    run_check(book, out, as_json=as_json, strict=strict, stale_days=stale_days, jump_z=jump_z)


@app.command()
@guarded
def report(
    book: Path = BookArg,
    output: Path = typer.Option(..., "--out", "-o", help="Markdown file to write."),
    method: Method = MethodOpt,
    estimator: Estimator | None = EstimatorOpt,
    window: int | None = WindowOpt,
    horizon: int | None = HorizonOpt,
    changes: ChangeKind | None = ChangesOpt,
    sampling: Sampling | None = SamplingOpt,
    time_limit: float = TimeLimitOpt,
) -> None:
    """Solve the book and write the hedge report (Markdown) for the hedge file; takes the same
    overrides as solve."""
    from basiswise.data_adapters.output import write_text_atomic
    from basiswise.optimizer.pipeline import solve_book
    from basiswise.optimizer.results.markdown import to_markdown

    _door(method, time_limit, window, horizon)
    check_outputs({"--out": output}, book_inputs(book))
    rep = solve_book(book, method, time_limit=time_limit, frontier=True, estimator=estimator,
                     window=window, horizon_days=horizon, changes=changes, sampling=sampling)
    if not rep.ok:
        fail(f"{book}: no feasible hedge ({rep.status}); no report written", EXIT_NO_HEDGE)
    write_text_atomic(to_markdown(rep, source=str(book)), output)
    out.print(text(f"hedge report written to {output} (hedged std {rep.hedged_std:,.0f} "
                   f"{rep.currency} over {rep.horizon_days} days)"))


DEMO_FILES = ("book.toml", "prices.csv", "limit_cuts.toml")


@app.command()
@guarded
def demo(
    folder: Path = typer.Option(Path("basiswise-demo"), "--out",
                                help="Folder for the demo book, prices and trade list."),
    method: Method = MethodOpt,
    force: bool = typer.Option(False, "--force",
                               help="Overwrite files in the folder that differ from the demo."),
) -> None:
    """Write the invented demo book into a folder, solve it and write its trade list."""
    from basiswise.data_adapters.boundary import input_boundary
    from basiswise.data_adapters.output import atomic_write

    _door(method, 30.0, None, None)
    src = resources.files("basiswise.scenarios") / "demo"
    with input_boundary(folder, "demo folder", key="--out"):
        items = [(name, (src / name).read_bytes()) for name in DEMO_FILES
                 if (src / name).is_file()]
        clash = [name for name, data in items
                 if (folder / name).exists() and (folder / name).read_bytes() != data]
    if clash and not force:
        fail(f"{folder}: {', '.join(clash)} already there and different from the demo; "
             "nothing written (use --force to overwrite, or another --out folder)")
    with input_boundary(folder, "demo folder", key="--out"):
        folder.mkdir(parents=True, exist_ok=True)
        for name, data in items:
            atomic_write(folder / name, lambda tmp, data=data: tmp.write_bytes(data))
    out.print(text(f"demo book and invented prices written to {folder}"))
    _solve_and_show(folder / "book.toml", method, folder / "trades.csv", False, 30.0,
                    schedule=folder / "schedule.csv", frontier_png=folder / "frontier.png")


from . import backtest_cmd, sweep_cmd  # noqa: E402  (commands register themselves)

sweep_cmd.register(app)
backtest_cmd.register(app)


def main() -> None:
    """Console-script entry point."""
    try:
        app()
    except KeyboardInterrupt as exc:  # outside a command (e.g. while starting up)
        from basiswise.optimizer.interrupts import exit_code

        sys.exit(exit_code(exc))


if __name__ == "__main__":
    main()
