"""Price history files into an aligned, validated price panel.

Layouts (``format``):

``wide``
    A date column and one price column per series.
``long``
    Columns date, series, price; one row per series and date.
``contracts``
    Columns date, contract, price, rolled into generic months by :mod:`data_adapters.rolls`
    (through :func:`load_prices` and the book's ``[data.roll]`` table).

Readers are chosen by suffix: ``.csv`` (UTF-8, optional BOM), ``.parquet`` and ``.xlsx`` (needs
the ``openpyxl`` package; first sheet, header in the first row). Rows are numbered as a person
sees them in the file: the header is row 1, the first data row is row 2 (the same convention is
used for Parquet, whose rows have no visible numbers).

Dates are ISO 8601 text (``2024-03-15``) or real date cells; the time of day is dropped. Empty
cells and the markers in :data:`MISSING_MARKERS` are missing values; any other text that is not a
finite number is an error. Aligning keeps the dates on which every needed series has a price.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from importlib.util import find_spec
from pathlib import Path

import numpy as np
import pandas as pd

from basiswise.data_adapters.boundary import input_boundary
from basiswise.data_adapters.cells import (
    MAX_PRICE,
    MISSING_MARKERS,
    _parse_dates,
    _parse_prices,
    _refuse_duplicate_columns,
)
from basiswise.data_adapters.errors import InputError, shorten, summarise

__all__ = ["MAX_PRICE", "MISSING_MARKERS", "PricePanel", "check_positive", "load_prices",
           "panel_from_frame",
           "read_prices"]


_SUFFIXES = (".csv", ".parquet", ".xlsx", ".sqlite", ".db")
_WHAT = {".xlsx": "price workbook", ".sqlite": "price database", ".db": "price database"}
_FIRST_DATA_ROW = 2  # header is row 1


@dataclass(frozen=True)
class PricePanel:
    """Aligned daily prices.

    Attributes
    ----------
    prices : pandas.DataFrame
        Sorted, unique ``DatetimeIndex``; one float column per series id, in the order asked for;
        every value finite. Rolled generic months are back-adjusted with every roll in the file.
    source : Path
        The file read.
    dropped_rows : int
        Dates dropped by alignment (some needed series had no price that day).
    file_rows : pandas.DataFrame
        Same shape as ``prices``: the file row each price came from (for error messages).
    held, pnl : pandas.DataFrame, optional
        Rolled books: the real price of the contract held on each date, and levels whose changes
        are the held contracts' P&L (difference-adjusted); ``None`` means equal to ``prices``.
    adjust : str
        The back-adjustment of ``prices``: ``"ratio"``, ``"difference"`` or ``"none"``.
    """

    prices: pd.DataFrame
    source: Path
    dropped_rows: int
    file_rows: pd.DataFrame = field(repr=False, compare=False, default=None)
    held: pd.DataFrame | None = field(repr=False, compare=False, default=None)
    pnl: pd.DataFrame | None = field(repr=False, compare=False, default=None)
    adjust: str = "none"

    @property
    def first_date(self) -> pd.Timestamp:
        """First aligned date."""
        return self.prices.index[0]

    @property
    def last_date(self) -> pd.Timestamp:
        """Last aligned date."""
        return self.prices.index[-1]

    @property
    def pnl_levels(self) -> pd.DataFrame:
        """Levels whose differences are the P&L of the positions held (price units)."""
        return self.prices if self.pnl is None else self.pnl

    def as_of(self, end: int, start: int = 0) -> pd.DataFrame:
        """Rows ``start..end`` (positions) of ``prices`` as known on row ``end``'s date.

        Back-adjusted with the rolls up to that date only (as if the file were cut there), so
        row ``end`` is the real price ``h`` of the contract then held. From the levels ``A``
        adjusted with every roll: ratio ``A_t × h / A_end``, difference ``A_t − A_end + h``.
        """
        levels = self.prices.iloc[start:end + 1]
        if self.held is None or self.adjust == "none":
            return levels
        a, now = levels.to_numpy(dtype=float), self.held.iloc[end].to_numpy(dtype=float)
        out = a * (now / a[-1]) if self.adjust == "ratio" else a + (now - a[-1])
        out[-1] = now
        return pd.DataFrame(out, index=levels.index, columns=levels.columns)


# --------------------------------------------------------------------------- readers


def _read_table(path: Path, source: str, table: str = "prices") -> pd.DataFrame:
    suffix = path.suffix.lower()
    if suffix not in _SUFFIXES:
        raise InputError(
            f"unsupported price file type {path.suffix!r}; use one of: {', '.join(_SUFFIXES)}",
            file=source,
        )
    if not path.exists():
        raise InputError("price file not found", file=source)
    if path.is_dir():
        raise InputError("is a folder, not a price file", file=source)
    try:
        if suffix == ".csv":
            frame = pd.read_csv(
                path,
                dtype=str,
                keep_default_na=False,
                encoding="utf-8-sig",
                skipinitialspace=True,
                skip_blank_lines=False,  # keep line numbers true; blank lines dropped below
            )
        elif suffix in (".sqlite", ".db"):
            from basiswise.data_adapters.database import read_sqlite_file

            frame = read_sqlite_file(path, table, source)
        elif suffix == ".parquet":
            _refuse_duplicate_columns(path, suffix, None, source)  # pyarrow fails on them
            frame = pd.read_parquet(path)
            if not isinstance(frame.index, pd.RangeIndex):  # e.g. a saved DatetimeIndex
                frame = frame.reset_index()
        else:
            if find_spec("openpyxl") is None:
                raise InputError(
                    "reading .xlsx files needs the 'openpyxl' package, which is not installed "
                    "(install it, or save the sheet as CSV)",
                    file=source,
                )
            frame = pd.read_excel(path, sheet_name=0, engine="openpyxl")
    except InputError:
        raise
    except pd.errors.EmptyDataError:
        raise InputError("the file is empty", file=source) from None
    except pd.errors.ParserError as err:
        raise InputError(f"cannot parse the file: {err}", file=source) from None
    except UnicodeDecodeError as err:
        raise InputError(f"not UTF-8 text: {err.reason}", file=source) from None
    except (OSError, ValueError) as err:
        raise InputError(f"cannot read the file: {err}", file=source) from None
    frame.columns = [str(c).strip() for c in frame.columns]
    _refuse_duplicate_columns(path, suffix, frame, source)
    # The index holds the file row of each line (header = row 1), kept through filtering.
    frame.index = pd.RangeIndex(_FIRST_DATA_ROW, _FIRST_DATA_ROW + len(frame))
    blank = frame.apply(lambda c: c.isna() | (c.astype("string").str.strip() == "")).all(axis=1)
    return frame.loc[~blank.to_numpy(dtype=bool)]


def _require_columns(frame: pd.DataFrame, needed: list[str], what: str, source: str) -> None:
    missing = [c for c in needed if c not in frame.columns]
    if missing:
        found = summarise(frame.columns, 8) or "none"
        names = summarise(missing, 5)
        raise InputError(
            f"missing {what} column(s) {names} (found: {found})",
            file=source,
            column=missing[0],
        )


def _duplicate_error(rows: np.ndarray, dates: pd.DatetimeIndex, what: str, source: str):
    """rows: file rows of the duplicated entries (already sorted by file order)."""
    first = pd.Timestamp(dates[0]).date()
    shown = ", ".join(str(r) for r in rows[:5])
    more = f" and {len(rows) - 5} more" if len(rows) > 5 else ""
    return InputError(
        f"duplicate date {first}{what} in rows {shown}{more}", file=source, row=int(rows[0])
    )


def _wide(frame, series, date_column, source):
    _require_columns(frame, [date_column], "date", source)
    _require_columns(frame, series, "series", source)
    dates = _parse_dates(frame[date_column], date_column, source)
    rows = frame.index.to_numpy()
    dup = dates.duplicated(keep=False)
    if dup.any():
        first = dates[dup][0]
        hit = rows[dates == first]
        raise _duplicate_error(hit, dates[dates == first], "", source)
    values = {s: _parse_prices(frame[s], s, source) for s in series}
    prices = pd.DataFrame(values, index=dates, columns=series)
    file_rows = pd.DataFrame({s: rows for s in series}, index=dates, columns=series)
    return prices, file_rows


def _long(frame, series, date_column, series_column, price_column, source):
    _require_columns(frame, [date_column, series_column, price_column], "long-format", source)
    names = frame[series_column].astype("string").str.strip()
    present = set(names.dropna())
    absent = [s for s in series if s not in present]
    if absent:
        raise InputError(
            f"series {summarise(absent)} not found in column {series_column!r}",
            file=source,
            column=series_column,
        )
    keep = names.isin(series).to_numpy(dtype=bool)
    sub = frame.loc[keep]
    rows = sub.index.to_numpy()
    dates = _parse_dates(sub[date_column], date_column, source)
    values = _parse_prices(sub[price_column], price_column, source)
    key = pd.MultiIndex.from_arrays([dates, names[keep].to_numpy()])
    dup = key.duplicated(keep=False)
    if dup.any():
        first = key[dup][0]
        hit = rows[(dates == first[0]) & (names[keep].to_numpy() == first[1])]
        raise _duplicate_error(hit, pd.DatetimeIndex([first[0]]), f" for series {first[1]!r}",
                               source)
    long = pd.DataFrame({"date": dates, "series": names[keep].to_numpy(), "v": values, "r": rows})
    prices = long.pivot(index="date", columns="series", values="v").reindex(columns=series)
    file_rows = long.pivot(index="date", columns="series", values="r").reindex(columns=series)
    prices.columns.name = None
    file_rows.columns.name = None
    return prices, file_rows


def read_prices(
    path: str | Path,
    *,
    format: str = "wide",
    series: list[str],
    date_column: str = "date",
    series_column: str = "series",
    price_column: str = "price",
    max_gap_days: int = 7,
    table: str = "prices",
) -> PricePanel:
    """Read a price file and align the needed series on common dates.

    Parameters
    ----------
    path : str or Path
        ``.csv``, ``.parquet``, ``.xlsx`` or SQLite (``.sqlite``/``.db``) file.
    format : {"wide", "long"}
        Layout, see the module docstring.
    series : list of str
        Series (price columns, or values of ``series_column`` in long format) to keep, in order.
    date_column, series_column, price_column : str
        Column names (the last two for the long layout only).
    max_gap_days : int
        Most calendar days allowed between consecutive aligned dates.
    table : str
        Table to read from a SQLite database (same wide or long layout as a CSV).

    Returns
    -------
    PricePanel

    Raises
    ------
    InputError
        Missing file or columns, unreadable dates or prices, duplicate dates, a gap longer than
        ``max_gap_days``, or no date on which every series has a price.
    """
    source = str(path)
    p = Path(path)
    _check_request(format, series, source)
    with input_boundary(source, _WHAT.get(p.suffix.lower(), "price file")):
        frame = _read_table(p, source, table)
        return panel_from_frame(frame, format=format, series=series, date_column=date_column,
                                series_column=series_column, price_column=price_column,
                                max_gap_days=max_gap_days, source=p, rows_numbered=True)


def _check_request(format: str, series, source: str) -> None:
    if format not in ("wide", "long"):
        raise InputError(f"unknown format {shorten(format)}; use 'wide' or 'long'",
                         key="data.format")
    if not list(series):
        raise InputError("no series requested", file=source)


def panel_from_frame(
    frame: pd.DataFrame,
    *,
    format: str = "wide",
    series: list[str],
    date_column: str = "date",
    series_column: str = "series",
    price_column: str = "price",
    max_gap_days: int = 7,
    source: str | Path = "prices",
    rows_numbered: bool = False,
) -> PricePanel:
    """Align and validate prices already in a DataFrame (same layouts as :func:`read_prices`).

    A wide frame may carry its dates as a ``DatetimeIndex`` instead of a date column. Rows are
    numbered from 2 (as in a file with a header) unless ``rows_numbered`` says the index
    already holds them (the file readers set it).
    """
    p = source if isinstance(source, Path) else str(source)  # a URL is no path
    source = str(source)
    series = list(series)
    _check_request(format, series, source)
    dup = pd.Index([str(c).strip() for c in frame.columns]).duplicated()
    if dup.any():
        raise InputError("column name used twice; rename one", file=source,
                         column=str(frame.columns[int(np.flatnonzero(dup)[0])]))
    if isinstance(frame.index, pd.DatetimeIndex) and date_column not in frame.columns:
        frame = frame.rename_axis(date_column).reset_index()
    if not rows_numbered:
        frame = frame.reset_index(drop=True)
        frame.index = pd.RangeIndex(_FIRST_DATA_ROW, _FIRST_DATA_ROW + len(frame))
    frame = frame.rename(columns=lambda c: str(c).strip())
    if format == "wide":
        prices, file_rows = _wide(frame, series, date_column, source)
    else:
        prices, file_rows = _long(frame, series, date_column, series_column, price_column, source)

    order = np.argsort(prices.index.to_numpy(), kind="stable")
    prices, file_rows = prices.iloc[order], file_rows.iloc[order]
    complete = prices.notna().all(axis=1).to_numpy()
    dropped = int((~complete).sum())
    if not complete.any():
        counts = summarise([f"{s}: {int(n)}" for s, n in prices.notna().sum().items()], 6,
                           quote=False)
        raise InputError(
            f"no date has a price for every series (dates with a price: {counts})", file=source
        )
    missing = prices.loc[~complete]
    prices = prices.loc[complete].astype(float)
    file_rows = file_rows.loc[complete].astype(int)
    _check_gaps(prices.index, file_rows, max_gap_days, source, missing)
    prices.index.name = "date"
    file_rows.index.name = "date"
    return PricePanel(prices=prices, source=p, dropped_rows=dropped, file_rows=file_rows)


def _missing_between(missing: pd.DataFrame | None, a, b) -> str:
    """`` — series x has no value on n dates in between`` when dropped rows caused a gap."""
    if missing is None or missing.empty:
        return ""
    inside = missing.loc[(missing.index > a) & (missing.index < b)]
    counts = inside.isna().sum()
    names = [f"{s} ({int(n)} dates)" for s, n in counts.items() if n > 0]
    if not names:
        return ""
    return ("; the rows in between were dropped because these series have no value there: "
            + ", ".join(names))


def _check_gaps(index: pd.DatetimeIndex, file_rows: pd.DataFrame, max_gap: int, source: str,
                missing: pd.DataFrame | None = None):
    if len(index) < 2:
        return
    gaps = np.diff(index.to_numpy()).astype("timedelta64[D]").astype(int)
    over = np.flatnonzero(gaps > max_gap)
    if over.size:
        i = int(over[0])
        a, b = index[i].date(), index[i + 1].date()
        raise InputError(
            f"gap of {int(gaps[i])} calendar days between {a} and {b} exceeds "
            f"max_gap_days = {max_gap} (after aligning series)"
            + _missing_between(missing, index[i], index[i + 1]),
            file=source,
            row=int(file_rows.iloc[i + 1].iloc[0]),
        )


def check_positive(
    panel: PricePanel, columns: list[str] | None = None, *, purpose: str = "relative or log changes"
) -> None:
    """Raise if any price in ``columns`` is zero or negative.

    Relative and log changes divide by the price, so they need positive prices.

    Raises
    ------
    InputError
        Naming the file, the row and the column of the first non-positive price.
    """
    cols = list(panel.prices.columns) if columns is None else list(columns)
    for col in cols:
        values = panel.prices[col].to_numpy()
        bad = np.flatnonzero(values <= 0)
        if bad.size:
            i = int(bad[0])
            row = None
            if panel.file_rows is not None:
                row = int(panel.file_rows[col].iloc[i])
            raise InputError(
                f"price must be positive for {purpose} (found {values[i]:g} on "
                f"{panel.prices.index[i].date()})",
                file=str(panel.source),
                row=row,
                column=col,
            )


def load_prices(book) -> PricePanel:
    """Read the prices of a :class:`~data_adapters.book.Book` (its ``[data]`` and series)."""
    d = book.data
    if d.format == "contracts":
        from basiswise.data_adapters.rolls import load_contract_prices  # rolls imports this module

        return load_contract_prices(book)
    from basiswise.data_adapters.currency import needed_series

    if d.prices is None:
        from basiswise.data_adapters.database import read_database

        return read_database(book, needed_series(book))
    source_path = book.prices_path
    return read_prices(
        source_path,
        format=d.format,
        series=needed_series(book),
        date_column=d.date_column,
        series_column=d.series_column,
        price_column=d.price_column,
        max_gap_days=d.max_gap_days,
        table=d.table,
    )
