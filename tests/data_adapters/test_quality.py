"""Data-quality report and `basiswise check`: a clean book, a broken copy, calendars, rolls."""

from __future__ import annotations

import json
import shutil

import numpy as np
import pandas as pd
import pytest
from scipy.stats import median_abs_deviation
from typer.testing import CliRunner

from basiswise.cli.app import app
from basiswise.data_adapters.book import load_book
from basiswise.data_adapters.calendars import business_days
from basiswise.data_adapters.prices import load_prices
from basiswise.data_adapters.quality import _robust_z, quality_report
from basiswise.scenarios import demo_book_path, eur_plant_book_path

runner = CliRunner()
BOOK = eur_plant_book_path()


def _copy(tmp_path, edit=None):
    for name in ("book.toml", "prices.csv"):
        shutil.copyfile(BOOK.parent / name, tmp_path / name)
    if edit is not None:
        frame = edit(pd.read_csv(tmp_path / "prices.csv"))
        frame.to_csv(tmp_path / "prices.csv", index=False, float_format="%.4f")
    return tmp_path / "book.toml"


def _break(frame: pd.DataFrame) -> pd.DataFrame:
    frame.loc[100:109, "crude_m1"] = frame.loc[100, "crude_m1"]   # stale for 10 rows
    frame.loc[300, "hub_gas"] *= 1.8                              # one bad print
    frame.loc[420, "gasoil_m1"] = np.nan                          # one missing value
    return frame.drop(index=[601, 602, 603])                      # three business days gone


@pytest.mark.parametrize("book", [demo_book_path(), BOOK])
def test_check_on_a_shipped_book_prints_the_table_and_no_data_warning(book):
    res = runner.invoke(app, ["check", str(book)], env={"COLUMNS": "200"})
    assert res.exit_code == 0, res.output
    assert "Price data quality" in res.output and "is valid" in res.output
    assert "data warning" not in res.output


def test_check_strict_passes_the_example_and_fails_on_a_short_history_warning():
    res = runner.invoke(app, ["check", str(BOOK), "--strict"])
    assert res.exit_code == 0, res.output
    res = runner.invoke(app, ["check", str(demo_book_path()), "--strict"])
    assert res.exit_code == 2 and "--strict" in res.stderr  # the demo warns: 20 series, 24 moves


def test_check_json_on_the_example():
    res = runner.invoke(app, ["check", str(BOOK), "--json"])
    assert res.exit_code == 0, res.output
    out = json.loads(res.output)
    assert out["ok"] and out["valid"] and out["aligned_rows"] == 1500
    assert [s["series"] for s in out["series"]][-1] == "usd_per_eur"


def test_broken_copy_names_each_problem(tmp_path):
    book = _copy(tmp_path, _break)
    q = quality_report(load_book(book))
    kinds = {(p.series, p.kind) for p in q.problems}
    assert ("crude_m1", "stale") in kinds
    assert ("hub_gas", "jump") in kinds
    assert ("gasoil_m1", "missing") in kinds and ("hub_gas", "missing") in kinds
    jump = next(p for p in q.problems if p.kind == "jump")
    raw = pd.read_csv(BOOK.parent / "prices.csv")
    assert jump.date == raw.loc[300, "date"]
    stale = next(p for p in q.problems if p.kind == "stale")
    assert "10 rows" in stale.message and stale.date == raw.loc[100, "date"]
    row = {s.series: s for s in q.series}
    assert row["gasoil_m1"].missing == 4 and row["hub_gas"].missing == 3
    assert row["hub_gas"].unmatched == 1                     # the date gasoil has no price
    res = runner.invoke(app, ["check", str(book)], env={"COLUMNS": "200"})
    assert res.exit_code == 0, res.output
    for words in ("data warning: crude_m1: stale", "data warning: hub_gas: jump",
                  "data warning: gasoil_m1: missing"):
        assert words in res.output
    res = runner.invoke(app, ["check", str(book), "--strict"])
    assert res.exit_code == 2 and "--strict" in res.stderr


def test_a_gap_beyond_max_gap_days_is_shown_then_refused(tmp_path):
    book = _copy(tmp_path, lambda f: f.drop(index=range(700, 710)))
    res = runner.invoke(app, ["check", str(book)])
    assert res.exit_code == 2
    assert "Price data quality" in res.output and "gap" in res.output
    assert "max_gap_days" in res.stderr


def test_robust_z_matches_scipy():
    x = np.random.default_rng(5).standard_t(3, 400)
    # source: scipy.stats.median_abs_deviation(scale="normal") (MAD × 1.4826)
    want = np.abs(x - np.median(x)) / median_abs_deviation(x, scale="normal")
    np.testing.assert_allclose(_robust_z(x), want, rtol=1e-4)


