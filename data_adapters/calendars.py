"""Business-day calendars: weekends plus an exchange's holidays or a holiday file.

``[data] calendar`` names a market calendar of the ``holidays`` package (its financial
calendars: ``"CME"``, ``"IFEU"`` for ICE Futures Europe, ``"NYSE"``, ``"ECB"`` for TARGET
closing days, …); ``[data] holidays`` names a file (CSV, Parquet or Excel, relative to the book)
whose ``date`` column lists closing days. Both may be given; their days are joined. Without
either, business days are Monday to Friday.

Used to count the roll offset of ``[data.roll] roll_days`` and, in the data-quality report, the
business days on which a series has no price.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd

from basiswise.data_adapters.errors import InputError

__all__ = ["closing_days", "business_days", "market_calendars"]


def market_calendars() -> list[str]:
    """Codes of the market calendars the ``holidays`` package provides."""
    import holidays

    return sorted(holidays.list_supported_financial())


def _market_days(code: str, years: range, source: str | None) -> set:
    import holidays

    if code not in holidays.list_supported_financial():
        shown = ", ".join(market_calendars())
        raise InputError(f"unknown market calendar {code!r}; known: {shown}", file=source,
                         key="data.calendar")
    return set(holidays.financial_holidays(code, years=years))


def _file_days(path: Path, source: str | None) -> set:
    from basiswise.data_adapters.prices import _parse_dates, _read_table, _require_columns

    frame = _read_table(path, str(path))
    _require_columns(frame, ["date"], "holiday date", str(path))
    return {d.date() for d in _parse_dates(frame["date"], "date", str(path))}


def closing_days(book, first, last) -> np.ndarray:
    """Closing days (weekdays excluded from trading) between two dates, as datetime64[D].

    Parameters
    ----------
    book : Book
        Its ``[data] calendar`` and ``holidays`` keys; neither means no holidays.
    first, last : date-like
        The span asked for (inclusive).
    """
    d = book.data
    code, file = getattr(d, "calendar", None), getattr(d, "holidays", None)
    lo, hi = pd.Timestamp(first), pd.Timestamp(last)
    days: set = set()
    if code:
        days |= _market_days(code, range(lo.year, hi.year + 1), book.source)
    if file:
        days |= _file_days(book.folder / file, book.source)
    kept = sorted(x for x in days if lo.date() <= x <= hi.date())
    return np.array(kept, dtype="datetime64[D]")


def business_days(book, first, last) -> pd.DatetimeIndex:
    """Business days from ``first`` to ``last`` (inclusive) on the book's calendar."""
    lo, hi = np.datetime64(pd.Timestamp(first).date()), np.datetime64(pd.Timestamp(last).date())
    all_days = np.arange(lo, hi + np.timedelta64(1, "D"), dtype="datetime64[D]")
    open_ = np.is_busday(all_days, holidays=closing_days(book, first, last))
    return pd.DatetimeIndex(all_days[open_])
