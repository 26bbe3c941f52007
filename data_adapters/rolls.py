"""Futures rolls: per-contract prices into back-adjusted generic contract-month series.

A desk keeps prices per contract (``ULSD 2026-02``, ``ULSD 2026-03``, ...), each with its last
trading day, while the book hedges with generic months ``<product>_m<k>`` (``ulsd_m1`` is the
front month, ``ulsd_m2`` the second, ...). :func:`roll_generic` builds those series so that a
switch of contract at a roll does not show up as a price move; :func:`load_contract_prices`
does it for a book with ``format = "contracts"`` and its ``[data.roll]`` table.

Files: the prices in the long layout (date, contract, price; column names configurable) and an
expiries file with the columns ``contract``, ``last_trade`` (ISO date) and ``product``.
"""

from __future__ import annotations

import re
from pathlib import Path

import numpy as np
import pandas as pd

from basiswise.data_adapters.boundary import input_boundary
from basiswise.data_adapters.choices import ROLL_ADJUSTMENTS
from basiswise.data_adapters.errors import InputError
from basiswise.data_adapters.prices import (
    PricePanel,
    _check_gaps,
    _parse_dates,
    _parse_prices,
    _read_table,
    _require_columns,
)

__all__ = ["ADJUSTMENTS", "GENERIC_NAME", "load_contract_prices", "read_expiries", "roll_generic"]

#: Back-adjustment methods accepted by :func:`roll_generic`.
ADJUSTMENTS = ROLL_ADJUSTMENTS
#: A generic month name: ``<product>_m<k>``, k = 1, 2, ...
GENERIC_NAME = re.compile(r"^(?P<product>.+)_m(?P<k>[1-9][0-9]*)$")

_EXPIRY_COLUMNS = ["contract", "last_trade", "product"]


def _rows(frame: pd.DataFrame) -> np.ndarray:
    """Row numbers to report: the integer index, or CSV rows (header = 1) for a default index."""
    idx = frame.index
    if isinstance(idx, pd.RangeIndex) and idx.start == 0 and idx.step == 1:
        return np.arange(2, 2 + len(frame))
    return np.asarray(idx, dtype=int)


def _text(col: pd.Series) -> pd.Series:
    return col.astype("string").str.strip()


def _expiry_table(expiries: pd.DataFrame, source: str | None) -> pd.DataFrame:
    """Validated expiries: one row per contract with ``last_trade`` (Timestamp) and ``product``."""
    _require_columns(expiries, _EXPIRY_COLUMNS, "expiries", source)
    frame = expiries.copy()
    frame.index = _rows(expiries)
    for col in ("contract", "product", "last_trade"):
        text = _text(frame[col])
        empty = (text.isna() | (text == "")).to_numpy(dtype=bool)
        if empty.any():
            row = int(frame.index[np.flatnonzero(empty)[0]])
            raise InputError(f"{col} is missing", file=source, row=row, column=col)
    last = _parse_dates(frame["last_trade"], "last_trade", source)
    out = pd.DataFrame(
        {"contract": _text(frame["contract"]).to_numpy(), "product": _text(frame["product"])
         .to_numpy(), "last_trade": last, "row": frame.index.to_numpy()}
    )
    dup = out["contract"].duplicated(keep="first").to_numpy()
    if dup.any():
        i = int(np.flatnonzero(dup)[0])
        name = out["contract"].iloc[i]
        first = int(out["row"][out["contract"] == name].iloc[0])
        raise InputError(f"contract {name!r} is listed twice (also row {first})", file=source,
                         row=int(out["row"].iloc[i]), column="contract")
    same = out.duplicated(["product", "last_trade"], keep="first").to_numpy()
    if same.any():
        i = int(np.flatnonzero(same)[0])
        raise InputError(
            f"two contracts of product {out['product'].iloc[i]!r} share the last_trade "
            f"{out['last_trade'].iloc[i].date()}, so their order is unknown",
            file=source, row=int(out["row"].iloc[i]), column="last_trade",
        )
    return out.sort_values(["product", "last_trade"], kind="stable").reset_index(drop=True)


