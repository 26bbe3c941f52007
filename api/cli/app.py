"""``basiswise`` command line: a thin typer layer over :mod:`optimizer.pipeline`."""

from __future__ import annotations

import contextlib
import json
import sys
from importlib import resources
from pathlib import Path

import typer
from rich.table import Table

from .common import EXIT_NO_HEDGE, book_inputs, check_outputs, err, fail, guarded, out

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
    check_outputs({"--trades": trades}, book_inputs(book))
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
    # everything is rendered before the trade list is written: a failure while showing the
    # result leaves no file behind
    if as_json:
        text = json.dumps(report.to_dict(), indent=2)
        if trades is not None:
            _write_trades(report, trades)
        print(text)
    else:
        print_report(report, out)
        if trades is not None:
            _write_trades(report, trades)
            out.print("trade list written to ", end="")
            out.print(str(trades), style="bold", markup=False, highlight=False)


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
    check_outputs({"--out": output}, book_inputs(book))
    rep = solve_book(book, method, time_limit=time_limit)
    if not rep.ok:
        fail(f"{book}: no feasible hedge ({rep.status}); no report written", EXIT_NO_HEDGE)
    write_text_atomic(to_markdown(rep, source=str(book)), output)
    out.print(f"hedge report written to {output} (hedged std {rep.hedged_std:,.0f} "
              f"{rep.currency} over {rep.horizon_days} days)", markup=False, highlight=False)


@app.command()
@guarded
def demo(
    folder: Path = typer.Option(Path("basiswise-demo"), "--out",
                                help="Folder for the demo book, prices and trade list."),
    method: str = MethodOpt,
) -> None:
    """Write the invented demo book into a folder, solve it and write its trade list."""
    from basiswise.data_adapters.boundary import input_boundary
    from basiswise.data_adapters.output import atomic_write

    with input_boundary(folder, "demo folder", key="--out"):
        folder.mkdir(parents=True, exist_ok=True)
        src = resources.files("basiswise.scenarios") / "demo"
        for name in ("book.toml", "prices.csv", "limit_cuts.toml"):
            item = src / name
            if item.is_file():
                with resources.as_file(item) as f:
                    data = f.read_bytes()
                atomic_write(folder / name, lambda tmp, data=data: tmp.write_bytes(data))
    out.print("demo book and invented prices written to ", end="")
    out.print(str(folder), style="bold", markup=False, highlight=False)
    _solve_and_show(folder / "book.toml", method, folder / "trades.csv", False, 30.0)


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
