"""The one way a book's settings turn a price history into horizon changes and a covariance.

``solve`` (through :func:`basiswise.optimizer.pipeline.model_of`), the sweep runner and the
backtest engine all estimate through these functions, so the book's ``[estimation]`` and
``[book]`` keys mean the same thing everywhere, and every error names the series, the book file
and the keys at fault in the same words.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from basiswise.data_adapters.errors import InputError

from .changes import Changes, horizon_changes
from .covariance import CovarianceEstimate, estimate_covariance

if TYPE_CHECKING:  # pragma: no cover
    import pandas as pd

    from basiswise.data_adapters.book import Book

#: ``window`` argument of :func:`book_changes`: take ``[estimation] window`` from the book.
FROM_BOOK = "book"


def book_changes(prices: pd.DataFrame, book: Book, *, window: int | str | None = FROM_BOOK
                 ) -> Changes:
    """Horizon changes of ``prices`` with the book's horizon, change kind and sampling.

    Parameters
    ----------
    prices : pandas.DataFrame
        Aligned price levels, oldest first, one column per series.
    book : Book
        Supplies ``[book] horizon_days`` and ``[estimation] changes, sampling, window``.
    window : int, "book" or None
        Rows used: the book's window (default), a number, or ``None`` for all of ``prices``
        (a history already cut to the window, as the backtest does).

    Raises
    ------
    InputError
        As :func:`~basiswise.optimizer.estimation.changes.horizon_changes`; a window too short
        for the horizon names the book file and both keys.
    """
    est, horizon = book.estimation, book.book.horizon_days
    rows = est.window if window == FROM_BOOK else window
    try:
        return horizon_changes(prices, horizon_days=horizon, kind=est.changes,
                               sampling=est.sampling, window=rows)
    except InputError as exc:
        if exc.file is not None or exc.key not in ("book.horizon_days", "estimation.window"):
            raise
        both = exc.key == "book.horizon_days"
        message = (f"{exc.message} ([estimation] window = {est.window} rows, [book] "
                   f"horizon_days = {horizon})" if both else exc.message)
        raise InputError(message, file=book.source, column=exc.column,
                         key="estimation.window / book.horizon_days" if both else exc.key
                         ) from None


def book_covariance(changes: Changes, book: Book, *, estimator: str | None = None
                    ) -> CovarianceEstimate:
    """Covariance of ``changes`` with the book's estimator (or ``estimator``) and EWMA decay.

    Series names go into every error, and the days each change row spans into the EWMA note
    (one for ``"scaled"`` sampling, whose rows are daily changes).
    """
    est = book.estimation
    row_days = 1 if changes.sampling == "scaled" else changes.horizon_days
    return estimate_covariance(changes.values, estimator or est.estimator,
                               ewma_lambda=est.ewma_lambda, horizon_days=row_days,
                               columns=changes.columns)


def estimate(prices: pd.DataFrame, book: Book, *, window: int | str | None = FROM_BOOK
             ) -> tuple[Changes, CovarianceEstimate]:
    """:func:`book_changes` then :func:`book_covariance`: what a hedge is built from."""
    changes = book_changes(prices, book, window=window)
    return changes, book_covariance(changes, book)
