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

    @property
    def notes(self) -> list[str]:
        n = self.panel.dropped_rows
        return [f"{n} price rows dropped to align series on common dates"] if n else []


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
    if book.estimation.changes in ("relative", "log"):
        check_positive(panel, list(panel.prices.columns))
    return Prepared(book, panel)


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
               **overrides) -> HedgeReport:
    """Hedge a book end to end: load, estimate, solve in whole contracts (by default), report."""
    prep = prepare(book, **overrides)
    model = model_of(prep, fractional=(method == "continuous"))
    return solve_model(model, method, time_limit=time_limit, notes=prep.notes)
