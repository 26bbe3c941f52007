"""The ``basiswise check BOOK`` command: the quality of the price history, then validation and
what would make a solve unsafe (short history, limits that cannot hold together)."""

from __future__ import annotations

import json
from pathlib import Path

from rich.console import Console

from .common import fail
from .render import Column, Grid, show, text
from .tables import note


def quality_grid(q) -> Grid:
    """One row per series: span, rows, missing business days, longest gap in calendar days,
    longest stale run (rows), jumps, roll dates, dates no other series has."""
    t = Grid(f"Price data quality — {q.book} ({q.source})",
             [Column("series", "left"), Column("unit", "left"), Column("first", "left"),
              Column("last", "left"), Column("rows"), Column("missing"), Column("max gap d"),
              Column("stale"), Column("jumps"), Column("rolls"), Column("unmatched"),
              Column("status", "left")])
    flagged = {p.series for p in q.problems}
    for s in q.series:
        t.add_row(s.series, s.unit, s.first, s.last, f"{s.rows:,}", str(s.missing),
                  str(s.longest_gap), str(s.stale), str(s.jumps),
                  "—" if s.roll_gaps is None else str(s.roll_gaps), str(s.unmatched),
                  "check" if s.series in flagged else "ok")
    return t


def series_table(prep) -> Grid:
    b, p = prep.book, prep.panel
    t = Grid(f"Book '{b.book.name}' is valid",
             [Column("series", "left"), Column("unit", "left"), Column("rows"),
              Column("first date", "left"), Column("last date", "left"),
              Column("last price")])
    for s in p.prices.columns:
        t.add_row(s, _unit_in(b.series[s].unit, b.book.currency), str(len(p.prices)),
                  str(p.first_date.date()), str(p.last_date.date()),
                  f"{p.prices[s].iloc[-1]:,.4f}")
    return t


def _unit_in(unit: str, currency: str) -> str:
    """The unit of the (converted) price, with the quote it came from when that differs."""
    cur, _, per = unit.partition("/")
    return unit if cur == currency else f"{currency}/{per} (quoted {unit})"


def findings(prep) -> tuple[list[str], list[str]]:
    """Short-history warnings and limit conflicts of a prepared book (what solve would say)."""
    from basiswise.optimizer.pipeline import model_of
    from basiswise.optimizer.problem.conflicts import limit_conflicts
    from basiswise.optimizer.results.history_checks import history_warnings

    model = model_of(prep)
    return history_warnings(model), limit_conflicts(model)


def _summary(console: Console, prep) -> None:
    b = prep.book
    as_of = f"as of {b.book.as_of}, " if b.book.as_of else ""
    console.print(text(
        f"{len(b.exposures)} exposures, {len(b.instruments)} instruments, "
        f"{len(b.group_limits)} group limits; {prep.panel.dropped_rows} rows dropped by "
        f"alignment; {as_of}last price date {prep.panel.last_date.date()}; estimator "
        f"{b.estimation.estimator}, window {b.estimation.window} rows, horizon "
        f"{b.book.horizon_days} days"))
    for line in prep.notes:
        note(console, line)


def run_check(book: Path, console: Console, *, as_json: bool = False, strict: bool = False,
              stale_days: int = 5, jump_z: float = 10.0) -> None:
    """Quality table and its warnings; then validate ``book``, its series, warnings, conflicts.

    ``strict``: any data-quality or short-history warning, or a limit conflict, exits with 2.
    """
    from basiswise.data_adapters.book import load_book
    from basiswise.data_adapters.errors import InputError
    from basiswise.data_adapters.quality import quality_report
    from basiswise.optimizer.pipeline import prepare

    b = load_book(book)
    q = quality_report(b, stale_days=stale_days, jump_z=jump_z)
    prep = error = None
    warnings: list[str] = []
    conflicts: list[str] = []
    try:
        prep = prepare(b)
        warnings, conflicts = findings(prep)
    except InputError as exc:
        error = exc
    if as_json:
        print(json.dumps({**q.to_dict(), "valid": error is None,
                          "error": None if error is None else str(error),
                          "warnings": warnings, "conflicts": conflicts}, indent=2))
    else:
        show(console, quality_grid(q))
        for p in q.problems:
            console.print(text(f"data warning: {p.series or 'book'}: {p.kind}: {p.message}",
                               "yellow"))
        if prep is not None:
            show(console, series_table(prep))
            _summary(console, prep)
            for line in warnings:
                console.print(text("warning: " + line, "yellow"))
            for line in conflicts:
                console.print(text("limit conflict: " + line, "red"))
            if not (warnings or conflicts or q.problems):
                console.print(text("no data-quality or short-history warning and no "
                                   "conflicting limits", "green"))
    if error is not None:
        fail(str(error))
    count = len(q.problems) + len(warnings) + len(conflicts)
    if strict and count:
        fail(f"{book}: {count} warnings or conflicts (--strict makes them errors)")
