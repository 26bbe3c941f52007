"""Books in several currencies: exchange-rate series and conversion into the book currency.

A series whose price unit is in a currency ``X`` other than the book currency ``K`` needs an
exchange-rate series: a declared series whose unit is ``K/X`` (the price of one ``X`` in ``K``)
or ``X/K`` (the market's inverse quote, divided by). ``[fx]`` names the series per currency
(``USD = "eur_per_usd"``); without it the one declared series of either unit is used.

Conversion, date by date, with ``r_t`` the rate (``K`` per ``X``) and ``T`` the decision date:

* a series used by exposures: ``P_t · r_t`` before changes are taken, so the covariance carries
  the currency risk of the physical position (its value in ``K`` moves with both);
* a series used by instruments: a margined future has no value, its daily P&L is in ``X``; the
  hedge counts it at the rate of the decision date, ``P_t · r_T`` (the price's own relative
  changes, worth ``P_T · r_T`` per unit today). The panel carries ``held = P_t · r_t`` and the
  ratio adjustment, so a history cut at an earlier date
  (:meth:`~data_adapters.prices.PricePanel.as_of`) uses that date's rate, and the P&L levels
  (``pnl``) accumulate ``r_t · ΔP_t``: each day's variation margin converted that day.

A series used by both gets a second column ``NAME@futures`` for its instruments. Currency
futures are instruments on the exchange-rate series with the contract size in the currency the
rate is quoted per (``USD`` for ``EUR/USD``, ``EUR`` for the ``USD/EUR`` quote). An instrument's
``margin`` and ``cost_per_contract`` stated in ``amount_currency`` are converted at ``r_T``.

References
----------
Hull, J. C., Options, Futures, and Other Derivatives, chapters on hedging with futures and on
currency futures (a foreign exposure hedged with currency futures; daily settlement).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from basiswise.data_adapters.errors import InputError
from basiswise.data_adapters.units import is_currency, parse_price_unit

__all__ = ["FUTURES_SUFFIX", "RateSource", "book_currency_shocks", "check_currencies",
           "needed_series", "rate_sources", "to_book_currency"]

FUTURES_SUFFIX = "@futures"


@dataclass(frozen=True)
class RateSource:
    """Where the rate of one currency comes from: a series, and whether to divide by it."""

    currency: str
    series: str
    invert: bool

    def describe(self, book_currency: str) -> str:
        how = f"1 / {self.series}" if self.invert else self.series
        return f"{self.currency} → {book_currency} at {how}"


def _currency_of(unit: str) -> str:
    return parse_price_unit(unit)[0]


def _rate_pair(unit: str) -> tuple[str, str] | None:
    cur, den = parse_price_unit(unit)
    return (cur, den) if is_currency(den) else None


def _used_currencies(book, currency: str) -> dict[str, str]:
    """Foreign currency -> the first book key that needs it."""
    need: dict[str, str] = {}
    for item in [*book.exposures, *book.instruments]:
        spec = book.series.get(item.series)
        if spec is None:
            continue
        cur = _currency_of(spec.unit)
        if cur != currency:
            need.setdefault(cur, (f"series.{item.series}.unit",
                                  f"price unit {spec.unit!r} is in {cur}"))
    for inst in book.instruments:
        x = inst.amount_currency
        if x not in (None, currency):
            need.setdefault(x, (f"instrument '{inst.id}'.amount_currency", f"amounts are in {x}"))
    return need


def _find(book, x: str, k: str, source: str, needed_by: tuple[str, str]) -> RateSource:
    if x in book.fx:
        name = book.fx[x]
        key = f"fx.{x}"
        spec = book.series.get(name)
        if spec is None:
            raise InputError(f"exchange-rate series {name!r} is not declared; add "
                             f"[series.{name}] with unit \"{k}/{x}\"", file=source, key=key)
        pair = _rate_pair(spec.unit)
        if pair not in ((k, x), (x, k)):
            raise InputError(f"series {name!r} has unit {spec.unit!r}; a rate for {x} in a "
                             f"{k} book is quoted \"{k}/{x}\" or \"{x}/{k}\"", file=source,
                             key=key)
        return RateSource(x, name, invert=pair == (x, k))
    found = [(n, _rate_pair(s.unit)) for n, s in book.series.items()]
    direct = [RateSource(x, n, False) for n, p in found if p == (k, x)]
    inverse = [RateSource(x, n, True) for n, p in found if p == (x, k)]
    hits = direct + inverse
    if not hits:
        raise InputError(
            f"{needed_by[1]} but the book currency is {k} and no exchange-rate series for {x} "
            f"is declared: add one with unit \"{k}/{x}\" (or \"{x}/{k}\") and its prices, e.g. "
            f"[series.{k.lower()}_per_{x.lower()}] unit = \"{k}/{x}\"", file=source,
            key=needed_by[0])
    if len(hits) > 1:
        names = ", ".join(h.series for h in hits)
        raise InputError(f"several exchange-rate series for {x} ({names}); name one in [fx] "
                         f"{x} = \"...\"", file=source, key=f"fx.{x}")
    return hits[0]


def rate_sources(book, source: str | None = None) -> dict[str, RateSource]:
    """The rate of every foreign currency the book uses, by currency code."""
    k = book.book.currency
    source = source or book.source
    return {x: _find(book, x, k, source, key) for x, key in _used_currencies(book, k).items()}


def check_currencies(book, currency: str, source: str) -> None:
    """Book-level checks: every foreign currency in use has exactly one rate series."""
    for x, name in book.fx.items():
        if not is_currency(x):
            raise InputError("must be a 3-letter upper-case currency code such as 'USD'",
                             file=source, key=f"fx.{x}")
        if x == currency:
            raise InputError(f"{x} is the book currency; it needs no rate", file=source,
                             key=f"fx.{x}")
        if name not in book.series:
            raise InputError(f"exchange-rate series {name!r} is not declared", file=source,
                             key=f"fx.{x}")
    for x, key in _used_currencies(book, currency).items():
        _find(book, x, currency, source, key)


def needed_series(book) -> list[str]:
    """Series to read: those used, then the exchange-rate series their currencies need."""
    names = list(book.series_ids())
    for src in rate_sources(book).values():
        if src.series not in names:
            names.append(src.series)
    return names


def _rates(panel, src: RateSource, file: str) -> np.ndarray:
    values = panel.prices[src.series].to_numpy(dtype=float)
    bad = np.flatnonzero(~(values > 0))
    if bad.size:
        i = int(bad[0])
        row = None if panel.file_rows is None else int(panel.file_rows[src.series].iloc[i])
        raise InputError(f"exchange rate must be positive (found {values[i]:g} on "
                         f"{panel.prices.index[i].date()})", file=file, row=row,
                         column=src.series)
    return 1.0 / values if src.invert else values


def _columns(book) -> tuple[set[str], set[str]]:
    return ({e.series for e in book.exposures}, {i.series for i in book.instruments})


def _pnl_levels(pnl: np.ndarray, held: np.ndarray, r: np.ndarray, *,
                physical: bool) -> np.ndarray:
    """Levels whose differences are the book-currency P&L of one unit held, ending at
    ``held_T · r_T``: a future's ``r_t · Δpnl_t``; a physical position's value change adds
    ``held_{t−1} · Δr_t`` (equal to ``Δ(P · r)`` for a plain series)."""
    step = np.diff(pnl) * r[1:]
    if physical:
        step = step + held[:-1] * np.diff(r)
    levels = np.cumsum(np.concatenate([[0.0], step]))
    return levels - levels[-1] + held[-1] * r[-1]


def to_book_currency(book, panel):
    """The book and its price panel with every price in the book currency.

    Parameters
    ----------
    book : Book
        Validated book.
    panel : PricePanel
        Read with :func:`needed_series` (the rate series included).

    Returns
    -------
    book, panel, notes
        The book (instrument series renamed where a series serves both sides, margins and
        costs converted), the panel over ``book.series_ids()`` and one note per currency.
    """
    from basiswise.data_adapters.prices import PricePanel

    sources = rate_sources(book)
    if not sources:
        return book, panel, []
    k, file = book.book.currency, str(panel.source)
    if panel.adjust == "difference" and panel.held is not None:
        raise InputError("a rolled book with prices in several currencies needs adjust = "
                         "'ratio' or 'none'", file=book.source, key="data.roll.adjust")
    rates = {x: _rates(panel, s, file) for x, s in sources.items()}
    exp_cols, ins_cols = _columns(book)
    prices, held, pnl, rows = {}, {}, {}, {}
    raw = panel.prices
    raw_held = raw if panel.held is None else panel.held
    raw_pnl = raw if panel.pnl is None else panel.pnl
    renamed: dict[str, str] = {}
    for s in book.series_ids():
        x = _currency_of(book.series[s].unit)
        p, h, q = (f[s].to_numpy(dtype=float) for f in (raw, raw_held, raw_pnl))
        if x == k:
            out = [(s, p, h, q)]
        else:
            r = rates[x]
            fut = s + FUTURES_SUFFIX if s in exp_cols and s in ins_cols else s
            out = []
            if s in exp_cols:
                out.append((s, p * r, h * r, _pnl_levels(q, h, r, physical=True)))
            if s in ins_cols:
                out.append((fut, p * r[-1], h * r, _pnl_levels(q, h, r, physical=False)))
                renamed[s] = fut
        for name, a, b, c in out:
            prices[name], held[name], pnl[name] = a, b, c
            rows[name] = None if panel.file_rows is None else panel.file_rows[s].to_numpy()
    index = raw.index
    frames = [pd.DataFrame(d, index=index) for d in (prices, held, pnl)]
    file_rows = None if panel.file_rows is None else pd.DataFrame(rows, index=index)
    new_panel = PricePanel(prices=frames[0], source=panel.source,
                           dropped_rows=panel.dropped_rows, file_rows=file_rows,
                           held=frames[1], pnl=frames[2], adjust="ratio")
    last = {x: float(r[-1]) for x, r in rates.items()}
    return _rewrite(book, renamed, last), new_panel, _notes(sources, k, renamed)


def _rewrite(book, renamed: dict[str, str], last: dict[str, float]):
    """Instruments on their converted columns, margin and cost in the book currency."""
    k = book.book.currency
    series = dict(book.series)
    instruments = []
    for ins in book.instruments:
        upd = {}
        if renamed.get(ins.series, ins.series) != ins.series:
            new = renamed[ins.series]
            series[new] = book.series[ins.series]
            upd["series"] = new
        if ins.amount_currency not in (None, k):
            r = last[ins.amount_currency]
            upd.update(margin=ins.margin * r, cost_per_contract=ins.cost_per_contract * r,
                       amount_currency=k)
            if ins.tick_value is not None:  # a currency amount per contract, like the margin
                upd["tick_value"] = ins.tick_value * r
        quoted = parse_price_unit(book.series[ins.series].unit)[0]
        if ins.spread is not None and quoted != k and quoted in last:
            upd["spread"] = ins.spread * last[quoted]  # in the series' price unit: its currency
        instruments.append(ins.model_copy(update=upd) if upd else ins)
    return book.model_copy(update={"series": series, "instruments": instruments})


def _notes(sources: dict[str, RateSource], k: str, renamed: dict[str, str]) -> list[str]:
    notes = [f"prices in {x} converted to {k} ({s.describe(k)}): exposures date by date, "
             f"futures P&L at the rate of the decision date" for x, s in sources.items()]
    if renamed and any(a != b for a, b in renamed.items()):
        both = ", ".join(a for a, b in renamed.items() if a != b)
        notes.append(f"series used by exposures and futures ({both}): the futures read "
                     f"'{FUTURES_SUFFIX}' columns")
    return notes


def book_currency_shocks(book, pct: dict[str, float]) -> dict[str, float]:
    """Percent moves of the series as quoted, as moves of the book's converted columns.

    A shock to an exchange-rate series moves the book-currency value of every exposure priced
    in that currency (``(1 + p)(1 + f) − 1`` with ``f`` the move of the rate in book currency
    per foreign unit); futures move with their own price only (their P&L is converted at
    today's rate). A series' shock also applies to its ``@futures`` column.
    """
    out = dict(pct)
    for s in book.series_ids():
        base = s.removesuffix(FUTURES_SUFFIX)
        if s != base and base in pct:
            out[s] = pct[base]
    sources = rate_sources(book)
    for s in {e.series for e in book.exposures}:
        x = _currency_of(book.series[s].unit)
        src = sources.get(x)
        if src is None or not pct.get(src.series):
            continue
        q = 1.0 + float(pct[src.series]) / 100.0
        fx = 1.0 / q if src.invert else q
        out[s] = ((1.0 + float(pct.get(s, 0.0)) / 100.0) * fx - 1.0) * 100.0
    return out
