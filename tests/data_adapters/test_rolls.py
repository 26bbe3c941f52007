"""Futures rolls: which contract is each generic month, back-adjustment, errors, book loading."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from basiswise.data_adapters.book import load_book
from basiswise.data_adapters.errors import InputError
from basiswise.data_adapters.prices import load_prices
from basiswise.data_adapters.rolls import roll_generic

from bw_testkit import DATES, EXPIRIES, contract_prices, write_rolled_book

ROLL_1, ROLL_2 = pd.Timestamp("2026-01-28"), pd.Timestamp("2026-02-25")


def _wide(long: pd.DataFrame) -> pd.DataFrame:
    w = long.pivot(index="date", columns="contract", values="price")
    w.index = pd.DatetimeIndex(w.index)
    return w[list(EXPIRIES["contract"])]


def _held(k: int) -> list[str]:
    """The contract expected as month k on each date, written out from the roll dates above."""
    names = list(EXPIRIES["contract"])
    first = [0 if d <= ROLL_1 else 1 if d <= ROLL_2 else 2 for d in DATES]
    return [names[i + k - 1] for i in first]


def _err(fn, *args, **kw) -> InputError:
    with pytest.raises(InputError) as info:
        fn(*args, **kw)
    return info.value


def _roll(prices=None, expiries=None, **kw):
    args = {"months": {"ulsd": 2}, "roll_days": 2, "adjust": "ratio"} | kw
    return roll_generic(contract_prices() if prices is None else prices,
                        EXPIRIES if expiries is None else expiries, **args)


# --------------------------------------------------------------------------- which contract


def test_month_one_and_two_around_the_roll():
    raw = _wide(contract_prices())
    out = _roll(adjust="none")
    assert list(out.columns) == ["ulsd_m1", "ulsd_m2"]
    day_before, roll_day, day_after = (pd.Timestamp(d) for d in
                                       ("2026-01-27", "2026-01-28", "2026-01-29"))
    # source: Hull, Options, Futures, and Other Derivatives, rolling the hedge forward into the
    # next contract before delivery (from memory); the roll date rule itself: common practice
    assert out.loc[day_before, "ulsd_m1"] == raw.loc[day_before, "ULSD-2026-02"]
    assert out.loc[roll_day, "ulsd_m1"] == raw.loc[roll_day, "ULSD-2026-02"]
    assert out.loc[day_after, "ulsd_m1"] == raw.loc[day_after, "ULSD-2026-03"]
    assert out.loc[roll_day, "ulsd_m2"] == raw.loc[roll_day, "ULSD-2026-03"]
    assert out.loc[day_after, "ulsd_m2"] == raw.loc[day_after, "ULSD-2026-04"]
    for k in (1, 2):
        expected = [raw.loc[d, c] for d, c in zip(DATES, _held(k), strict=True)]
        np.testing.assert_array_equal(out[f"ulsd_m{k}"].to_numpy(), expected)


def test_roll_days_zero_holds_through_last_trade_day():
    raw = _wide(contract_prices())
    out = _roll(adjust="none", roll_days=0, months={"ulsd": 1})
    last, after = pd.Timestamp("2026-01-30"), pd.Timestamp("2026-02-02")
    # reference: numpy.busday_offset counts Mon–Fri business days; 0 days = the last trade day
    assert out.loc[last, "ulsd_m1"] == raw.loc[last, "ULSD-2026-02"]
    assert out.loc[after, "ulsd_m1"] == raw.loc[after, "ULSD-2026-03"]


# --------------------------------------------------------------------------- back-adjustment


@pytest.mark.parametrize("k", [1, 2])
def test_ratio_adjustment_keeps_held_contract_relative_changes(k):
    raw = _wide(contract_prices()).to_numpy()
    names = list(EXPIRIES["contract"])
    col = np.array([names.index(c) for c in _held(k)])
    t = np.arange(1, len(DATES))
    held_change = raw[t, col[t]] / raw[t - 1, col[t]] - 1.0  # the contract held over (t-1, t]
    out = _roll(adjust="ratio")[f"ulsd_m{k}"].to_numpy()
    # reference: definition of a back-adjusted series (ratio: relative change of the held
    # contract on every day, rolls included)
    np.testing.assert_allclose(out[1:] / out[:-1] - 1.0, held_change, rtol=0, atol=1e-12)


@pytest.mark.parametrize("k", [1, 2])
def test_difference_adjustment_keeps_held_contract_absolute_changes(k):
    raw = _wide(contract_prices()).to_numpy()
    names = list(EXPIRIES["contract"])
    col = np.array([names.index(c) for c in _held(k)])
    t = np.arange(1, len(DATES))
    held_change = raw[t, col[t]] - raw[t - 1, col[t]]
    out = _roll(adjust="difference")[f"ulsd_m{k}"].to_numpy()
    # reference: definition of a back-adjusted series (difference: absolute change of the held
    # contract on every day, rolls included)
    np.testing.assert_allclose(np.diff(out), held_change, rtol=0, atol=1e-12)


@pytest.mark.parametrize("adjust", ["ratio", "difference", "none"])
def test_rows_since_last_roll_are_real_current_prices(adjust):
    raw = _wide(contract_prices())
    out = _roll(adjust=adjust)
    since = DATES[DATES > ROLL_2]
    # reference: definition of a back-adjusted series (only history before a roll is changed)
    np.testing.assert_array_equal(out.loc[since, "ulsd_m1"], raw.loc[since, "ULSD-2026-04"])
    np.testing.assert_array_equal(out.loc[since, "ulsd_m2"], raw.loc[since, "ULSD-2026-05"])
    assert out["ulsd_m1"].iloc[-1] == raw["ULSD-2026-04"].iloc[-1]


def test_unadjusted_series_jumps_at_the_roll_adjusted_does_not():
    raw = _wide(contract_prices())
    none = _roll(adjust="none")["ulsd_m1"]
    ratio = _roll(adjust="ratio")["ulsd_m1"]
    after = pd.Timestamp("2026-01-29")
    held = raw.loc[after, "ULSD-2026-03"] - raw.loc[ROLL_1, "ULSD-2026-03"]
    # reference: definition of a back-adjusted series; the spliced one carries the month spread
    assert none[after] - none[ROLL_1] == pytest.approx(
        raw.loc[after, "ULSD-2026-03"] - raw.loc[ROLL_1, "ULSD-2026-02"])
    assert ratio[after] / ratio[ROLL_1] == pytest.approx(1.0 + held / raw.loc[ROLL_1,
                                                                               "ULSD-2026-03"])
    assert np.isfinite(ratio.to_numpy()).all()


def test_several_products_keep_common_dates():
    gas = pd.DataFrame({"contract": ["NG-A", "NG-B", "NG-C"],
                        "last_trade": ["2026-02-25", "2026-03-26", "2026-04-28"],
                        "product": ["natgas"] * 3})
    dates = DATES[1:]  # natgas starts a day later
    rows = [(d.strftime("%Y-%m-%d"), c, 3.0 + i + 0.01 * n)
            for i, c in enumerate(gas["contract"]) for n, d in enumerate(dates)]
    prices = pd.concat([contract_prices(), pd.DataFrame(rows, columns=["date", "contract",
                                                                        "price"])])
    out = roll_generic(prices, pd.concat([EXPIRIES, gas]), months={"ulsd": 1, "natgas": 1},
                       roll_days=2, adjust="difference")
    assert list(out.columns) == ["ulsd_m1", "natgas_m1"]
    assert out.index.equals(pd.DatetimeIndex(dates, name="date"))


# --------------------------------------------------------------------------- errors


def test_unknown_contract_names_row_and_column():
    prices = contract_prices()
    prices.loc[5, "contract"] = "ULSD-2027-01"
    err = _err(_roll, prices, prices_file="contracts.csv")
    assert err.file == "contracts.csv" and err.row == 7 and err.column == "contract"
    assert "'ULSD-2027-01' is not in the expiries file" in str(err)


def test_too_few_listed_contracts_names_date_and_product():
    err = _err(_roll, months={"ulsd": 3}, expiries_file="expiries.csv")
    # on 2026-02-26 only ULSD-2026-04 and -05 are not past their roll date
    assert err.file == "expiries.csv"
    assert "'ulsd'" in str(err) and "2026-02-26" in str(err) and "3 generic" in str(err)


@pytest.mark.parametrize("value, words", [("", "last_trade is missing"),
                                          ("30/01/2026", "cannot read date")])
def test_bad_last_trade_names_row_and_column(value, words):
    expiries = EXPIRIES.copy()
    expiries.loc[1, "last_trade"] = value
    err = _err(_roll, expiries=expiries, expiries_file="expiries.csv")
    assert (err.file, err.row, err.column) == ("expiries.csv", 3, "last_trade")
    assert words in str(err)


def test_duplicate_contract_in_expiries():
    expiries = pd.concat([EXPIRIES, EXPIRIES.iloc[[0]]], ignore_index=True)
    err = _err(_roll, expiries=expiries, expiries_file="expiries.csv")
    assert err.row == 6 and "listed twice (also row 2)" in str(err)


def test_unknown_adjust_and_negative_roll_days():
    assert _err(_roll, adjust="log").key == "data.roll.adjust"
    err = _err(_roll, roll_days=-1)
    assert err.key == "data.roll.roll_days" and "-1" in str(err)


def test_missing_price_of_needed_contract_names_date():
    prices = contract_prices()
    drop = (prices["contract"] == "ULSD-2026-03") & (prices["date"] == "2026-01-28")
    err = _err(_roll, prices.loc[~drop], months={"ulsd": 1}, prices_file="contracts.csv")
    assert err.file == "contracts.csv"
    assert "'ULSD-2026-03' on 2026-01-28" in str(err) and "at the roll" in str(err)


def test_ratio_needs_positive_prices():
    prices = contract_prices()
    prices.loc[3, "price"] = -0.5
    err = _err(_roll, prices, prices_file="contracts.csv")
    assert err.row == 5 and "adjust = 'difference'" in str(err)
    assert np.isfinite(_roll(prices, adjust="difference").to_numpy()).all()


# --------------------------------------------------------------------------- through a book

@pytest.mark.parametrize("adjust", ["ratio", "difference"])
def test_book_with_contracts_format_loads_generic_columns(tmp_path, adjust):
    book = load_book(write_rolled_book(tmp_path, adjust))
    assert book.data.roll.adjust == adjust and book.data.roll.roll_days == 2
    panel = load_prices(book)
    assert list(panel.prices.columns) == ["rack_diesel", "ulsd_m1", "ulsd_m2"]
    assert panel.dropped_rows == 0 and len(panel.prices) == len(DATES)
    direct = _roll(adjust=adjust)
    # reference: roll_generic on the same contract table (the book path adds only file reading)
    np.testing.assert_allclose(panel.prices[["ulsd_m1", "ulsd_m2"]].to_numpy(),
                               direct.to_numpy(), rtol=1e-12)
    # file rows point at the held contract's line: last date, month 1 = ULSD-2026-04
    row = int(panel.file_rows["ulsd_m1"].iloc[-1])
    line = (tmp_path / "contracts.csv").read_text().splitlines()[row - 1]
    assert line.startswith("2026-03-06,ULSD-2026-04,")


def test_book_contract_errors_name_the_files(tmp_path):
    path = write_rolled_book(tmp_path)
    text = (tmp_path / "contracts.csv").read_text().replace("ULSD-2026-03", "ULSD-2026-13", 1)
    (tmp_path / "contracts.csv").write_text(text)
    err = _err(load_prices, load_book(path))
    assert err.file == str(tmp_path / "contracts.csv") and err.column == "contract"
    assert err.row is not None and "'ULSD-2026-13'" in str(err)


def test_book_roll_table_checks(tmp_path):
    path = write_rolled_book(tmp_path)
    text = path.read_text()
    path.write_text(text.replace('format = "contracts"\n', ""))
    assert _err(load_book, path).key == "data.roll"
    path.write_text(text.replace('[data.roll]\nexpiries = "expiries.csv"\nroll_days = 2\n'
                                 'adjust = "ratio"\n', ""))
    err = _err(load_book, path)
    assert err.key == "data.roll" and "needs a [data.roll]" in str(err)
    path.write_text(text.replace("roll_days = 2", "roll_days = -3"))
    assert _err(load_book, path).key == "data.roll.roll_days"
    path.write_text(text.replace('adjust = "ratio"', 'adjust = "log"'))
    assert _err(load_book, path).key == "data.roll.adjust"