def test_market_calendar_closes_on_exchange_holidays(tmp_path):
    text = BOOK.read_text().replace('format = "wide"', 'format = "wide"\ncalendar = "NYSE"')
    book_path = _copy(tmp_path)
    book_path.write_text(text)
    days = business_days(load_book(book_path), "2025-07-01", "2025-07-08")
    # source: NYSE holiday calendar, Independence Day 4 July 2025 (a Friday) (from memory)
    assert pd.Timestamp("2025-07-04") not in days and len(days) == 5
    q = quality_report(load_book(book_path))
    assert any(p.kind == "calendar" for p in q.problems)  # the invented data trades every weekday


ROLLED_BOOK = """\
[book]
name = "Rolled"
horizon_days = 2

[data]
prices = "contracts.csv"
format = "contracts"

[data.roll]
expiries = "expiries.csv"
roll_days = 2

[estimation]
window = 20

[series.ulsd_m1]
unit = "USD/gal"

[series.rack_diesel]
unit = "USD/gal"

[[exposure]]
id = "fleet"
series = "rack_diesel"
quantity = -500000.0
unit = "gal"

[[instrument]]
id = "ULSD-M1"
series = "ulsd_m1"
contract_size = 42000
unit = "gal"
"""


def _write_rolled_book(folder):
    """Invented contracts ULSD-2026-02..05 (last trades on month ends), a rack price beside."""
    expiries = pd.DataFrame({
        "contract": ["ULSD-2026-02", "ULSD-2026-03", "ULSD-2026-04", "ULSD-2026-05"],
        "last_trade": ["2026-01-30", "2026-02-27", "2026-03-31", "2026-04-30"],
        "product": ["ulsd"] * 4})
    dates = pd.bdate_range("2026-01-19", "2026-03-06")
    rng = np.random.default_rng(3)
    rows = [(d.strftime("%Y-%m-%d"), name, round(float(v), 4))
            for j, name in enumerate(expiries["contract"])
            for d, v in zip(dates, 2.5 + 0.15 * j + np.cumsum(rng.normal(0, 0.03, len(dates))),
                            strict=True)]
    rows += [(d.strftime("%Y-%m-%d"), "rack_diesel", round(2.6 + 0.01 * i, 4))
             for i, d in enumerate(dates)]
    pd.DataFrame(rows, columns=["date", "contract", "price"]).to_csv(folder / "contracts.csv",
                                                                     index=False)
    expiries.to_csv(folder / "expiries.csv", index=False)
    (folder / "book.toml").write_text(ROLLED_BOOK)
    return folder / "book.toml"


def test_holiday_file_moves_the_roll_and_check_counts_rolls(tmp_path):
    path = _write_rolled_book(tmp_path)
    base = load_prices(load_book(path))
    pd.DataFrame({"date": ["2026-01-29"]}).to_csv(tmp_path / "holidays.csv", index=False)
    text = path.read_text().replace('format = "contracts"',
                                    'format = "contracts"\nholidays = "holidays.csv"')
    path.write_text(text)
    moved = load_prices(load_book(path))
    # roll_days = 2 before Fri 2026-01-30 with Thu 29 closed: Tue 27, one day earlier
    # common practice, no source
    lines = (tmp_path / "contracts.csv").read_text().splitlines()
    on = moved.prices.index.get_loc(pd.Timestamp("2026-01-28"))
    assert "ULSD-2026-03" in lines[int(moved.file_rows["ulsd_m1"].iloc[on]) - 1]
    assert "ULSD-2026-02" in lines[int(base.file_rows["ulsd_m1"].iloc[on]) - 1]
    q = quality_report(load_book(path))
    rolls = {s.series: s.roll_gaps for s in q.series}
    assert rolls["ulsd_m1"] == 2 and rolls["rack_diesel"] is None


def test_check_reads_a_database_book(tmp_path):
    import sqlite3

    raw = pd.read_csv(BOOK.parent / "prices.csv")
    raw.loc[200:207, "gas_m1"] = raw.loc[200, "gas_m1"]
    with sqlite3.connect(tmp_path / "prices.db") as con:
        raw.melt(id_vars="date", var_name="series", value_name="price").to_sql("ticks", con)
    text = BOOK.read_text().replace('prices = "prices.csv"\nformat = "wide"',
                                    'url = "sqlite:///prices.db"\ntable = "ticks"\n'
                                    'format = "long"')
    (tmp_path / "book.toml").write_text(text)
    res = runner.invoke(app, ["check", str(tmp_path / "book.toml"), "--json"])
    assert res.exit_code == 0, res.output
    out = json.loads(res.output)
    assert out["valid"] and "ticks" in out["source"]
    assert [(p["series"], p["kind"]) for p in out["problems"]] == [("gas_m1", "stale")]
