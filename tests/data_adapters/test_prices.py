"""Price files into aligned panels (CSV wide/long, Parquet), their errors, and atomic output."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from basiswise.data_adapters.book import load_book
from basiswise.data_adapters.errors import InputError
from basiswise.data_adapters.output import atomic_path, write_csv_atomic, write_text_atomic
from basiswise.data_adapters.prices import check_positive, load_prices, read_prices

SERIES = ["rack_diesel", "ulsd_m1", "crude_m1"]


def write_wide(frame: pd.DataFrame, path):
    frame.to_csv(path, date_format="%Y-%m-%d")
    return path


def write_lines(path, lines):
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


def to_long(frame: pd.DataFrame) -> pd.DataFrame:
    return frame.reset_index().melt(id_vars="date", var_name="series", value_name="price")


def same(panel_prices: pd.DataFrame, frame: pd.DataFrame):
    pd.testing.assert_frame_equal(panel_prices, frame, check_freq=False, check_names=False)


def test_wide_csv_round_trip(tmp_path, adapters_prices_frame):
    path = write_wide(adapters_prices_frame, tmp_path / "p.csv")
    panel = read_prices(path, series=SERIES)
    same(panel.prices, adapters_prices_frame)
    assert panel.dropped_rows == 0
    assert panel.first_date == pd.Timestamp("2025-01-06")
    assert panel.last_date == adapters_prices_frame.index[-1]
    assert panel.source == path
    assert isinstance(panel.prices.index, pd.DatetimeIndex)
    assert panel.prices.index.is_monotonic_increasing and panel.prices.index.is_unique


def test_only_needed_series_in_given_order(tmp_path, adapters_prices_frame):
    path = write_wide(adapters_prices_frame, tmp_path / "p.csv")
    panel = read_prices(path, series=["crude_m1", "rack_diesel"])
    assert list(panel.prices.columns) == ["crude_m1", "rack_diesel"]
    same(panel.prices, adapters_prices_frame[["crude_m1", "rack_diesel"]])


def test_long_csv_round_trip(tmp_path, adapters_prices_frame):
    path = tmp_path / "p.csv"
    long = to_long(adapters_prices_frame).sample(frac=1.0, random_state=3)  # shuffled rows
    long.to_csv(path, index=False, date_format="%Y-%m-%d")
    panel = read_prices(path, format="long", series=SERIES)
    same(panel.prices, adapters_prices_frame)


def test_long_csv_custom_columns(tmp_path, adapters_prices_frame):
    path = tmp_path / "p.csv"
    long = to_long(adapters_prices_frame).rename(
        columns={"date": "day", "series": "code", "price": "settle"}
    )
    long.to_csv(path, index=False, date_format="%Y-%m-%d")
    panel = read_prices(path, format="long", series=SERIES, date_column="day",
                        series_column="code", price_column="settle")
    same(panel.prices, adapters_prices_frame)


def test_parquet_round_trips(tmp_path, adapters_prices_frame):
    wide = tmp_path / "w.parquet"
    adapters_prices_frame.reset_index().to_parquet(wide)
    same(read_prices(wide, series=SERIES).prices, adapters_prices_frame)
    long = tmp_path / "l.parquet"
    to_long(adapters_prices_frame).to_parquet(long)
    same(read_prices(long, format="long", series=SERIES).prices, adapters_prices_frame)


def test_parquet_with_date_index(tmp_path, adapters_prices_frame):
    path = tmp_path / "i.parquet"
    adapters_prices_frame.to_parquet(path)  # date kept as the index
    same(read_prices(path, series=SERIES).prices, adapters_prices_frame)


def test_parquet_date_objects(tmp_path, adapters_prices_frame):
    frame = adapters_prices_frame.reset_index()
    frame["date"] = frame["date"].dt.date  # stored as date32
    path = tmp_path / "d.parquet"
    frame.to_parquet(path)
    same(read_prices(path, series=SERIES).prices, adapters_prices_frame)


def test_alignment_counts_dropped_rows(tmp_path):
    path = write_lines(tmp_path / "p.csv", [
        "date,a,b,unused",
        "2025-01-06,1.0,2.0,x",
        "2025-01-07,,2.1,x",      # a missing
        "2025-01-08,1.2,NA,x",    # b missing (marker)
        "2025-01-09,1.3,2.3,",
        "2025-01-10,1.4, 2.4 ,x",
    ])
    panel = read_prices(path, series=["a", "b"])
    assert panel.dropped_rows == 2
    assert list(panel.prices.index.strftime("%Y-%m-%d")) == [
        "2025-01-06", "2025-01-09", "2025-01-10"
    ]
    assert panel.prices.loc["2025-01-10", "b"] == 2.4
    assert np.isfinite(panel.prices.to_numpy()).all()
    # a column not asked for may be empty or hold text
    assert list(panel.prices.columns) == ["a", "b"]


def test_unsorted_file_is_sorted(tmp_path):
    path = write_lines(tmp_path / "p.csv", ["date,a", "2025-01-08,3", "2025-01-06,1",
                                            "2025-01-07,2"])
    panel = read_prices(path, series=["a"])
    assert panel.prices["a"].tolist() == [1.0, 2.0, 3.0]


def test_long_alignment_counts_dates(tmp_path):
    path = write_lines(tmp_path / "p.csv", [
        "date,series,price",
        "2025-01-06,a,1", "2025-01-06,b,2",
        "2025-01-07,a,1.1",                     # b missing that day
        "2025-01-08,a,1.2", "2025-01-08,b,2.2",
        "2025-01-08,c,oops",                    # another series, not needed: ignored
    ])
    panel = read_prices(path, format="long", series=["a", "b"])
    assert panel.dropped_rows == 1
    assert len(panel.prices) == 2


def err_of(fn, *a, **k) -> InputError:
    with pytest.raises(InputError) as info:
        fn(*a, **k)
    assert "\n" not in str(info.value)
    return info.value


def test_missing_file(tmp_path):
    err = err_of(read_prices, tmp_path / "none.csv", series=["a"])
    assert "none.csv" in str(err) and "not found" in str(err)


def test_unsupported_suffix(tmp_path):
    err = err_of(read_prices, write_lines(tmp_path / "p.txt", ["date,a"]), series=["a"])
    assert ".csv" in str(err) and ".parquet" in str(err)


def test_xlsx_round_trip(tmp_path, adapters_prices_frame):
    path = tmp_path / "p.xlsx"
    adapters_prices_frame.reset_index().to_excel(path, index=False, engine="openpyxl")
    panel = read_prices(path, series=SERIES)
    same(panel.prices, adapters_prices_frame)


def test_sqlite_wide_and_long_round_trip(tmp_path, adapters_prices_frame):
    import sqlite3

    path = tmp_path / "p.sqlite"
    with sqlite3.connect(path) as con:
        wide = adapters_prices_frame.reset_index()
        wide["date"] = wide["date"].dt.strftime("%Y-%m-%d")
        wide.to_sql("closes", con, index=False)
        long = to_long(adapters_prices_frame)
        long["date"] = long["date"].dt.strftime("%Y-%m-%d")
        long.to_sql("ticks", con, index=False)
    same(read_prices(path, series=SERIES, table="closes").prices, adapters_prices_frame)
    same(read_prices(path, series=SERIES, table="ticks", format="long").prices,
         adapters_prices_frame)
    err = err_of(read_prices, path, series=SERIES, table="nope")
    assert "nope" in str(err) and "closes" in str(err) and err.key == "data.table"


def test_missing_series_columns_listed(tmp_path, adapters_prices_frame):
    path = write_wide(adapters_prices_frame, tmp_path / "p.csv")
    err = err_of(read_prices, path, series=["rack_diesel", "jet", "naphtha"])
    assert "'jet', 'naphtha'" in str(err) and "crude_m1" in str(err)
    assert err.column == "jet"


def test_missing_date_column(tmp_path):
    err = err_of(read_prices, write_lines(tmp_path / "p.csv", ["day,a", "2025-01-06,1"]),
                 series=["a"])
    assert err.column == "date"


def test_unparseable_date_names_row(tmp_path):
    path = write_lines(tmp_path / "p.csv", ["date,a", "2025-01-06,1", "2025-01-07,1",
                                            "07/01/2025,1"])
    err = err_of(read_prices, path, series=["a"])
    assert err.row == 4 and err.column == "date"
    assert str(err).startswith(f"{path}, row 4, column 'date': ")


def test_duplicate_dates_name_rows(tmp_path):
    path = write_lines(tmp_path / "p.csv", ["date,a", "2025-01-06,1", "2025-01-07,1",
                                            "2025-01-06,2"])
    err = err_of(read_prices, path, series=["a"])
    assert "2025-01-06" in str(err) and "rows 2, 4" in str(err)


def test_long_duplicates_name_rows(tmp_path):
    path = write_lines(tmp_path / "p.csv", ["date,series,price", "2025-01-06,a,1",
                                            "2025-01-06,b,1", "2025-01-06,a,1"])
    err = err_of(read_prices, path, format="long", series=["a", "b"])
    assert "rows 2, 4" in str(err) and "'a'" in str(err)


def test_non_numeric_price_names_row_and_column(tmp_path):
    path = write_lines(tmp_path / "p.csv", ["date,a,b", "2025-01-06,1,2", "2025-01-07,1,2",
                                            "2025-01-08,1,1;5"])
    err = err_of(read_prices, path, series=["a", "b"])
    assert (err.row, err.column) == (4, "b")
    assert "'1;5'" in str(err)


def test_infinite_price_is_an_error(tmp_path):
    path = write_lines(tmp_path / "p.csv", ["date,a", "2025-01-06,1", "2025-01-07,inf"])
    assert err_of(read_prices, path, series=["a"]).row == 3


def test_long_non_numeric_names_file_row(tmp_path):
    path = write_lines(tmp_path / "p.csv", ["date,series,price", "2025-01-06,c,9",
                                            "2025-01-06,a,1", "2025-01-07,c,9",
                                            "2025-01-07,a,x"])
    err = err_of(read_prices, path, format="long", series=["a"])
    assert (err.row, err.column) == (5, "price")


def test_long_missing_series_value(tmp_path):
    path = write_lines(tmp_path / "p.csv", ["date,series,price", "2025-01-06,a,1"])
    err = err_of(read_prices, path, format="long", series=["a", "b"])
    assert "'b'" in str(err) and err.column == "series"


def test_long_missing_columns(tmp_path):
    path = write_lines(tmp_path / "p.csv", ["date,name,price", "2025-01-06,a,1"])
    err = err_of(read_prices, path, format="long", series=["a"])
    assert err.column == "series"


def test_gap_names_both_dates(tmp_path):
    path = write_lines(tmp_path / "p.csv", ["date,a,b", "2025-01-06,1,2", "2025-01-07,1,",
                                            "2025-01-14,1,2", "2025-01-15,1,2"])
    err = err_of(read_prices, path, series=["a", "b"], max_gap_days=7)
    assert "2025-01-06" in str(err) and "2025-01-14" in str(err) and "8 calendar days" in str(err)
    assert read_prices(path, series=["a", "b"], max_gap_days=8).dropped_rows == 1


def test_empty_after_alignment(tmp_path):
    path = write_lines(tmp_path / "p.csv", ["date,a,b", "2025-01-06,1,", "2025-01-07,,2"])
    err = err_of(read_prices, path, series=["a", "b"])
    assert "no date has a price for every series" in str(err) and "a: 1" in str(err)


def test_empty_file(tmp_path):
    path = tmp_path / "p.csv"
    path.write_text("")
    assert "empty" in str(err_of(read_prices, path, series=["a"]))


def test_check_positive_names_row_and_column(tmp_path):
    path = write_lines(tmp_path / "p.csv", ["date,a,b", "2025-01-06,1,2", "2025-01-07,1,",
                                            "2025-01-08,1,0", "2025-01-09,-1,2"])
    panel = read_prices(path, series=["a", "b"])
    check_positive(panel, ["a"][:0])  # nothing to check
    err = err_of(check_positive, panel, ["a", "b"])
    assert str(err).startswith(f"{path}, row 5, column 'a': price must be positive")
    err = err_of(check_positive, panel, ["b"])
    assert (err.row, err.column) == (4, "b")


def test_check_positive_long_format_rows(tmp_path):
    path = write_lines(tmp_path / "p.csv", ["date,series,price", "2025-01-06,a,1",
                                            "2025-01-07,a,-3"])
    panel = read_prices(path, format="long", series=["a"])
    assert err_of(check_positive, panel).row == 3


def test_load_prices_from_book(adapters_book_path, adapters_prices_frame):
    book = load_book(adapters_book_path)
    panel = load_prices(book)
    same(panel.prices, adapters_prices_frame[book.series_ids()])
    check_positive(panel, list(panel.prices.columns))


# --------------------------------------------------------------------------- atomic output


def test_atomic_write_replaces_only_on_success(tmp_path):
    target = tmp_path / "trades.csv"
    write_text_atomic("old\n", target)
    with pytest.raises(RuntimeError):
        with atomic_path(target) as tmp:
            tmp.write_text("half")
            raise RuntimeError("boom")
    assert target.read_text() == "old\n"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["trades.csv"]
    frame = pd.DataFrame({"id": ["A"], "trade": [3]})
    write_csv_atomic(frame, target)
    pd.testing.assert_frame_equal(pd.read_csv(target), frame)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["trades.csv"]


def test_atomic_write_missing_folder(tmp_path):
    err = err_of(write_text_atomic, "x", tmp_path / "no" / "out.txt")
    assert "does not exist" in str(err)


def test_blank_lines_keep_row_numbers(tmp_path):
    path = write_lines(tmp_path / "p.csv", ["date,a", "2025-01-06,1", "", "2025-01-07,1",
                                            "2025-01-08,x", ""])
    err = err_of(read_prices, path, series=["a"])
    assert (err.row, err.column) == (5, "a")
