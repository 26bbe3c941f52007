"""Data-quality report of a book's price history, per series, before any hedge is built.

Read from the book's source as it is (before dates are aligned), per series:

* ``first``/``last`` date and ``rows`` with a price;
* ``missing``: business days of the book's calendar (:mod:`data_adapters.calendars`) between the
  series' first and last date without a price; ``longest_gap``: most calendar days between two
  consecutive prices (a problem above ``[data] max_gap_days``);
* ``stale``: the longest run of consecutive rows with an unchanged price (a problem from
  ``stale_days`` rows);
* ``jumps``: daily moves whose robust z-score ``|x − median| / (1.4826 · MAD)`` (Hampel's
  outlier rule on log changes, or on absolute changes where a price is not positive) exceeds
  ``jump_z``;
* ``roll_gaps`` (books of per-contract prices): the jump between the old and the new contract
  on each roll date, before back-adjustment, judged with the same robust z-score;
* ``unmatched``: dates on which the series has a price but another series of the book has none
  (alignment drops them); ``off_calendar``: prices dated on a closing day of the calendar;
* ``aligned``: rows on which every series has a price, against the estimation window.

References
----------
Hampel, F. R. (1974), "The influence curve and its role in robust estimation", Journal of the
American Statistical Association 69(346) (the median absolute deviation, scaled by 1.4826 to
the normal standard deviation).
"""

from __future__ import annotations

from dataclasses import asdict, dataclass, field

import numpy as np
import pandas as pd

__all__ = ["Problem", "QualityReport", "SeriesQuality", "quality_report", "raw_prices"]

MAD_TO_STD = 1.4826


@dataclass(frozen=True)
class Problem:
    """One finding: which series (``None`` for the book), what kind, a sentence, a date."""

    series: str | None
    kind: str
    message: str
    date: str | None = None


@dataclass(frozen=True)
class SeriesQuality:
    """The quality figures of one series (see the module docstring)."""

    series: str
    unit: str
    first: str
    last: str
    rows: int
    missing: int
    longest_gap: int
    stale: int
    jumps: int
    roll_gaps: int | None
    unmatched: int
    off_calendar: int


@dataclass(frozen=True)
class QualityReport:
    """Per-series figures, the aligned row count against the window, and the problems found."""

    book: str
    source: str
    series: list[SeriesQuality]
    aligned_rows: int
    window: int
    settings: dict
    problems: list[Problem] = field(default_factory=list)

    @property
    def ok(self) -> bool:
        return not self.problems

    def to_dict(self) -> dict:
        return {"book": self.book, "source": self.source, "ok": self.ok,
                "aligned_rows": self.aligned_rows, "window": self.window,
                "settings": self.settings, "series": [asdict(s) for s in self.series],
                "problems": [asdict(p) for p in self.problems]}


def raw_prices(book, series: list[str]) -> tuple[pd.DataFrame, str]:
    """Prices of ``series`` as the source has them (one row per date, NaN where none)."""
    from basiswise.data_adapters import prices as px

    d = book.data
    if d.prices is None:
        from basiswise.data_adapters.database import fetch_frame

        frame, source = fetch_frame(book, series)
    else:
        source = str(book.prices_path)
        frame = px._read_table(book.prices_path, source, d.table)
    if d.format == "long":
        levels, _ = px._long(frame, series, d.date_column, d.series_column, d.price_column,
                             source)
    else:
        levels, _ = px._wide(frame, series, d.date_column, source)
    return levels.sort_index(), source


def _moves(values: np.ndarray) -> np.ndarray:
    return np.diff(np.log(values)) if (values > 0).all() else np.diff(values)


def _robust_z(x: np.ndarray) -> np.ndarray:
    if x.size < 3:
        return np.zeros_like(x)
    mad = np.median(np.abs(x - np.median(x)))
    if mad == 0:
        return np.zeros_like(x)
    return np.abs(x - np.median(x)) / (MAD_TO_STD * mad)


def _longest_run(values: np.ndarray) -> tuple[int, int]:
    """Length of the longest run of equal consecutive values (rows), and where it starts."""
    if values.size == 0:
        return 0, 0
    same = np.concatenate([[False], values[1:] == values[:-1]])
    best, start, run = 1, 0, 1
    for i in range(1, values.size):
        run = run + 1 if same[i] else 1
        if run > best:
            best, start = run, i - run + 1
    return best, start


def _day(ts) -> str:
    return str(pd.Timestamp(ts).date())