def _roll_dates(last_trade: pd.Series, roll_days: int, holidays=None) -> np.ndarray:
    """``roll_days`` business days (Mon–Fri less ``holidays``) before each last trading day,
    as datetime64[D]."""
    days = last_trade.to_numpy().astype("datetime64[D]")
    closed = np.array([], dtype="datetime64[D]") if holidays is None else holidays
    return np.busday_offset(days, -roll_days, roll="backward", holidays=closed)


def _contract_prices(prices, contracts, date_column, contract_column, price_column, source):
    """Long prices parsed: dates, contract names, values, file rows (missing prices dropped)."""
    _require_columns(prices, [date_column, contract_column, price_column], "contract price",
                     source)
    frame = prices.copy()
    frame.index = _rows(prices)
    names = _text(frame[contract_column])
    unknown = (~names.isin(contracts)).to_numpy(dtype=bool)
    if unknown.any():
        i = int(np.flatnonzero(unknown)[0])
        raise InputError(
            f"contract {names.iloc[i]!r} is not in the expiries file", file=source,
            row=int(frame.index[i]), column=contract_column,
        )
    dates = _parse_dates(frame[date_column], date_column, source)
    values = _parse_prices(frame[price_column], price_column, source)
    keep = ~np.isnan(values)
    long = pd.DataFrame({"date": dates[keep], "contract": names.to_numpy()[keep],
                         "v": values[keep], "r": frame.index.to_numpy()[keep]})
    dup = long.duplicated(["date", "contract"], keep=False).to_numpy()
    if dup.any():
        first = long.loc[dup].iloc[0]
        hit = long["r"][(long["date"] == first["date"]) & (long["contract"] == first["contract"])]
        raise InputError(
            f"duplicate date {first['date'].date()} for contract {first['contract']!r} in rows "
            f"{', '.join(str(int(r)) for r in hit[:5])}", file=source, row=int(hit.iloc[0]),
        )
    return long


def _one_product(long, table, product, months, roll_days, adjust, files, holidays=None):
    """Generic months 1..``months`` of one product, each date × month: adjusted prices, file
    rows, the held contract's real price and the difference-adjusted (P&L) levels."""
    prices_file, expiries_file = files
    listed = table.loc[table["product"] == product]
    if listed.empty:
        raise InputError(f"product {product!r} has no contracts in the expiries file",
                         file=expiries_file, column="product")
    names = listed["contract"].tolist()
    sub = long.loc[long["contract"].isin(names)]
    if sub.empty:
        raise InputError(f"no prices for any contract of product {product!r}", file=prices_file)
    level = sub.pivot(index="date", columns="contract", values="v").reindex(columns=names)
    rows = sub.pivot(index="date", columns="contract", values="r").reindex(columns=names)
    level, rows = level.sort_index(), rows.sort_index()
    dates = level.index
    roll = _roll_dates(listed["last_trade"], roll_days, holidays)
    # month 1 on date d: the first contract whose roll date is not before d (held through the
    # close of its roll date, the roll is done at that close)
    first = np.searchsorted(roll, dates.to_numpy().astype("datetime64[D]"), side="left")
    short = np.flatnonzero(first + months > len(names))
    if short.size:
        i = int(short[0])
        have = max(len(names) - int(first[i]), 0)
        raise InputError(
            f"product {product!r} has {have} listed contract(s) not past their roll date on "
            f"{dates[i].date()} but {months} generic month(s) are needed; add later contracts",
            file=expiries_file, column="product",
        )
    p, r = level.to_numpy(), rows.to_numpy()
    t = np.arange(len(dates))
    out = {}, {}, {}, {}  # adjusted levels, file rows, held contract's price, P&L levels
    for k in range(1, months + 1):
        held = first + k - 1
        raw = p[t, held]
        _need(raw, dates, names, held, product, k, "", prices_file)
        name = f"{product}_m{k}"
        out[0][name], out[3][name] = _adjusted(raw, p, r, held, adjust, dates, names,
                                               (product, k, prices_file))
        out[1][name], out[2][name] = r[t, held], raw
    return tuple(pd.DataFrame(o, index=dates) for o in out)


