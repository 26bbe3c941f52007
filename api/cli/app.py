"""``basiswise`` command line: a thin typer layer over :mod:`optimizer.pipeline`."""

from __future__ import annotations

import contextlib
import json
import shutil
import sys
from importlib import resources
from pathlib import Path

import typer

from .common import EXIT_NO_HEDGE, err, fail, guarded, out

app = typer.Typer(add_completion=False, no_args_is_help=True,
                  help="Joint minimum-variance cross hedges in whole futures contracts.")

BookArg = typer.Argument(..., help="Book file (TOML).", show_default=False, metavar="BOOK")
MethodOpt = typer.Option("exact", "--method", "-m",
                         help="exact (whole contracts, proven) | round | continuous")


def _write_trades(report, path: Path) -> None:
    from basiswise.data_adapters.output import write_csv_atomic

    write_csv_atomic(report.trade_list(), path)


def _solve_and_show(book, method, trades, as_json, time_limit, **overrides) -> None:
    from basiswise.optimizer.pipeline import solve_book

    from .tables import print_report

    if method not in ("exact", "round", "continuous"):
        fail(f"unknown method '{method}'; valid: exact, round, continuous")
    if trades is not None and method == "continuous":
        fail("--trades needs whole contracts: use --method exact or round")
    busy = (err.status("estimating and solving the hedge…") if err.is_terminal
            else contextlib.nullcontext())
    with busy:
        report = solve_book(book, method, time_limit=time_limit, **overrides)
    if not report.ok:
        if as_json:
            print(json.dumps(report.to_dict(), indent=2))
        else:
            print_report(report, out)
        fail(f"{book}: no feasible hedge ({report.status}); no trade list written",
             EXIT_NO_HEDGE)
    if trades is not None:
        _write_trades(report, trades)
    if as_json:
        print(json.dumps(report.to_dict(), indent=2))
    else:
        print_report(report, out)
        if trades is not None:
            out.print(f"trade list written to [bold]{trades}[/]")


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
) -> None:
    """Solve the book's hedge and show it; optionally write the trade list."""
    _solve_and_show(book, method, trades, as_json, time_limit, estimator=estimator,
                    window=window, horizon_days=horizon, changes=changes, sampling=sampling)


@app.command()
@guarded
def check(
    book: Path = BookArg,
    as_json: bool = typer.Option(False, "--json", help="Print one JSON object on stdout."),
    strict: bool = typer.Option(False, "--strict", help="Data-quality warnings are errors."),
    stale_days: int = typer.Option(5, help="Rows of unchanged price that make a stale run."),
    jump_z: float = typer.Option(10.0, help="Robust z-score above which a move is a jump."),
) -> None:
    """Validate a book and report the quality of its price history, per series."""
    from .check_cmd import run_check

    run_check(book, as_json, strict, stale_days, jump_z)


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
    rep = solve_book(book, method, time_limit=time_limit)
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
    _solve_and_show(folder / "book.toml", method, folder / "trades.csv", False, 30.0)


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
