"""No look-ahead: a backtest decision uses only what a desk knew on its date.

For a wide book and for rolled books (``format = "contracts"``) with every back-adjustment and
change kind: (1) the decision at a rebalance date equals ``solve`` on the price file cut at that
date; (2) changing prices only after a date leaves every decision up to it, and every realised
P&L whose period ends by then, unchanged.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from basiswise.data_adapters.book import Book, load_book
from basiswise.data_adapters.prices import load_prices
from basiswise.data_adapters.rolls import roll_generic
from basiswise.optimizer.backtest.engine import run_backtest
from basiswise.optimizer.pipeline import model_of, prepare, solve_book, solve_model

from bw_testkit import (
    DATES,
    EXPIRIES,
    TWO_SPOT_SERIES,
    book_dict,
    contract_prices,
    make_book,
    two_spot_changes,
    write_rolled_book,
    write_wide,
)

KINDS = ("relative", "log", "absolute")
CASES = [("wide", kind) for kind in KINDS] + [
    (adjust, kind) for adjust in ("ratio", "difference", "none") for kind in KINDS]
STRATEGIES = ["joint-continuous", "joint-whole"]


def _rolled(folder, adjust: str) -> Book:
    """The rolled test book of rolls tests with a rack price that follows the front month."""
    path = write_rolled_book(folder, adjust)
    contracts = contract_prices()
    front = roll_generic(contracts, EXPIRIES, months={"ulsd": 1}, roll_days=2,
                         adjust="difference")["ulsd_m1"].to_numpy()
    noise = np.cumsum(np.random.default_rng(7).normal(0.0, 0.01, len(DATES)))
    rack = pd.DataFrame({"date": DATES.strftime("%Y-%m-%d"), "contract": "rack_diesel",
                         "price": np.round(0.2 + 0.9 * front + noise, 4)})
    pd.concat([contracts, rack]).to_csv(folder / "contracts.csv", index=False)
    path.write_text(path.read_text().replace("quantity = -500000.0", "quantity = -2000000.0"))
    return load_book(path)


def _wide(folder) -> Book:
    """Four invented wide series (the backtest tests'), no liquidity limit or trading cost."""
    write_wide(folder / "prices.csv", two_spot_changes(80, 0), list(TWO_SPOT_SERIES),
               [2.5, 2.4, 2.45, 70.0])
    ins = [{"id": "FA", "series": "fut_a", "contract_size": 42_000, "unit": "gal"},
           {"id": "FB", "series": "fut_b", "contract_size": 1000, "unit": "bbl"}]
    exp = [{"id": "EA", "series": "spot_a", "quantity": -1_000_000, "unit": "gal"},
           {"id": "EB", "series": "spot_b", "quantity": -12_000, "unit": "bbl"}]
    return make_book(folder, book_dict("prices.csv", TWO_SPOT_SERIES, exp, ins,
                                       book={"horizon_days": 5}))


def _case(folder, adjust: str, kind: str) -> tuple[Book, dict]:
    """The book and the backtest settings (also the ``solve`` overrides but ``step``)."""
    if adjust == "wide":
        return _wide(folder), {"window": 30, "step": 5, "changes": kind, "estimator": "sample"}
    return _rolled(folder, adjust), {"window": 12, "step": 2, "changes": kind,
                                     "estimator": "sample"}


def _rewritten(book: Book, name: str, edit) -> Book:
    """The book pointed at a copy of its price file, rewritten by ``edit(frame, dates)``."""
    frame = pd.read_csv(book.prices_path, dtype={"date": str})
    edit(frame, pd.to_datetime(frame["date"])).to_csv(book.folder / name, index=False)
    data = book.model_dump(by_alias=True, exclude_none=True)
    data["data"]["prices"] = name
    return Book.from_dict(data, book.folder, f"{name}.toml")


def _cut(book: Book, date: pd.Timestamp) -> Book:
    def drop_later(frame, dates):
        return frame.loc[np.asarray(dates <= date)]

    return _rewritten(book, f"cut_{date.date()}.csv", drop_later)


def _backtest(book: Book, cfg: dict):
    return run_backtest(book, strategies=STRATEGIES, estimators=["sample"], method="exact",
                        **cfg)


@pytest.mark.parametrize(("adjust", "kind"), CASES)
def test_backtest_decision_is_solve_on_the_file_cut_at_its_date(tmp_path, adjust, kind):
    book, cfg = _case(tmp_path, adjust, kind)
    res = _backtest(book, cfg)
    overrides = {k: v for k, v in cfg.items() if k != "step"}
    assert adjust == "wide" or pd.Timestamp("2026-02-25") in res.dates[::2]  # a roll date
    for r in range(0, len(res.dates), 2):  # rolled books: includes the roll date 2026-02-25
        cut = _cut(book, res.dates[r])
        for strategy, method in zip(STRATEGIES, ("continuous", "exact"), strict=True):
            rep = solve_book(cut, method, **overrides)
            target = np.array([i.target for i in rep.instruments])
            got = res.run(strategy, "sample").targets[r]
            if method == "continuous":
                np.testing.assert_allclose(got, target, rtol=1e-9, atol=1e-9)
            else:
                np.testing.assert_array_equal(got, target)
    assert np.abs(res.run("joint-whole", "sample").targets).max() >= 10  # a real hedge


@pytest.mark.parametrize(("adjust", "kind"), CASES)
def test_prices_after_a_date_leave_decisions_and_pnl_up_to_it_unchanged(tmp_path, adjust, kind):
    book, cfg = _case(tmp_path, adjust, kind)
    base = _backtest(book, cfg)
    cut = base.dates[len(base.dates) // 2]  # rolled books: the roll of 2026-02-25 comes later
    rng = np.random.default_rng(5)

    def shift_later(frame, dates):
        later = np.asarray(dates > cut)
        cols = [c for c in frame.columns if c not in ("date", "contract")]
        frame.loc[later, cols] = (frame.loc[later, cols].to_numpy(dtype=float) * 1.3
                                  * rng.uniform(0.95, 1.05, size=(int(later.sum()), len(cols))))
        return frame

    other = _backtest(_rewritten(book, "shifted.csv", shift_later), cfg)
    past = np.asarray(base.dates <= cut)
    ended = np.asarray(base.horizon_end <= cut)
    held = np.asarray(base.held_end <= cut)
    assert past.sum() >= 3 and ended.sum() >= 2 and not past.all()

    def same(a, b):
        np.testing.assert_allclose(a, b, rtol=1e-9, atol=1e-9 * max(1.0, np.abs(a).max()))

    same(base.exposure_horizon[ended], other.exposure_horizon[ended])
    same(base.exposure_held[held], other.exposure_held[held])
    for a, b in zip(base.runs, other.runs, strict=True):
        same(a.targets[past], b.targets[past])
        same(a.horizon_leg[ended], b.horizon_leg[ended])
        same(a.held_leg[held], b.held_leg[held])
    assert any(not np.allclose(a.targets[~past], b.targets[~past])
               for a, b in zip(base.runs, other.runs, strict=True))  # the shift is real


@pytest.mark.parametrize("adjust", ["ratio", "difference", "none"])
def test_panel_as_of_a_date_is_the_file_cut_there(tmp_path, adjust):
    book = _rolled(tmp_path, adjust)
    panel = load_prices(book)
    for end in (5, 7, 8, 20, 27, 28):  # rolls at rows 7 and 27 (done at their close)
        date = panel.prices.index[end]
        cut = load_prices(_cut(book, date))
        pd.testing.assert_frame_equal(panel.as_of(end), cut.prices, rtol=1e-12)
        pd.testing.assert_frame_equal(panel.as_of(end, end - 4), cut.prices.iloc[-5:],
                                      rtol=1e-12)
        # the P&L levels move as the contracts held, whatever the adjustment
        np.testing.assert_allclose(np.diff(panel.pnl_levels.iloc[:end + 1], axis=0),
                                   np.diff(cut.pnl_levels, axis=0), rtol=1e-9, atol=1e-12)


@pytest.mark.parametrize("adjust", ["ratio", "difference", "none"])
def test_pnl_levels_close_the_old_contract_and_open_the_new_at_the_roll(tmp_path, adjust):
    book = _rolled(tmp_path, adjust)
    panel = load_prices(book)
    raw = contract_prices().pivot(index="date", columns="contract", values="price")
    raw.index = pd.DatetimeIndex(raw.index)
    roll = panel.prices.index.get_loc(pd.Timestamp("2026-02-25"))
    step = panel.pnl_levels["ulsd_m1"].iloc[roll + 1] - panel.pnl_levels["ulsd_m1"].iloc[roll]
    # held through the roll date's close in the old contract, then in ULSD-2026-04
    d0, d1 = panel.prices.index[roll], panel.prices.index[roll + 1]
    assert step == pytest.approx(raw.at[d1, "ULSD-2026-04"] - raw.at[d0, "ULSD-2026-04"],
                                 rel=1e-12)
    assert panel.held["ulsd_m1"].iloc[roll] == raw.at[d0, "ULSD-2026-03"]
    assert panel.held["ulsd_m1"].iloc[roll + 1] == raw.at[d1, "ULSD-2026-04"]


def test_model_of_as_of_is_the_model_of_the_cut_file(tmp_path):
    book = _rolled(tmp_path, "difference")
    prep = prepare(book, window=12, estimator="sample")
    date = prep.panel.prices.index[20]
    here = solve_model(model_of(prep, fractional=True, as_of=date), "continuous")
    there = solve_book(_cut(book, date), "continuous", window=12, estimator="sample")
    np.testing.assert_allclose([i.target for i in here.instruments],
                               [i.target for i in there.instruments], rtol=1e-9)
