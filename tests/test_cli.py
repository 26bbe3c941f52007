"""The command line: the demo, the JSON contract, the trade list and bad input."""

from __future__ import annotations

import json
from pathlib import Path

import pandas as pd
import pytest
from typer.testing import CliRunner

from basiswise.cli.app import app

from bw_testkit import copy_demo

runner = CliRunner()


@pytest.fixture(scope="module")
def demo_folder(tmp_path_factory) -> Path:
    return copy_demo(tmp_path_factory.mktemp("demo")).parent


def test_demo_prints_tables_and_writes_trades(tmp_path):
    res = runner.invoke(app, ["demo", "--out", str(tmp_path / "d")])
    assert res.exit_code == 0, res.output
    for title in ("Hedge summary", "Futures positions", "Exposures", "Cautions"):
        assert title in res.output
    trades = pd.read_csv(tmp_path / "d" / "trades.csv")
    assert set(trades["side"]) <= {"BUY", "SELL"}
    assert (trades["contracts"] > 0).all()
    assert (trades["target"] - trades["current"]).abs().tolist() == trades["contracts"].tolist()


def test_solve_json_contract(demo_folder):
    res = runner.invoke(app, ["solve", str(demo_folder / "book.toml"), "--json"])
    assert res.exit_code == 0, res.output
    d = json.loads(res.stdout)
    for key in ("status", "method", "currency", "horizon_days", "unhedged_std", "hedged_std",
                "relaxed_hedged_std", "variance_reduction", "instruments"):
        assert key in d
    assert d["method"] == "exact" and d["currency"] == "USD" and d["horizon_days"] == 20
    assert d["relaxed_hedged_std"] <= d["hedged_std"] + 1e-6 < d["unhedged_std"]
    for i in d["instruments"]:
        assert {"id", "current", "target", "trade", "side"} <= set(i)
        assert float(i["target"]).is_integer()
        assert i["trade"] == i["target"] - i["current"]
        assert i["side"] == ("BUY" if i["trade"] > 0 else "SELL" if i["trade"] < 0 else "HOLD")
    assert "NaN" not in res.stdout


def test_methods_order(demo_folder):
    got = {}
    for m in ("exact", "round", "continuous"):
        res = runner.invoke(app, ["solve", str(demo_folder / "book.toml"), "--json", "-m", m])
        assert res.exit_code == 0, res.output
        got[m] = json.loads(res.stdout)["hedged_std"]
    assert got["continuous"] <= got["exact"] + 1e-6 <= got["round"] + 2e-6


def _edit(path: Path, old: str, new: str) -> None:
    text = path.read_text()
    assert old in text, old
    path.write_text(text.replace(old, new, 1))


def _edit_prices(path: Path, fn) -> None:
    df = pd.read_csv(path, dtype=str)
    df = fn(df)
    df.to_csv(path, index=False)


def _set(row: int, col: str, value):
    def edit(df):
        df.loc[row, col] = value(df) if callable(value) else value
        return df
    return edit


BAD_BOOKS = [
    # (description, edit on book text (old, new), words expected in the message)
    ("missing prices file", ('prices = "prices.csv"', 'prices = "nowhere.csv"'), ["nowhere.csv"]),
    ("unknown estimator", ('estimator = "ledoit-wolf"', 'estimator = "magic"'),
     ["estimator", "ledoit-wolf", "oas"]),
    ("window too long", ("window = 500", "window = 90000"), ["window"]),
    ("zero contract size", ("contract_size = 1000", "contract_size = 0"), ["contract_size"]),
    ("undeclared series", ('series = "rack_diesel_m1"', 'series = "rack_diesel_m9"'),
     ["rack_diesel_m9"]),
    ("incompatible units", ('unit = "bbl"', 'unit = "t"'), ["unit", "t"]),
]


@pytest.mark.parametrize("what,edit,words", BAD_BOOKS, ids=[b[0] for b in BAD_BOOKS])
def test_bad_book_gives_one_message_and_no_file(demo_folder, tmp_path, what, edit, words):
    book = copy_demo(tmp_path)
    _edit(book, *edit)
    out = tmp_path / "trades.csv"
    res = runner.invoke(app, ["solve", str(book), "--trades", str(out)])
    assert res.exit_code == 2, res.output
    assert not out.exists()
    msg = res.stderr.strip()
    assert msg.startswith("error:") and len(msg.splitlines()) <= 3
    for w in words:
        assert w in msg


def test_min_above_max(demo_folder, tmp_path):
    book = copy_demo(tmp_path)
    text = book.read_text()
    start = text.index("\nposition_limit") + 1
    end = text.index("\n", start)
    book.write_text(text[:start] + "min_position = 5\nmax_position = 2" + text[end:])
    res = runner.invoke(app, ["solve", str(book), "--trades", str(tmp_path / "t.csv")])
    assert res.exit_code == 2 and "min_position" in res.stderr
    assert not (tmp_path / "t.csv").exists()


PRICE_EDITS = [
    ("missing series column", lambda df: df.drop(columns=["ulsd_m2"]), ["ulsd_m2"]),
    # data row 2590 is file row 2592 (header = row 1)
    ("non-positive price", _set(2590, "natgas_m1", "-1.0"), ["natgas_m1", "row 2592"]),
    ("duplicate dates", _set(2591, "date", lambda df: df.loc[2590, "date"]), ["duplicate"]),
    ("unparseable date", _set(2595, "date", "31/02/2025x"), ["row 2597", "date"]),
    ("gap beyond tolerance", lambda df: df.drop(index=range(2000, 2030)), ["gap"]),
]


@pytest.mark.parametrize("what,fn,words", PRICE_EDITS, ids=[p[0] for p in PRICE_EDITS])
def test_bad_prices_give_one_message_and_no_file(demo_folder, tmp_path, what, fn, words):
    book = copy_demo(tmp_path)
    _edit_prices(tmp_path / "prices.csv", fn)
    out = tmp_path / "trades.csv"
    res = runner.invoke(app, ["solve", str(book), "--trades", str(out)])
    assert res.exit_code == 2, res.output
    assert not out.exists()
    assert "prices.csv" in res.stderr
    for w in words:
        assert w in res.stderr


def test_check_command(demo_folder):
    res = runner.invoke(app, ["check", str(demo_folder / "book.toml")])
    assert res.exit_code == 0, res.output
    assert "is valid" in res.output


def test_unknown_method_is_rejected(demo_folder):
    res = runner.invoke(app, ["solve", str(demo_folder / "book.toml"), "-m", "guess"])
    assert res.exit_code == 2 and "exact" in res.stderr


def test_report_writes_markdown_with_cautions(demo_folder, tmp_path):
    out = tmp_path / "hedge.md"
    res = runner.invoke(app, ["report", str(demo_folder / "book.toml"), "--out", str(out)])
    assert res.exit_code == 0, res.output
    text = out.read_text()
    assert "## Futures positions" in text and "## Cautions" in text and "nan" not in text.lower()