def _adjusted(raw, p, r, held, adjust, dates, names, where):
    """Levels back-adjusted by ``adjust`` and by differences (the P&L levels) of one month."""
    product, k, prices_file = where
    if len(dates) < 2:
        return raw.copy(), raw.copy()
    switch = np.flatnonzero(held[1:] != held[:-1]) + 1  # first date on the new contract
    new_before = p[switch - 1, held[switch]]  # new contract at the roll date's close
    _need(new_before, dates[switch - 1], names, held[switch], product, k, " at the roll",
          prices_file)
    old_before = raw[switch - 1]
    # step[j] links date j (a roll date) to j + 1; older history takes every later step
    step = np.zeros(len(dates))
    step[switch - 1] = new_before - old_before
    by_difference = raw + np.cumsum(step[::-1])[::-1]
    if adjust == "none":
        return raw.copy(), by_difference
    if adjust == "difference":
        return by_difference, by_difference
    t = np.arange(len(dates))
    _positive(np.concatenate([raw, new_before]), np.concatenate([
        r[t, held], r[switch - 1, held[switch]]]), product, k, prices_file)
    step = np.ones(len(dates))
    step[switch - 1] = new_before / old_before
    return raw * np.cumprod(step[::-1])[::-1], by_difference


def _need(values, dates, names, held, product, k, what, source):
    missing = np.flatnonzero(np.isnan(values))
    if missing.size:
        i = int(missing[0])
        raise InputError(
            f"no price for contract {names[int(held[i])]!r} on {dates[i].date()}, needed as "
            f"{product}_m{k}{what}", file=source,
        )


def _positive(values, rows, product, k, source):
    bad = np.flatnonzero(values <= 0)
    if bad.size:
        i = int(bad[0])
        raise InputError(
            f"ratio adjustment needs positive prices (found {values[i]:g} for {product}_m{k}); "
            f"use adjust = 'difference'", file=source, row=int(rows[i]),
        )


def _roll(prices, expiries, *, months, roll_days, adjust, date_column="date",
          contract_column="contract", price_column="price", prices_file=None,
          expiries_file=None, holidays=None):
    """Generic months on the dates where every product has a price: adjusted levels, file rows,
    held contracts' prices, P&L levels (see :func:`_one_product`); and the parsed long prices."""
    if adjust not in ADJUSTMENTS:
        raise InputError(f"unknown adjust {adjust!r}; use one of: {', '.join(ADJUSTMENTS)}",
                         key="data.roll.adjust")
    if isinstance(roll_days, bool) or not isinstance(roll_days, (int, np.integer)) \
            or roll_days < 0:
        raise InputError(f"roll_days must be a whole number >= 0 (got {roll_days!r})",
                         key="data.roll.roll_days")
    if not months:
        raise InputError("no generic months requested", key="months")
    for product, count in months.items():
        if isinstance(count, bool) or not isinstance(count, (int, np.integer)) or count < 1:
            raise InputError(f"months must be a whole number >= 1 (got {count!r})",
                             key=f"months.{product}")
    table = _expiry_table(expiries, expiries_file)
    long = _contract_prices(prices, set(table["contract"]), date_column, contract_column,
                            price_column, prices_file)
    parts = [_one_product(long, table, product, int(n), int(roll_days), adjust,
                          (prices_file, expiries_file), holidays)
             for product, n in months.items()]
    frames = [pd.concat([part[i] for part in parts], axis=1, join="inner") for i in range(4)]
    if frames[0].empty:
        raise InputError("no date has a price for every product "
                         f"({', '.join(months)})", file=prices_file)
    for f in frames:
        f.index.name = "date"
    return frames, long


