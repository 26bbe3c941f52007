"""``basiswise check BOOK``: validate a book and report the quality of its price history."""

from __future__ import annotations

import json

from rich.table import Table

from .common import fail, out


def quality_table(q) -> Table:
    """One row per series: span, rows, missing business days, longest gap in calendar days,
    longest stale run (rows), jumps, roll dates, dates no other series has."""
    t = Table(title=f"Price data quality — {q.book} ({q.source})", title_justify="left")
    heads = ["series", "unit", "first", "last", "rows", "missing", "max gap d", "stale",
             "jumps", "rolls", "unmatched", "status"]
    for h in heads:
        left = h in ("series", "unit", "first", "last", "status")
        t.add_column(h, justify="left" if left else "right", no_wrap=left)
    flagged = {p.series for p in q.problems}
    for s in q.series:
        status = "[yellow]check[/]" if s.series in flagged else "[green]ok[/]"
        t.add_row(s.series, s.unit, s.first, s.last, f"{s.rows:,}", str(s.missing),
                  str(s.longest_gap), str(s.stale), str(s.jumps),
                  "—" if s.roll_gaps is None else str(s.roll_gaps), str(s.unmatched), status)
    return t


def run_check(book_path, as_json: bool, strict: bool, stale_days: int, jump_z: float) -> None:
    """Quality table and problems, then the full validation the hedge commands do."""
    from basiswise.data_adapters.book import load_book
    from basiswise.data_adapters.errors import InputError
    from basiswise.data_adapters.quality import quality_report
    from basiswise.optimizer.pipeline import prepare

    book = load_book(book_path)
    q = quality_report(book, stale_days=stale_days, jump_z=jump_z)
    try:
        prep, error = prepare(book), None
    except InputError as exc:
        prep, error = None, exc
    if as_json:
        print(json.dumps({**q.to_dict(), "valid": error is None,
                          "error": None if error is None else str(error)}, indent=2))
    else:
        out.print(quality_table(q))
        for p in q.problems:
            where = p.series or "book"
            out.print(f"[yellow]warning[/] {where}: {p.kind}: {p.message}", highlight=False)
        if prep is not None:
            b, panel = prep.book, prep.panel
            out.print(f"Book '{b.book.name}' is valid: {len(b.exposures)} exposures, "
                      f"{len(b.instruments)} instruments, {len(b.group_limits)} group limits; "
                      f"{len(panel.prices):,} aligned rows ({panel.dropped_rows} dropped) from "
                      f"{panel.first_date.date()} to {panel.last_date.date()}; estimator "
                      f"{b.estimation.estimator}, window {b.estimation.window} rows, horizon "
                      f"{b.book.horizon_days} days", highlight=False)
            for note in prep.notes:
                out.print(f"note: {note}", highlight=False)
    if error is not None:
        fail(str(error))
    if strict and q.problems:
        fail(f"{book_path}: {len(q.problems)} data-quality warnings (--strict makes them errors)")
