"""The Python entry points a notebook user calls; the command line is a thin layer over these.

>>> from basiswise.optimizer.pipeline import solve_book
>>> report = solve_book("scenarios/demo/book.toml", method="exact")   # doctest: +SKIP
>>> report.hedged_std, report.trade_list()                             # doctest: +SKIP
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import pandas as pd

from basiswise.data_adapters.book import Book, load_book
from basiswise.data_adapters.errors import InputError
from basiswise.data_adapters.prices import PricePanel, check_positive, load_prices

from .estimation.changes import horizon_changes
from .estimation.covariance import estimate_covariance
from .problem.conflicts import limit_conflicts
from .problem.model import HedgeModel, build_hedge_model
from .results.report import HedgeReport, build_report
from .solvers.dispatch import solve_qp


@dataclass(frozen=True)
class Prepared:
    """A book with its aligned prices, ready to be estimated."""

    book: Book
    panel: PricePanel
    currency_notes: tuple[str, ...] = ()

    @property
    def notes(self) -> list[str]:
        n = self.panel.dropped_rows
        dropped = [f"{n} price rows dropped to align series on common dates"] if n else []
        return dropped + list(self.currency_notes)


def _panel_of(book: Book, prices) -> PricePanel:
    """The book's own source, or ``prices`` given as a DataFrame (wide) or a file path."""
    from basiswise.data_adapters.currency import needed_series
    from basiswise.data_adapters.prices import panel_from_frame, read_prices

    if prices is None:
        return load_prices(book)
    d, names = book.data, needed_series(book)
    if isinstance(prices, pd.DataFrame):
        return panel_from_frame(prices, series=names, date_column=d.date_column,
                                max_gap_days=d.max_gap_days, source="prices (DataFrame)")
    return read_prices(prices, format=d.format, series=names, date_column=d.date_column,
                       series_column=d.series_column, price_column=d.price_column,
                       max_gap_days=d.max_gap_days, table=d.table)


def prepare(book: Book | str | Path, prices=None, **overrides) -> Prepared:
    """Load and validate a book and its prices; ``overrides`` replace estimation settings.

    ``prices`` replaces the book's ``[data]`` source: a wide DataFrame (a ``DatetimeIndex`` or a
    date column, one column per series) or a price file. Prices in other currencies are turned
    into the book currency (:func:`data_adapters.currency.to_book_currency`).
    Accepted overrides: ``estimator``, ``window``, ``horizon_days``, ``changes``, ``sampling``
    (``None`` values are ignored).
    """
    from basiswise.data_adapters.currency import to_book_currency

    if not isinstance(book, Book):
        book = load_book(book)
    overrides = {k: v for k, v in overrides.items() if v is not None}
    if overrides:
        book = book.with_overrides(**overrides)
    book, panel, fx_notes = to_book_currency(book, _panel_of(book, prices))
    if book.estimation.changes in ("relative", "log"):
        check_positive(panel, list(panel.prices.columns))
    return Prepared(book, panel, tuple(fx_notes))


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
    changes = horizon_changes(frame, horizon_days=book.book.horizon_days, kind=est.changes,
                              sampling=est.sampling, window=est.window)
    estimate = estimate_covariance(changes.values, est.estimator, ewma_lambda=est.ewma_lambda)
    return build_hedge_model(book, changes, estimate, fractional=fractional)


def solve_model(model: HedgeModel, method: str = "exact", *, time_limit: float = 30.0,
                notes: list[str] | None = None) -> HedgeReport:
    """Solve a built model and report."""
    sol = solve_qp(model.qp, method, time_limit=time_limit, start=model.current)
    notes = list(notes or [])
    if not sol.ok:
        notes += [f"conflict: {c}" for c in limit_conflicts(model)]
    return build_report(model, sol, notes)


def solve_book(book: Book | str | Path, method: str = "exact", *, time_limit: float = 30.0,
               prices=None, **overrides) -> HedgeReport:
    """Hedge a book end to end: load, estimate, solve in whole contracts (by default), report.

    ``prices`` (a DataFrame or a file) replaces the book's ``[data]`` source, see :func:`prepare`.
    """
    prep = prepare(book, prices, **overrides)
    model = model_of(prep, fractional=(method == "continuous"))
    return solve_model(model, method, time_limit=time_limit, notes=prep.notes)
