"""The Python entry points a notebook user calls; the command line is a thin layer over these.

>>> from basiswise.optimizer.pipeline import solve_book
>>> report = solve_book("scenarios/demo/book.toml", method="exact")   # doctest: +SKIP
>>> report.hedged_std, report.trade_list()                             # doctest: +SKIP
"""

from __future__ import annotations

import calendar
from dataclasses import dataclass, field, replace
from datetime import date
from pathlib import Path

import pandas as pd

from basiswise.data_adapters.book import Book, load_book
from basiswise.data_adapters.choices import RATIO_CHANGES
from basiswise.data_adapters.errors import InputError
from basiswise.data_adapters.prices import PricePanel, check_positive, load_prices

from .estimation.changes import horizon_changes
from .estimation.covariance import estimate_covariance
from .problem.conflicts import limit_conflicts
from .problem.model import HedgeModel, build_hedge_model
from .results.history_checks import history_warnings
from .results.report import HedgeReport, build_report
from .solvers.dispatch import solve_qp


@dataclass(frozen=True)
class Prepared:
    """A book with its aligned prices, ready to be estimated."""

    book: Book
    panel: PricePanel
    cut_notes: list[str] = field(default_factory=list)   # what the as_of date removed
    overrides: dict = field(default_factory=dict)        # settings replaced by the caller

    @property
    def notes(self) -> list[str]:
        n = self.panel.dropped_rows
        dropped = [f"{n} price rows dropped to align series on common dates"] if n else []
        return dropped + list(self.cut_notes)


def _month_end(month: str) -> date:
    y, m = (int(v) for v in month.split("-"))
    return date(y, m, calendar.monthrange(y, m)[1])


def _check_months(book: Book, day: date) -> None:
    """Refuse an instrument whose contract month has ended by the decision date ``day``."""
    for ins in book.instruments:
        if ins.contract_month and _month_end(ins.contract_month) < day:
            raise InputError(f"instrument {ins.id!r} has contract month {ins.contract_month}, "
                             f"which has expired by as_of {day}; roll it to a live month or "
                             "remove it", file=book.source,
                             key=f"instrument {ins.id!r}.contract_month")


def cut_at(panel: PricePanel, day: date, source: str) -> tuple[PricePanel, list[str]]:
    """``panel`` as known on ``day``: later rows dropped, rolls re-applied up to it."""
    stamp = pd.Timestamp(day)
    end = int(panel.prices.index.searchsorted(stamp, side="right")) - 1
    if end < 0:
        raise InputError(f"as_of {day} is before the first price date "
                         f"{panel.first_date.date()}", file=source, key="book.as_of")
    later = len(panel.prices) - 1 - end
    if later == 0:
        last = panel.last_date.date()
        stale = (day - last).days
        return panel, ([f"the last price ({last}) is {stale} days before as_of {day}: current "
                        "prices are that old"] if stale > 3 else [])
    cut = replace(
        panel, prices=panel.as_of(end),
        file_rows=None if panel.file_rows is None else panel.file_rows.iloc[:end + 1],
        held=None if panel.held is None else panel.held.iloc[:end + 1],
        pnl=None if panel.pnl is None else panel.pnl.iloc[:end + 1])
    return cut, [f"{later} price rows after as_of {day} ignored (prices run to "
                 f"{panel.last_date.date()}; the last one used is {cut.last_date.date()})"]


def prepare(book: Book | str | Path, **overrides) -> Prepared:
    """Load and validate a book and its prices; ``overrides`` replace estimation settings.

    Accepted overrides: ``estimator``, ``window``, ``horizon_days``, ``changes``, ``sampling``
    (``None`` values are ignored).
    """
    if not isinstance(book, Book):
        book = load_book(book)
    overrides = {k: v for k, v in overrides.items() if v is not None}
    if overrides:
        book = book.with_overrides(**overrides)
    panel = load_prices(book)
    cut_notes: list[str] = []
    if book.book.as_of is not None:
        _check_months(book, book.book.as_of)
        panel, cut_notes = cut_at(panel, book.book.as_of, book.source)
    if book.estimation.changes in RATIO_CHANGES:
        check_positive(panel, list(panel.prices.columns))
    return Prepared(book, panel, cut_notes, overrides)


def model_of(prep: Prepared, *, fractional: bool = False, prices=None, as_of=None) -> HedgeModel:
    """Estimate the covariance of ``prep``'s book and build its hedge model.

    ``as_of`` (a date) uses the history up to that date as it was known then: rolled series
    back-adjusted with the rolls up to it, current prices those of the contracts then held
    (:meth:`~data_adapters.prices.PricePanel.as_of`). ``prices`` replaces the panel's price
    frame as given; a slice of rolled levels would carry later rolls, so cut with ``as_of``.
    """
    book, est = prep.book, prep.book.estimation
    frame = prep.panel.prices if prices is None else prices
    if as_of is not None:
        if prices is not None:
            raise InputError("give as_of or prices, not both", key="as_of")
        end = int(frame.index.searchsorted(pd.Timestamp(as_of), side="right")) - 1
        if end < 0:
            raise InputError(f"as_of {as_of} is before the first price date "
                             f"{prep.panel.first_date.date()}", key="as_of")
        frame = prep.panel.as_of(end)
    try:
        changes = horizon_changes(frame, horizon_days=book.book.horizon_days, kind=est.changes,
                                  sampling=est.sampling, window=est.window)
    except InputError as exc:
        if exc.file is not None or exc.key not in ("book.horizon_days", "estimation.window"):
            raise
        # the settings come from the book: name it, and both keys when they clash
        both = exc.key == "book.horizon_days"
        raise InputError(f"{exc.message} ([estimation] window = {est.window} rows, [book] "
                         f"horizon_days = {book.book.horizon_days})" if both else exc.message,
                         file=book.source, column=exc.column,
                         key="estimation.window / book.horizon_days" if both else exc.key
                         ) from None
    estimate = estimate_covariance(changes.values, est.estimator, ewma_lambda=est.ewma_lambda)
    return build_hedge_model(book, changes, estimate, fractional=fractional)


def solve_model(model: HedgeModel, method: str = "exact", *, time_limit: float = 30.0,
                notes: list[str] | None = None) -> HedgeReport:
    """Solve a built model and report."""
    sol = solve_qp(model.qp, method, time_limit=time_limit, start=model.current)
    notes = list(notes or [])
    if not sol.ok:
        notes += [f"conflict: {c}" for c in limit_conflicts(model)]
    return replace(build_report(model, sol, notes), warnings=history_warnings(model))


def solve_book(book: Book | str | Path, method: str = "exact", *, time_limit: float = 30.0,
               **overrides) -> HedgeReport:
    """Hedge a book end to end: load, estimate, solve in whole contracts (by default), report."""
    prep = prepare(book, **overrides)
    model = model_of(prep, fractional=(method == "continuous"))
    rep = solve_model(model, method, time_limit=time_limit, notes=prep.notes)
    as_of = prep.book.book.as_of
    return replace(rep, as_of=None if as_of is None else as_of.isoformat(),
                   price_date=prep.panel.last_date.date().isoformat(),
                   overrides=dict(prep.overrides))
