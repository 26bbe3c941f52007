"""Cells and header of a price table: dates, prices, time zones, repeated column names.

Used by :mod:`basiswise.data_adapters.prices` and :mod:`basiswise.data_adapters.rolls`. Every
problem is an :class:`~basiswise.data_adapters.errors.InputError` naming the file, the row (as a
person sees it: the header is row 1) and the column.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd

from basiswise.data_adapters.errors import InputError, shorten

__all__ = ["MAX_PRICE", "MISSING_MARKERS"]

#: Cell texts read as "no price that day" (compared after stripping spaces).
MISSING_MARKERS = frozenset({"", "NA", "N/A", "NaN", "nan", "null", "NULL", "#N/A", "-"})
#: Largest price accepted (in absolute value): beyond it a cell is a unit slip or a filler
#: value, and squared in a covariance it would overflow.
MAX_PRICE = 1e9
_ZONE = r"\d{2}:\d{2}(?::\d{2}(?:\.\d*)?)?\s*(Z|[+-]\d{2}(?::?\d{2})?)$"  # offset after a time


def _header_names(path: Path, suffix: str, frame: pd.DataFrame) -> list[str]:
    """Column names as written in the file (pandas renames repeated names to ``x.1``)."""
    if suffix == ".csv":
        head = pd.read_csv(path, header=None, nrows=1, dtype=str, keep_default_na=False,
                           encoding="utf-8-sig", skipinitialspace=True)
        return [str(c).strip() for c in head.iloc[0]] if len(head) else []
    if suffix == ".xlsx":
        head = pd.read_excel(path, sheet_name=0, engine="openpyxl", header=None, nrows=1)
        return [str(c).strip() for c in head.iloc[0]] if len(head) else []
    if suffix == ".parquet":
        import pyarrow.parquet as pq

        return [str(c).strip() for c in pq.read_schema(path).names]
    return list(frame.columns)


def _refuse_duplicate_columns(path: Path, suffix: str, frame: pd.DataFrame | None,
                              source: str) -> None:
    """Two columns of one name: which one is the price is a guess, so refuse the file."""
    names = _header_names(path, suffix, frame)
    seen: dict[str, int] = {}
    for j, name in enumerate(names):
        if name in seen and name not in ("", "nan"):
            raise InputError(f"column name used twice (columns {seen[name] + 1} and {j + 1}); "
                             "rename one", file=source, row=1, column=name)
        seen.setdefault(name, j)


def _parse_dates(col: pd.Series, column: str, source: str) -> pd.DatetimeIndex:
    if pd.api.types.is_datetime64_any_dtype(col):
        parsed = pd.to_datetime(col)
    else:
        text = col.astype("string").str.strip()
        _refuse_mixed_zones(text, column, source)
        parsed = pd.to_datetime(text, errors="coerce", format="ISO8601")
        is_date_obj = col.map(lambda v: hasattr(v, "year") and not isinstance(v, str))
        if is_date_obj.any():  # date cells read as objects (Excel, Parquet date32)
            parsed = parsed.where(~is_date_obj, pd.to_datetime(col.where(is_date_obj)))
    bad = parsed.isna()
    if bad.any():
        i = int(np.flatnonzero(bad.to_numpy())[0])
        raise InputError(
            f"cannot read date {shorten(col.iloc[i], 40)} (use ISO dates like 2024-03-15)",
            file=source,
            row=int(col.index[i]),
            column=column,
        )
    index = pd.DatetimeIndex(parsed)
    if index.tz is not None:
        index = index.tz_localize(None)
    return index.normalize()


def _refuse_mixed_zones(text: pd.Series, column: str, source: str) -> None:
    """Dates written with different UTC offsets (or some with, some without) are refused.

    Converting them would move some rows to another calendar date; plain dates are meant.
    """
    zones = text.str.extract(_ZONE, expand=False).fillna("")
    dated = text.fillna("").str.len() > 0
    zones, rows = zones[dated], text.index[dated.to_numpy()]
    if len(zones) and (zones != zones.iloc[0]).any():
        i = int(np.flatnonzero((zones != zones.iloc[0]).to_numpy())[0])
        first = zones.iloc[0] or "no zone"
        raise InputError(f"date {shorten(text[dated].iloc[i], 40)} has time zone "
                         f"{zones.iloc[i] or 'none'} but the first date has {first}; write plain "
                         "dates like 2024-03-15", file=source, row=int(rows[i]), column=column)


def _parse_prices(col: pd.Series, column: str, source: str) -> np.ndarray:
    """Float prices with NaN for missing cells; text that is not a finite number is an error."""
    if pd.api.types.is_bool_dtype(col):
        bad = np.ones(len(col), dtype=bool)
        values = np.full(len(col), np.nan)
    elif pd.api.types.is_numeric_dtype(col):
        values = col.to_numpy(dtype=float, na_value=np.nan)
        bad = np.isinf(values)
    else:
        text = col.astype("string").str.strip()
        missing = (text.isna() | text.isin(MISSING_MARKERS)).to_numpy(dtype=bool)
        numbers = pd.to_numeric(text.where(~missing), errors="coerce")
        values = numbers.to_numpy(dtype=float, na_value=np.nan)
        bad = (~missing & np.isnan(values)) | np.isinf(values)
    if bad.any():
        i = int(np.flatnonzero(bad)[0])
        raise InputError(
            f"price {shorten(col.iloc[i], 40)} is not a finite number",
            file=source,
            row=int(col.index[i]),
            column=column,
        )
    huge = np.abs(np.nan_to_num(values)) > MAX_PRICE
    if huge.any():
        i = int(np.flatnonzero(huge)[0])
        raise InputError(
            f"price {shorten(col.iloc[i], 40)} is outside the plausible range "
            f"(at most {MAX_PRICE:g} in absolute value)",
            file=source,
            row=int(col.index[i]),
            column=column,
        )
    return values