def roll_generic(
    prices: pd.DataFrame,
    expiries: pd.DataFrame,
    *,
    months: dict[str, int],
    roll_days: int,
    adjust: str,
    date_column: str = "date",
    contract_column: str = "contract",
    price_column: str = "price",
    prices_file: str | None = None,
    expiries_file: str | None = None,
) -> pd.DataFrame:
    r"""Generic contract-month series ``<product>_m<k>`` from per-contract prices.

    Which contract: the contracts of a product are ordered by ``last_trade``; contract ``c``
    rolls on ``roll(c)`` = ``roll_days`` business days (Mon–Fri; through a book, less the closing
    days of ``[data] calendar`` or ``holidays``, see :mod:`data_adapters.calendars`; a
    weekend ``last_trade`` first moves back to the Friday) before ``last_trade(c)``. It is held
    through the close of ``roll(c)``, where the roll is done. On date ``t`` month ``k`` is the
    ``k``-th contract whose roll date is not before ``t``.

    Back-adjustment: let ``c_t`` be the contract held (as month ``k``) on date ``t`` and ``P_c(t)``
    its price. Over ``(t-1, t]`` the position is in ``c_t``, so the series must move as ``c_t``:

    - ``"ratio"``: :math:`A_t / A_{t-1} = P_{c_t}(t) / P_{c_t}(t-1)`, i.e.
      :math:`A_t = P_{c_t}(t) \prod_{s > t,\, c_s \ne c_{s-1}} P_{c_s}(s-1) / P_{c_{s-1}}(s-1)`
      — older history is scaled at each roll (keeps relative and log changes; needs positive
      prices);
    - ``"difference"``: :math:`A_t - A_{t-1} = P_{c_t}(t) - P_{c_t}(t-1)`, older history
      shifted by :math:`P_{c_s}(s-1) - P_{c_{s-1}}(s-1)` at each roll (keeps absolute changes);
    - ``"none"``: the held contract's price spliced as is (a roll shows as a jump).

    Back-adjusted levels before the last roll are **not tradable prices** (a ratio-adjusted
    level may never have been quoted; a difference-adjusted one may even be negative). The
    last rows (since the last roll) **equal the real prices** of the contracts held now, so
    current prices used for value-based contract counts stay right. Earlier levels depend on
    later rolls: a history as known on a past date is
    :meth:`~data_adapters.prices.PricePanel.as_of`. Each product is built on
    its own trading dates; the result keeps the dates on which every product has prices, and
    a change across dropped dates is still the change of the rolled position.

    Parameters
    ----------
    prices : pandas.DataFrame
        Long layout: columns ``date_column``, ``contract_column``, ``price_column`` (text or
        typed). Missing prices (empty cells) are skipped. An integer index gives the file rows
        named in errors (the readers index by file row, header = row 1); a default index is
        numbered like a CSV (first data row = row 2).
    expiries : pandas.DataFrame
        Columns ``contract``, ``last_trade`` (ISO date), ``product``; one row per contract.
    months : dict of str to int
        Product -> how many generic months are needed.
    roll_days : int
        Business days before ``last_trade`` on which the roll is done (>= 0).
    adjust : {"ratio", "difference", "none"}
        Back-adjustment of older history.
    date_column, contract_column, price_column : str
        Column names of ``prices``.
    prices_file, expiries_file : str, optional
        File names used in error messages.

    Returns
    -------
    pandas.DataFrame
        Sorted ``DatetimeIndex`` named ``date``; columns ``<product>_m1 .. <product>_m<k>`` in
        the order of ``months``; every value finite.

    Raises
    ------
    InputError
        A contract not in the expiries, a missing or unreadable ``last_trade``, a duplicate
        contract, too few listed contracts for the months on some date (naming date and
        product), a needed contract price missing on a date, an unknown ``adjust``,
        ``roll_days < 0``, or a non-positive price with ``adjust = "ratio"``.

    References
    ----------
    Hull, J. C., *Options, Futures, and Other Derivatives*, chapter on hedging strategies using
    futures, "rolling the hedge forward" (from memory). Back-adjusting continuous futures series
    by differences or ratios at each roll: common practice, no source.
    """
    frames, _ = _roll(prices, expiries, months=months, roll_days=roll_days, adjust=adjust,
                      date_column=date_column, contract_column=contract_column,
                      price_column=price_column, prices_file=prices_file,
                      expiries_file=expiries_file)
    return frames[0].astype(float)


def read_expiries(path: str | Path) -> pd.DataFrame:
    """Read an expiries file (``.csv``, ``.parquet``, ``.xlsx``), indexed by file row."""
    with input_boundary(str(path), "expiries file"):
        return _read_table(Path(path), str(path))


