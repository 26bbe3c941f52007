"""Mutated books, price files and scenario files: each gives one clean line and exit 2.

These are the mutation kinds that once ended in a traceback, a silent wrong answer or a very long
message, kept as regression cases. Every case also checks that no output file was written.
"""

from __future__ import annotations

import sqlite3
from pathlib import Path

import pytest
from rel_kit import (
    BOOK_TEXT,
    SCENARIO_TEXT,
    assert_one_clean_line,
    prices_frame,
    run_cli,
    write_book,
)


def _book(tmp_path: Path, old: str = "", new: str = "") -> Path:
    text = BOOK_TEXT.replace(old, new, 1) if old else BOOK_TEXT
    assert old == "" or text != BOOK_TEXT
    return write_book(tmp_path, text)


def _solve_fails(book: Path, names: str, *extra) -> str:
    out = book.parent / "trades.csv"
    line = assert_one_clean_line(run_cli(["solve", book, "--trades", out, *extra]), 2,
                                 names=names)
    assert not out.exists()
    assert [p.name for p in book.parent.iterdir() if p.name.endswith(".tmp")] == []
    return line


# ----------------------------------------------------------------------- numbers at the door

EDGE_NUMBERS = [
    ("contract_size = 42000", "contract_size = 1e300", "contract_size"),
    ("quantity = -2000000.0", "quantity = -1e300", "quantity"),
    ("adv = 5000", "adv = 5000\nexecution_days = 1e300", "execution_days"),
    ("adv = 5000", "adv = 1e300", "adv"),
    ("margin = 5000", "margin = 1e300", "margin"),
    ("position_limit = 100", "position_limit = 1e300", "position_limit"),
    ("position_limit = 100", "position_limit = 100\ncurrent = 99999999999999999", "current"),
    ("limit = 120", "limit = 1e300", "limit"),
    ("margin_budget = 1000000.0", "margin_budget = 1e300", "margin_budget"),
    ("horizon_days = 5", "horizon_days = 9223372036854775807", "horizon_days"),
    ("window = 60", "window = 9223372036854775807", "window"),
    ("quantity = -2000000.0", "quantity = nan", "quantity"),
    ("contract_size = 42000", "contract_size = inf", "contract_size"),
]


@pytest.mark.parametrize(("old", "new", "key"), EDGE_NUMBERS, ids=[c[1] for c in EDGE_NUMBERS])
def test_numbers_outside_their_plausible_range_are_refused(tmp_path, old, new, key):
    _solve_fails(_book(tmp_path, old, new), key)


def test_price_cells_near_the_float_limit_are_refused_with_row_and_column(tmp_path):
    frame = prices_frame()
    frame.iloc[5, 1] = 1e308
    book = write_book(tmp_path, frame=frame)
    line = _solve_fails(book, "row 7")
    assert "ulsd_m1" in line


def test_duplicate_price_column_is_refused_not_guessed(tmp_path):
    book = write_book(tmp_path)
    lines = (tmp_path / "prices.csv").read_text().splitlines()
    lines = [lines[0] + ",crude_m1"] + [ln + ",999" for ln in lines[1:]]
    (tmp_path / "prices.csv").write_text("\n".join(lines) + "\n")
    line = _solve_fails(book, "crude_m1")
    assert "twice" in line


def test_mixed_time_zones_in_dates_name_the_row(tmp_path):
    book = write_book(tmp_path)
    lines = (tmp_path / "prices.csv").read_text().splitlines()
    for i, zone in ((3, "T00:00:00+05:00"), (4, "T00:00:00Z")):
        date, rest = lines[i].split(",", 1)
        lines[i] = f"{date}{zone},{rest}"
    (tmp_path / "prices.csv").write_text("\n".join(lines) + "\n")
    _solve_fails(book, "row 4")


# ----------------------------------------------------------------------- files not what they say


def _with_prices(tmp_path: Path, name: str) -> Path:
    return _book(tmp_path, 'prices = "prices.csv"', f'prices = "{name}"')


