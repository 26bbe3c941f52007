"""The ``basiswise check BOOK`` command: validate, then say what would make a solve unsafe."""

from __future__ import annotations

from pathlib import Path

from rich.console import Console

from .render import Column, Grid, show, text
from .tables import note


def series_table(prep) -> Grid:
    b, p = prep.book, prep.panel
    t = Grid(f"Book '{b.book.name}' is valid",
             [Column("series", "left"), Column("unit", "left"), Column("rows"),
              Column("first date", "left"), Column("last date", "left"), Column("last price")])
    for s in p.prices.columns:
        t.add_row(s, b.series[s].unit, str(len(p.prices)), str(p.first_date.date()),
                  str(p.last_date.date()), f"{p.prices[s].iloc[-1]:,.4f}")
    return t


def findings(prep) -> tuple[list[str], list[str]]:
    """Short-history warnings and limit conflicts of a prepared book (what solve would say)."""
    from basiswise.optimizer.pipeline import model_of
    from basiswise.optimizer.problem.conflicts import limit_conflicts
    from basiswise.optimizer.results.history_checks import history_warnings

    model = model_of(prep)
    return history_warnings(model), limit_conflicts(model)


def run_check(book: Path, console: Console) -> None:
    """Validate ``book``, print its series, warnings and conflicts."""
    from basiswise.optimizer.pipeline import prepare

    prep = prepare(book)
    b = prep.book
    show(console, series_table(prep))
    as_of = f"as of {b.book.as_of}, " if b.book.as_of else ""
    console.print(text(
        f"{len(b.exposures)} exposures, {len(b.instruments)} instruments, "
        f"{len(b.group_limits)} group limits; {prep.panel.dropped_rows} rows dropped by "
        f"alignment; {as_of}last price date {prep.panel.last_date.date()}; estimator "
        f"{b.estimation.estimator}, window {b.estimation.window} rows, horizon "
        f"{b.book.horizon_days} days"))
    for line in prep.cut_notes:
        note(console, line)
    warnings, conflicts = findings(prep)
    for line in warnings:
        console.print(text("warning: " + line, "yellow"))
    for line in conflicts:
        console.print(text("limit conflict: " + line, "red"))
    if not warnings and not conflicts:
        console.print(text("no short-history warning and no conflicting limits", "green"))
