"""The two-currency example book runs through solve, sweep, backtest and report."""

from __future__ import annotations

import json
import shutil

import pandas as pd
import pytest
from typer.testing import CliRunner

from basiswise.cli.app import app
from basiswise.scenarios import eur_plant_book_path
from basiswise.scenarios.generate_fx_demo import generate_prices

runner = CliRunner()


@pytest.fixture(scope="module")
def fx_book(tmp_path_factory):
    folder = tmp_path_factory.mktemp("eur_plant")
    for name in ("book.toml", "prices.csv", "scenarios.toml"):
        shutil.copyfile(eur_plant_book_path().parent / name, folder / name)
    return folder / "book.toml"


def test_committed_prices_are_the_generators():
    committed = pd.read_csv(eur_plant_book_path().parent / "prices.csv", index_col="date",
                            parse_dates=True)
    pd.testing.assert_frame_equal(committed, generate_prices(), check_freq=False,
                                  check_index_type=False, atol=1e-9)


def test_solve_json_is_in_euros_and_sells_euro_futures(fx_book, tmp_path):
    trades = tmp_path / "trades.csv"
    res = runner.invoke(app, ["solve", str(fx_book), "--json", "--trades", str(trades)])
    assert res.exit_code == 0, res.output
    out = json.loads(res.output)
    assert out["currency"] == "EUR" and out["status"] == "certified"
    sides = {i["id"]: i["side"] for i in out["instruments"]}
    assert sides["EUR-FX-F1"] == "SELL" and sides["GAS-F1"] == "BUY"
    assert "trade_notional_EUR" in pd.read_csv(trades).columns


def test_sweep_runs_and_the_currency_future_matters(fx_book):
    res = runner.invoke(app, ["sweep", str(fx_book), str(fx_book.parent / "scenarios.toml"),
                              "--json"])
    assert res.exit_code == 0, res.output
    out = json.loads(res.output)
    rows = {r["name"]: r for r in out["scenarios"]}
    assert rows["no-currency-future"]["hedged_std"] > rows["base"]["hedged_std"]
    # the euro falls 8 %: the dollar feedstock costs 1/0.92 − 1 more in euros, and each short
    # euro future gains 8 % of 125,000 EUR
    raw = pd.read_csv(fx_book.parent / "prices.csv")
    feed_eur = 8_000 * raw["feed_naphtha"].iloc[-1] / raw["usd_per_eur"].iloc[-1]
    stress = rows["euro-falls"]["stress"]
    assert stress["unhedged"] == pytest.approx(-feed_eur * (1 / 0.92 - 1), rel=1e-9)
    fx = rows["euro-falls"]["contracts"]["EUR-FX-F1"]
    assert fx < 0 and stress["futures"] == pytest.approx(fx * 125_000 * -0.08, rel=1e-9)


def test_backtest_runs_in_euros(fx_book):
    res = runner.invoke(app, ["backtest", str(fx_book), "--every", "60", "--strategies",
                              "unhedged,joint-whole", "--estimators", "ledoit-wolf", "--json"])
    assert res.exit_code == 0, res.output
    out = json.loads(res.output)
    assert out["currency"] == "EUR"


def test_report_names_the_conversion(fx_book, tmp_path):
    md = tmp_path / "r.md"
    res = runner.invoke(app, ["report", str(fx_book), "--out", str(md)])
    assert res.exit_code == 0, res.output
    text = md.read_text()
    assert "EUR-FX-F1" in text and "converted to EUR" in text