@pytest.mark.parametrize("kind", ["empty", "csv-content", "truncated"])
def test_xlsx_that_is_not_a_workbook(tmp_path, kind):
    book = _with_prices(tmp_path, "prices.xlsx")
    target = tmp_path / "prices.xlsx"
    if kind == "empty":
        target.write_bytes(b"")
    elif kind == "csv-content":
        target.write_text((tmp_path / "prices.csv").read_text())
    else:
        prices_frame().to_excel(target)
        data = target.read_bytes()
        target.write_bytes(data[: len(data) // 2])
    _solve_fails(book, "prices.xlsx")


@pytest.mark.parametrize("kind", ["csv-content", "truncated", "empty"])
def test_sqlite_file_that_is_not_a_database(tmp_path, kind):
    book = _with_prices(tmp_path, "prices.sqlite")
    target = tmp_path / "prices.sqlite"
    if kind == "csv-content":
        target.write_text((tmp_path / "prices.csv").read_text())
    elif kind == "empty":
        target.write_bytes(b"")
    else:
        with sqlite3.connect(target) as con:
            prices_frame().reset_index().astype(str).to_sql("prices", con)
        con.close()
        data = target.read_bytes()
        target.write_bytes(data[: len(data) // 2])
    _solve_fails(book, "prices.sqlite")


def test_parquet_that_is_text(tmp_path):
    book = _with_prices(tmp_path, "prices.parquet")
    (tmp_path / "prices.parquet").write_text("date,a\n2025-01-01,1\n")
    _solve_fails(book, "prices.parquet")


def test_percent_and_question_mark_in_a_database_path_are_read(tmp_path):
    folder = tmp_path / "a%20b%?"
    folder.mkdir()
    frame = prices_frame()
    frame.index = frame.index.strftime("%Y-%m-%d")
    with sqlite3.connect(folder / "p.sqlite") as con:
        frame.reset_index().to_sql("prices", con)
    con.close()
    book = _with_prices(tmp_path, "a%20b%?/p.sqlite")
    result = run_cli(["solve", book, "--json"])
    assert result.exit_code == 0, result.output


@pytest.mark.parametrize("path", ["x" * 5000 + ".csv", "/".join(["y" * 200] * 30) + ".csv"],
                         ids=["long-name", "long-path"])
def test_very_long_paths(tmp_path, path):
    _solve_fails(_with_prices(tmp_path, path), "too long")


# ----------------------------------------------------------------------- structure and size


@pytest.mark.parametrize("text", ["a = " + "[" * 5000 + "]" * 5000,
                                  "a = " + "{b = " * 3000 + "1" + "}" * 3000,
                                  "a = " + "[" * 40 + "]" * 40],
                         ids=["arrays-5000", "tables-3000", "arrays-40"])
def test_deeply_nested_toml_is_refused(tmp_path, text):
    _solve_fails(write_book(tmp_path, text), "book.toml")


def test_a_ten_thousand_character_value_is_cut_in_the_message(tmp_path):
    book = _book(tmp_path, 'estimator = "ledoit-wolf"', 'estimator = "' + "x" * 10_000 + '"')
    line = _solve_fails(book, "estimation.estimator")
    assert "…" in line


def test_a_missing_series_among_hundreds_is_summarised(tmp_path):
    many = "".join(f'\n[series.s{i:03d}]\nunit = "USD/gal"\n' for i in range(300))
    extra = "".join(f'\n[[exposure]]\nid = "e{i:03d}"\nseries = "s{i:03d}"\nquantity = 1.0\n'
                    f'unit = "gal"\n' for i in range(300))
    book = write_book(tmp_path, BOOK_TEXT.replace("[constraints]", many + extra
                                                  + "\n[constraints]"))
    line = _solve_fails(book, "prices.csv")
    assert "more" in line


@pytest.mark.parametrize("bad", ['"CRD\\nM1"', '"CRD\\u001b[31m"', '"CRD\\tM1"'],
                         ids=["newline", "escape", "tab"])
def test_control_characters_in_ids_are_refused(tmp_path, bad):
    book = _book(tmp_path, 'id = "CRD-M1"', f"id = {bad}")
    _solve_fails(book, "control character")


# ----------------------------------------------------------------------- scenario files


SCENARIO_CASES = [
    ("adv_scale = 0.2", "adv_scale = 1e300", "adv_scale"),
    ("limit_scale = 0.5", "limit_scale = 1e300", "limit_scale"),
    ("limit_scale = 0.5", "margin_scale = 1e300", "margin_scale"),
    ("limit_scale = 0.5", "horizon_days = 9223372036854775807", "horizon_days"),
    ("limit_scale = 0.5", "shock_pct = { ulsd_m1 = 1e300 }", "shock_pct"),
    ("limit_scale = 0.5", 'instrument_limits = { "CRD-M1" = 1e300 }', "instrument_limits"),
    ('name = "thin"', 'name = "th\\nin"', "control character"),
    ("limit_scale = 0.5", "a = " + "[" * 3000 + "]" * 3000, "scenarios.toml"),
]


@pytest.mark.parametrize(("old", "new", "names"), SCENARIO_CASES,
                         ids=[c[2] for c in SCENARIO_CASES])
def test_bad_scenario_files(tmp_path, old, new, names):
    book = write_book(tmp_path)
    scen = tmp_path / "scenarios.toml"
    scen.write_text(SCENARIO_TEXT.replace(old, new, 1))
    out = tmp_path / "sweep.csv"
    result = run_cli(["sweep", book, scen, "--workers", "1", "--csv", out])
    assert_one_clean_line(result, 2, names=names)
    assert not out.exists()


@pytest.mark.parametrize("content", [b"", b"contract,last_trade\nX,2025-13-45\n"],
                         ids=["empty-xlsx", "csv-as-xlsx"])
def test_expiries_file_that_is_not_a_workbook(tmp_path, content):
    text = BOOK_TEXT.replace('prices = "prices.csv"',
                             'prices = "prices.csv"\nformat = "contracts"\n\n[data.roll]\n'
                             'expiries = "expiries.xlsx"')
    book = write_book(tmp_path, text)
    (tmp_path / "expiries.xlsx").write_bytes(content)
    _solve_fails(book, "expiries.xlsx")


@pytest.mark.parametrize("suffix", [".parquet", ".xlsx"])
def test_duplicate_column_in_parquet_and_excel(tmp_path, suffix):
    import pandas as pd

    book = _with_prices(tmp_path, f"prices{suffix}")
    frame = prices_frame().reset_index()
    frame["date"] = frame["date"].dt.strftime("%Y-%m-%d")
    frame.insert(3, "dup", frame["crude_m1"])
    frame.columns = [*frame.columns[:3], "crude_m1", *frame.columns[4:]]
    if suffix == ".parquet":
        import pyarrow as pa
        import pyarrow.parquet as pq

        pq.write_table(pa.Table.from_arrays([pa.array(frame.iloc[:, j])
                                             for j in range(frame.shape[1])],
                                            names=list(frame.columns)), tmp_path / "prices.parquet")
    else:
        pd.DataFrame(frame.to_numpy(), columns=list(frame.columns)).to_excel(
            tmp_path / "prices.xlsx", index=False)
    line = _solve_fails(book, "crude_m1")
    assert "twice" in line