def _one(book, name: str, col: pd.Series, others: pd.DataFrame, settings: dict,
         problems: list[Problem]) -> SeriesQuality:
    from basiswise.data_adapters.calendars import business_days, closing_days

    own = col.dropna()
    dates, values = own.index, own.to_numpy(dtype=float)
    expected = business_days(book, dates[0], dates[-1])
    missing = expected.difference(dates)
    if len(missing):
        shown = ", ".join(_day(x) for x in missing[:3]) + (" …" if len(missing) > 3 else "")
        problems.append(Problem(name, "missing", f"{len(missing)} business days without a "
                                f"price ({shown})", _day(missing[0])))
    gaps = np.diff(dates.to_numpy()).astype("timedelta64[D]").astype(int) if len(dates) > 1 \
        else np.zeros(0, dtype=int)
    longest = int(gaps.max()) if gaps.size else 0
    if longest > book.data.max_gap_days:
        at = dates[int(gaps.argmax())]
        problems.append(Problem(name, "gap", f"{longest} calendar days without a price after "
                                f"{_day(at)} (max_gap_days = {book.data.max_gap_days})",
                                _day(at)))
    stale, start = _longest_run(values)
    if stale >= settings["stale_days"]:
        problems.append(Problem(name, "stale", f"price unchanged at {values[start]:g} for "
                                f"{stale} rows from {_day(dates[start])}", _day(dates[start])))
    moves = _moves(values)
    z = _robust_z(moves)
    hits = np.flatnonzero(z > settings["jump_z"])
    for i in hits[:5]:
        problems.append(Problem(name, "jump", f"move of {moves[i]:+.4g} on {_day(dates[i + 1])} "
                                f"(robust z {z[i]:.0f} > {settings['jump_z']:g})",
                                _day(dates[i + 1])))
    if len(own) < book.estimation.window:
        problems.append(Problem(name, "short history", f"{len(own)} prices for a window of "
                                f"{book.estimation.window} rows"))
    closed = closing_days(book, dates[0], dates[-1]).astype("datetime64[ns]")
    off = int(np.isin(dates.to_numpy(), closed).sum() + (dates.day_of_week >= 5).sum())
    if off:
        problems.append(Problem(name, "calendar", f"{off} prices dated on closing days"))
    others = others.reindex(dates)
    unmatched = int(others.isna().any(axis=1).sum()) if others.shape[1] else 0
    return SeriesQuality(series=name, unit=book.series[name].unit, first=_day(dates[0]),
                         last=_day(dates[-1]), rows=int(len(own)), missing=int(len(missing)),
                         longest_gap=longest, stale=int(stale), jumps=int(hits.size),
                         roll_gaps=None, unmatched=unmatched, off_calendar=off)


def _roll_gaps(panel, settings: dict, problems: list[Problem]) -> dict[str, int]:
    """Roll dates per rolled series: where the held price moved unlike the P&L level."""
    out: dict[str, int] = {}
    if panel.held is None or panel.pnl is None:
        return out
    for name in panel.held.columns:
        held, pnl = (f[name].to_numpy(dtype=float) for f in (panel.held, panel.pnl))
        gap = np.diff(held) - np.diff(pnl)
        rolls = np.flatnonzero(np.abs(gap) > 1e-9 * np.abs(held[1:]).max())
        if not rolls.size:
            continue
        out[name] = int(rolls.size)
        daily = np.diff(pnl)
        mad = np.median(np.abs(daily - np.median(daily)))
        for i in rolls:
            z = abs(gap[i]) / (MAD_TO_STD * mad) if mad > 0 else 0.0
            if z > settings["jump_z"]:
                day = _day(panel.held.index[i + 1])
                problems.append(Problem(name, "roll gap", f"roll on {day} jumps {gap[i]:+.4g} "
                                        f"between contracts (robust z {z:.0f})", day))
    return out


def quality_report(book, *, stale_days: int = 5, jump_z: float = 10.0) -> QualityReport:
    """Check the book's price history; see the module docstring for each figure.

    Parameters
    ----------
    book : Book
        Validated book; its source is read again, unaligned.
    stale_days : int
        Rows of unchanged price that count as a stale run.
    jump_z : float
        Robust z-score above which a daily move (or a roll gap) is a jump.

    Raises
    ------
    InputError
        When the source cannot be read at all (missing file, table, column).
    """
    from basiswise.data_adapters.currency import needed_series
    from basiswise.data_adapters.prices import load_prices

    settings = {"stale_days": int(stale_days), "jump_z": float(jump_z)}
    names = needed_series(book)
    problems: list[Problem] = []
    if book.data.format == "contracts":
        panel = load_prices(book)
        levels, source = panel.held, str(book.prices_path)
        rolled = _roll_gaps(panel, settings, problems)
    else:
        levels, source = raw_prices(book, names)
        rolled = {}
    rows = []
    for name in names:
        rows.append(_one(book, name, levels[name], levels.drop(columns=[name]), settings,
                         problems))
    rows = [r if r.series not in rolled else
            SeriesQuality(**{**asdict(r), "roll_gaps": rolled[r.series]}) for r in rows]
    aligned = int(levels[names].notna().all(axis=1).sum())
    window = book.estimation.window
    if aligned < window:
        problems.append(Problem(None, "short history", f"{aligned} aligned rows for a window of "
                                f"{window} rows"))
    return QualityReport(book=book.book.name, source=source, series=rows, aligned_rows=aligned,
                         window=window, settings=settings, problems=problems)
