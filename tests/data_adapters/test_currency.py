"""Books in several currencies: conversion, the example book, checks against outside sources."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm

from basiswise.data_adapters.book import Book, load_book
from basiswise.data_adapters.errors import InputError
from basiswise.data_adapters.toml_file import read_toml
from basiswise.optimizer.pipeline import model_of, prepare, solve_book
from basiswise.scenarios import eur_plant_book_path

EUR_PLANT = eur_plant_book_path()


def _free_book(changes: str = "absolute") -> Book:
    """The example book without limits or margin budget, sample covariance."""
    data = read_toml(EUR_PLANT, "book file")
    data["estimation"] = {"window": 500, "changes": changes, "estimator": "sample",
                          "sampling": "overlapping"}
    for ins in data["instrument"]:
        for key in ("position_limit", "adv"):
            ins.pop(key, None)
    data.pop("group_limit")
    data.pop("constraints")
    return Book.from_dict(data, EUR_PLANT.parent, "book.toml")


def test_book_currency_pnl_regression_gives_the_continuous_hedge():
    """Continuous hedge = minus the OLS slopes of book-currency P&L on futures P&L per contract.

    The P&Ls are built here from the raw prices: the exposures' EUR value date by date
    (USD prices divided by the USD-per-EUR rate of each date), each future's P&L per contract
    in its own currency converted at the last date's rate.
    """
    book = _free_book()
    report = solve_book(book, "continuous")
    raw = pd.read_csv(EUR_PLANT.parent / "prices.csv", index_col="date").iloc[-500:]
    eur_per_usd = 1.0 / raw["usd_per_eur"]
    value = (-60_000 * raw["hub_gas"] - 8_000 * raw["feed_naphtha"] * eur_per_usd).to_numpy()
    today = float(eur_per_usd.iloc[-1])
    per_contract = np.column_stack([
        720 * raw["gas_m1"],
        1000 * raw["crude_m1"] * today,
        100 * raw["gasoil_m1"] * today,
        125_000 * raw["usd_per_eur"] * today,
    ])
    h = 20
    y = value[h:] - value[:-h]
    x = per_contract[h:] - per_contract[:-h]
    fit = sm.OLS(y, sm.add_constant(x)).fit()
    targets = np.array([i.target for i in report.instruments])
    # source: statsmodels OLS; minimum-variance hedge = OLS slope (Ederington 1979, eq. 7)
    np.testing.assert_allclose(targets, -fit.params[1:], rtol=1e-6)
    # source: Ederington 1979 — hedging effectiveness = R² of that regression
    assert report.variance_reduction == pytest.approx(fit.rsquared, rel=1e-6)


def _receivable_book(tmp_path, currency: str, rate_unit: str, rate: np.ndarray,
                     price_unit: str, price: float, quantity: float) -> Book:
    dates = pd.bdate_range("2024-01-01", periods=len(rate))
    pd.DataFrame({"date": dates.strftime("%Y-%m-%d"), "fixed": price, "fx": rate}).to_csv(
        tmp_path / "p.csv", index=False)
    data = {
        "book": {"name": "receivable", "currency": currency, "horizon_days": 5},
        "data": {"prices": "p.csv"},
        "estimation": {"window": 400, "changes": "relative", "estimator": "sample"},
        "series": {"fixed": {"unit": price_unit}, "fx": {"unit": rate_unit}},
        "exposure": [{"id": "invoice", "series": "fixed", "quantity": quantity, "unit": "t"}],
        "instrument": [{"id": "EUR-FUT", "series": "fx", "contract_size": 125_000.0,
                        "unit": "EUR"}],
    }
    return Book.from_dict(data, tmp_path, "book.toml")


def _rate_path(seed: int, n: int = 400, start: float = 1.10) -> np.ndarray:
    rng = np.random.default_rng(seed)
    return start * np.exp(np.cumsum(rng.normal(0.0, 0.005, n)))


def test_hand_example_receivable_in_euros_sold_forward_with_eight_contracts(tmp_path):
    """A US firm due to receive EUR 1,000,000 sells EUR futures of 125,000 EUR each.

    The receivable is a foreign exposure (2,000 t at a fixed 500 EUR/t), converted to USD with
    the USD-per-EUR rate; the future's price is that rate, so the hedge is perfect.
    """
    book = _receivable_book(tmp_path, "USD", "USD/EUR", _rate_path(1), "EUR/t", 500.0, 2000.0)
    report = solve_book(book, "exact")
    # source: Hull, Options, Futures, and Other Derivatives, ch. 5 (currency futures: CME
    # euro contract 125,000 EUR; a EUR 1 million receivable is hedged by shorting 8) (from memory)
    assert report.instruments[0].target == -8
    assert report.variance_reduction == pytest.approx(1.0, abs=1e-9)


def test_hand_example_from_the_euro_side_with_the_inverse_quote(tmp_path):
    """A EUR firm owing USD 1,100,000 (USD/EUR 1.10 today), rate quoted in USD per EUR."""
    rate = _rate_path(2)
    rate *= 1.10 / rate[-1]
    book = _receivable_book(tmp_path, "EUR", "USD/EUR", rate, "USD/t", 550.0, -2000.0)
    cont = solve_book(book, "continuous")
    # owing dollars gains in EUR when the euro rises, as a long euro future does: sell 8 euro
    # futures (buy the dollars forward), EUR 1,000,000 / 125,000 at today's rate
    # source: Hull, Options, Futures, and Other Derivatives, ch. 5 (a payable in a foreign
    # currency is hedged by a long position in that currency's futures; hedge ratio 1 on the
    # exposure's value) (from memory)
    assert cont.instruments[0].target == pytest.approx(-8.0, rel=0.02)
    assert solve_book(book, "exact").instruments[0].target == -8


def test_history_cut_at_a_date_uses_that_dates_rate():
    prep = prepare(EUR_PLANT)
    day = prep.panel.prices.index[-200]
    raw = pd.read_csv(EUR_PLANT.parent / "prices.csv", index_col="date", parse_dates=True)
    cut = prepare(EUR_PLANT, prices=raw.loc[:day])
    a, b = model_of(prep, as_of=day), model_of(cut)
    np.testing.assert_allclose(a.prices, b.prices, rtol=1e-12)
    np.testing.assert_allclose(a.cov, b.cov, rtol=1e-9)
    usd = 1.0 / raw.loc[day, "usd_per_eur"]
    assert a.prices[a.series.index("crude_m1")] == pytest.approx(raw.loc[day, "crude_m1"] * usd)


def test_margin_in_usd_is_converted_at_todays_rate():
    prep = prepare(EUR_PLANT)
    raw = pd.read_csv(EUR_PLANT.parent / "prices.csv", index_col="date")
    fx = prep.book.instrument("EUR-FX-F1")
    assert fx.margin == pytest.approx(3000.0 / raw["usd_per_eur"].iloc[-1])
    assert prep.book.instrument("GAS-F1").margin == 4500.0
    assert any("converted to EUR" in n for n in prep.notes)


def test_series_used_by_exposure_and_future_gets_a_futures_column(tmp_path):
    rng = np.random.default_rng(3)
    n = 300
    dates = pd.bdate_range("2024-01-01", periods=n)
    crude = 70 * np.exp(np.cumsum(rng.normal(0, 0.02, n)))
    fx = 1.1 * np.exp(np.cumsum(rng.normal(0, 0.005, n)))
    pd.DataFrame({"date": dates, "crude": crude, "usd_per_eur": fx}).to_csv(
        tmp_path / "p.csv", index=False)
    data = {
        "book": {"name": "b", "currency": "EUR", "horizon_days": 5},
        "data": {"prices": "p.csv"},
        "estimation": {"window": 250, "changes": "relative", "estimator": "sample"},
        "series": {"crude": {"unit": "USD/bbl"}, "usd_per_eur": {"unit": "USD/EUR"}},
        "exposure": [{"id": "cargo", "series": "crude", "quantity": -50_000.0, "unit": "bbl"}],
        "instrument": [{"id": "CL", "series": "crude", "contract_size": 1000.0, "unit": "bbl"},
                       {"id": "FX", "series": "usd_per_eur", "contract_size": 125_000.0,
                        "unit": "EUR"}],
    }
    prep = prepare(Book.from_dict(data, tmp_path, "book.toml"))
    assert list(prep.panel.prices.columns) == ["crude", "crude@futures", "usd_per_eur"]
    assert prep.book.instrument("CL").series == "crude@futures"
    report = solve_book(Book.from_dict(data, tmp_path, "book.toml"), "continuous")
    cl, fxf = (i.target for i in report.instruments)
    # 50,000 bbl bought in USD: long 50 crude contracts, and the dollars bought forward by
    # selling about the cargo's EUR value in euro futures
    # common practice, no source
    assert cl == pytest.approx(50.0, rel=0.05)
    value_eur = 50_000 * crude[-1] / fx[-1]
    assert fxf == pytest.approx(-value_eur / 125_000, rel=0.15)


def _book_data(**changes):
    data = read_toml(EUR_PLANT, "book file")
    for path, value in changes.items():
        *head, last = path.split("__")
        node = data
        for k in head:
            node = node[k]
        if value == "first three":
            node[last] = node[last][:3]
        elif value is None:
            node.pop(last)
        else:
            node[last] = value
    return data


@pytest.mark.parametrize("changes, key, words", [
    ({"fx": None, "series__usd_per_eur": None, "instrument": "first three"},
     "series.feed_naphtha.unit", "no exchange-rate series for USD is declared"),
    ({"fx__USD": "crude_m1"}, "fx.USD", "a rate for USD in a EUR book"),
    ({"fx__USD": "nope"}, "fx.USD", "not declared"),
    ({"fx__EUR": "usd_per_eur"}, "fx.EUR", "book currency"),
    ({"fx": None, "series__eur_per_usd": {"unit": "EUR/USD"}}, "fx.USD", "several"),
])
def test_bad_currency_setups_name_the_key(changes, key, words):
    with pytest.raises(InputError) as info:
        Book.from_dict(_book_data(**changes), EUR_PLANT.parent, "book.toml")
    assert info.value.key == key and words in str(info.value), str(info.value)


def test_amount_currency_without_a_rate_is_refused():
    data = _book_data()
    data["instrument"][0]["amount_currency"] = "GBP"
    with pytest.raises(InputError) as info:
        Book.from_dict(data, EUR_PLANT.parent, "book.toml")
    assert info.value.key == "instrument 'GAS-F1'.amount_currency"


def test_rate_of_zero_is_refused_with_its_row(tmp_path):
    text = (EUR_PLANT.parent / "prices.csv").read_text().splitlines()
    cells = text[10].split(",")
    cells[-1] = "0"
    text[10] = ",".join(cells)
    (tmp_path / "prices.csv").write_text("\n".join(text) + "\n")
    (tmp_path / "book.toml").write_text(EUR_PLANT.read_text())
    with pytest.raises(InputError) as info:
        prepare(load_book(tmp_path / "book.toml"))
    assert info.value.row == 11 and info.value.column == "usd_per_eur"
    assert "exchange rate must be positive" in str(info.value)


def test_direct_and_inverse_rate_quotes_give_the_same_hedge(tmp_path):
    """EUR per USD or USD per EUR: the same rates written either way, the same hedge."""
    raw = pd.read_csv(EUR_PLANT.parent / "prices.csv")
    raw["eur_per_usd"] = 1.0 / raw.pop("usd_per_eur")
    raw.to_csv(tmp_path / "prices.csv", index=False, float_format="%.17g")
    data = read_toml(EUR_PLANT, "book file")
    data["series"]["eur_per_usd"] = {"unit": "EUR/USD"}
    del data["series"]["usd_per_eur"]
    data["fx"] = {"USD": "eur_per_usd"}
    data["instrument"].pop()  # the euro future lives on the USD-per-EUR quote
    direct = solve_book(Book.from_dict(data, tmp_path, "book.toml"), "continuous")
    base = read_toml(EUR_PLANT, "book file")
    base["instrument"].pop()
    inverse = solve_book(Book.from_dict(base, EUR_PLANT.parent, "book.toml"), "continuous")
    np.testing.assert_allclose([i.target for i in direct.instruments],
                               [i.target for i in inverse.instruments], rtol=1e-6)
    assert direct.hedged_std == pytest.approx(inverse.hedged_std, rel=1e-6)


def test_backtest_realises_pnl_in_the_book_currency():
    """Exposures: change of the EUR value; futures: each day's USD P&L at that day's rate."""
    from basiswise.optimizer.backtest.engine import run_backtest

    res = run_backtest(EUR_PLANT, step=100, strategies=["joint-continuous"])
    raw = pd.read_csv(EUR_PLANT.parent / "prices.csv", index_col="date", parse_dates=True)
    r = 1.0 / raw["usd_per_eur"]
    value = -60_000 * raw["hub_gas"] - 8_000 * raw["feed_naphtha"] * r
    want = value.loc[res.horizon_end].to_numpy() - value.loc[res.dates].to_numpy()
    np.testing.assert_allclose(res.exposure_horizon.sum(axis=1), want, rtol=1e-9)
    run = res.runs[0]
    daily = {"GAS-F1": 720 * raw["gas_m1"].diff(),
             "CRUDE-F1": 1000 * raw["crude_m1"].diff() * r,
             "GASOIL-F1": 100 * raw["gasoil_m1"].diff() * r,
             "EUR-FX-F1": 125_000 * raw["usd_per_eur"].diff() * r}
    for j, ins in enumerate(daily):
        cum = daily[ins].fillna(0.0).cumsum()
        per = cum.loc[res.horizon_end].to_numpy() - cum.loc[res.dates].to_numpy()
        np.testing.assert_allclose(run.horizon_leg[:, j], run.targets[:, j] * per, rtol=1e-9,
                                   atol=1e-6)
    with pytest.raises(InputError, match="prepare"):
        run_backtest(EUR_PLANT, step=100, strategies=["unhedged"], prices=raw)


def test_rate_series_absent_from_the_prices_is_named(tmp_path):
    raw = pd.read_csv(EUR_PLANT.parent / "prices.csv").drop(columns="usd_per_eur")
    raw.to_csv(tmp_path / "prices.csv", index=False)
    (tmp_path / "book.toml").write_text(EUR_PLANT.read_text())
    with pytest.raises(InputError) as info:
        prepare(tmp_path / "book.toml")
    assert info.value.column == "usd_per_eur" and "missing series" in str(info.value)