def load_contract_prices(book) -> PricePanel:
    """The price panel of a book with ``format = "contracts"``.

    Every series the book uses named ``<product>_m<k>`` for a product of the expiries file is
    rolled with :func:`roll_generic` (months 1..max k per product). Any other series (e.g. a
    regional rack price with no future) is read from the same file as a plain long-format
    series: its rows carry the series name in the contract column. Dates are aligned as for
    the other layouts (``dropped_rows`` counts the dates lost) and gaps checked. The panel also
    carries the held contracts' real prices (``held``) and difference-adjusted levels (``pnl``,
    whose changes are the rolled position's P&L, also across dropped dates), so every
    ``adjust`` needs the new contract's price on each roll date.
    """
    expiries = read_expiries(book.expiries_path)
    with input_boundary(str(book.prices_path), "price file"):
        return _load_contract_prices(book, expiries)


def _load_contract_prices(book, expiries: pd.DataFrame) -> PricePanel:
    d, roll = book.data, book.data.roll
    prices_file, expiries_file = str(book.prices_path), str(book.expiries_path)
    _require_columns(expiries, _EXPIRY_COLUMNS, "expiries", expiries_file)
    products = set(_text(expiries["product"]).dropna())
    frame = _read_table(book.prices_path, prices_file, d.table)
    _require_columns(frame, [d.date_column, roll.contract_column, d.price_column],
                     "contract price", prices_file)
    from basiswise.data_adapters.currency import needed_series

    wanted = needed_series(book)
    months: dict[str, int] = {}
    plain: list[str] = []
    for name in wanted:
        m = GENERIC_NAME.match(name)
        if m and m["product"] in products:
            months[m["product"]] = max(months.get(m["product"], 0), int(m["k"]))
        else:
            plain.append(name)
    names = _text(frame[roll.contract_column])
    is_plain = names.isin(plain).to_numpy(dtype=bool)
    for name in plain:
        if not (names == name).any():
            raise InputError(
                f"series {name!r} is neither a generic month <product>_m<k> of a product in "
                f"{expiries_file} nor a name in column {roll.contract_column!r}",
                file=prices_file, column=roll.contract_column,
            )
    parts = []  # per source: adjusted levels, file rows, held prices, P&L levels
    all_dates = set()
    if months:
        frames, long = _roll(
            frame.loc[~is_plain], expiries, months=months, roll_days=roll.roll_days,
            adjust=roll.adjust, date_column=d.date_column, contract_column=roll.contract_column,
            price_column=d.price_column, prices_file=prices_file, expiries_file=expiries_file,
            holidays=_closing_days(book, expiries))
        parts.append(frames)
        all_dates.update(long["date"])
    if plain:
        other = _contract_prices(frame.loc[is_plain], set(plain), d.date_column,
                                 roll.contract_column, d.price_column, prices_file)
        v = other.pivot(index="date", columns="contract", values="v")
        parts.append([v, other.pivot(index="date", columns="contract", values="r"), v, v])
        all_dates.update(other["date"])
    level, rows, held, pnl = (pd.concat([p[i] for p in parts], axis=1).sort_index()
                              for i in range(4))
    complete = level[wanted].notna().all(axis=1).to_numpy()
    if not complete.any():
        raise InputError("no date has a price for every series", file=prices_file)
    level, held, pnl = (f.loc[complete, wanted].astype(float) for f in (level, held, pnl))
    rows = rows.loc[complete, wanted].astype(int)
    for f in (level, rows, held, pnl):
        f.columns.name, f.index.name = None, "date"
    _check_gaps(level.index, rows, d.max_gap_days, prices_file)
    return PricePanel(prices=level, source=book.prices_path,
                      dropped_rows=len(all_dates) - len(level), file_rows=rows, held=held,
                      pnl=pnl, adjust=roll.adjust)


def _closing_days(book, expiries: pd.DataFrame):
    """Closing days of the book's calendar over the expiries' span (None: Mon–Fri only)."""
    if not (book.data.calendar or book.data.holidays):
        return None
    from basiswise.data_adapters.calendars import closing_days

    last = _parse_dates(expiries["last_trade"], "last_trade", str(book.expiries_path))
    return closing_days(book, last.min() - pd.Timedelta(days=60), last.max())
