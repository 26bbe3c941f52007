"""Checks of the demo scenario: the seeded price generator and the committed demo book."""

from __future__ import annotations

import tomllib

import numpy as np
import pandas as pd
import pytest

from basiswise.data_adapters.errors import InputError
from basiswise.scenarios import demo_book_path
from basiswise.scenarios import generate_demo as gd

DEMO = demo_book_path().parent


@pytest.fixture(scope="module")
def prices() -> pd.DataFrame:
    return gd.generate_prices()


@pytest.fixture(scope="module")
def book() -> dict:
    with demo_book_path().open("rb") as fh:
        return tomllib.load(fh)


def _normal_days(frame: pd.DataFrame) -> pd.DataFrame:
    """Daily log changes on days whose volatility multiplier is 1 (outside both regimes)."""
    mult = gd.regime_multiplier(len(frame))
    logret = np.log(frame).diff()
    return logret[(mult == 1.0) & (np.roll(mult, 1) == 1.0)].iloc[1:]


# --- the generator -------------------------------------------------------------------------


def test_same_seed_same_frame_other_seed_other_frame(prices):
    pd.testing.assert_frame_equal(gd.generate_prices(), prices)
    other = gd.generate_prices(seed=gd.DEFAULT_SEED + 1)
    assert not np.allclose(other.to_numpy(), prices.to_numpy())


def test_shape_index_and_columns(prices):
    assert prices.shape == (2600, 20)
    assert list(prices.columns) == list(gd.series_units())
    assert prices.index.name == "date"
    assert prices.index[0] == pd.Timestamp("2016-01-04")
    assert prices.index.is_monotonic_increasing and prices.index.is_unique
    assert (prices.index.day_of_week < 5).all()  # business days only


def test_prices_positive_finite_and_six_decimals(prices):
    values = prices.to_numpy()
    assert np.isfinite(values).all()
    assert (values > 0).all()
    np.testing.assert_array_equal(values, np.round(values, 6))


def test_levels_in_invented_but_plausible_ranges(prices):
    # self-check of invented demo data, no outside source
    medians = prices.median()
    assert 60 < medians["crude_m1"] < 90
    assert 2.0 < medians["ulsd_m1"] < 3.0
    assert 2.0 < medians["gasoline_m1"] < 2.8
    assert 2.0 < medians["natgas_m1"] < 6.0
    assert 0.7 < medians["propane_m1"] < 1.3


@pytest.mark.parametrize(
    ("column", "target"),
    [("crude_m1", 0.020), ("ulsd_m1", 0.019), ("natgas_m1", 0.035), ("propane_m1", 0.022)],
)
def test_daily_vol_near_target_in_normal_regime(prices, column, target):
    # self-check of invented demo data, no outside source
    realized = _normal_days(prices)[column].std()
    assert 0.85 * target < realized < 1.15 * target


def test_calm_and_turbulent_regimes_differ(prices):
    # self-check of invented demo data, no outside source
    logret = np.log(prices["crude_m1"]).diff()
    mult = gd.regime_multiplier(len(prices))
    calm = logret[mult == 0.6].std()
    wild = logret[mult == 1.7].std()
    assert wild / calm > 2.0


def test_contract_months_highly_correlated(prices):
    # self-check of invented demo data, no outside source
    corr = _normal_days(prices).corr()
    for family in ("crude", "ulsd", "natgas"):
        for month in (2, 3):
            rho = corr.loc[f"{family}_m1", f"{family}_m{month}"]
            assert 0.95 <= rho <= 0.99, (family, month, rho)


def test_regional_series_carry_basis_risk(prices):
    # self-check of invented demo data, no outside source
    moves = (prices.shift(-20) / prices - 1.0).dropna()
    for regional, futures in (("rack_diesel_m1", "ulsd_m1"), ("hub_gas_m1", "natgas_m1")):
        rho = moves[regional].corr(moves[futures])
        assert 0.9 < rho < 0.995, (regional, rho)


def test_rack_basis_mean_reverts_like_an_ar1(prices):
    # source: Vasicek (1977), J. Financial Economics 5, discrete OU = AR(1) with slope 1 - kappa
    # (from memory); OLS slope from statsmodels; band is a self-check of invented data
    sm = pytest.importorskip("statsmodels.api")
    basis = (prices["rack_diesel_m1"] - prices["ulsd_m1"]).to_numpy()
    fit = sm.OLS(basis[1:], sm.add_constant(basis[:-1])).fit()
    slope = fit.params[1]
    assert 0.95 < slope < 1.0
    assert abs(fit.params[0] / (1.0 - slope) - 0.06) < 0.05  # long-run mean near 0.06 USD/gal


def test_too_few_days_is_an_input_error():
    with pytest.raises(InputError, match="days"):
        gd.generate_prices(days=1)


# --- the written files ---------------------------------------------------------------------


def test_write_demo_is_byte_deterministic_and_matches_committed_files(tmp_path):
    first = gd.write_demo(tmp_path / "a")
    second = gd.main([str(tmp_path / "b")])
    assert second == 0
    for name in ("book.toml", "prices.csv"):
        produced = (first.parent / name).read_bytes()
        assert produced == (tmp_path / "b" / name).read_bytes()
        assert produced == (DEMO / name).read_bytes(), f"regenerate scenarios/demo/{name}"


def test_committed_csv_reads_back_as_the_generated_frame(prices):
    frame = pd.read_csv(DEMO / "prices.csv", index_col="date", parse_dates=True)
    assert list(frame.columns) == list(prices.columns)
    np.testing.assert_allclose(frame.to_numpy(), prices.to_numpy(), rtol=0, atol=1e-9)


def test_book_names_only_existing_series_with_their_units(book, prices):
    units = gd.series_units()
    named = [e["series"] for e in book["exposure"]] + [i["series"] for i in book["instrument"]]
    assert set(named) <= set(prices.columns)
    assert set(named) == set(book["series"])
    for name, spec in book["series"].items():
        assert spec["unit"] == units[name]


def test_book_settings_as_specified(book):
    assert book["book"]["currency"] == "USD" and book["book"]["horizon_days"] == 20
    assert book["data"] == {"prices": "prices.csv", "format": "wide"}
    assert book["estimation"] == {
        "window": 500,
        "changes": "relative",
        "estimator": "ledoit-wolf",
        "ewma_lambda": 0.94,
        "sampling": "overlapping",
    }
    assert str(book["book"]["as_of"]) == "2025-12-19"  # the last generated business day
    assert book["constraints"]["hedge_only"] is False


def test_book_structure_signs_and_references(book):
    instruments = {i["id"]: i for i in book["instrument"]}
    assert len(instruments) == 11
    assert all(e["quantity"] < 0 for e in book["exposure"])  # the firm must buy everything
    assert all(e["proxy"] in instruments for e in book["exposure"])
    for group in book["group_limit"]:
        assert set(group["instruments"]) <= set(instruments)
    # every instrument sits in exactly one product-family group
    members = [m for g in book["group_limit"] for m in g["instruments"]]
    assert sorted(members) == sorted(instruments)
    for inst in instruments.values():
        assert ("position_limit" in inst) != ("min_position" in inst and "max_position" in inst)


def test_book_exercises_unit_conversion(book):
    # at least one exposure is stated in a unit other than its series' price denominator
    denominators = {name: spec["unit"].split("/")[1] for name, spec in book["series"].items()}
    assert any(e["unit"] != denominators[e["series"]] for e in book["exposure"])


def test_load_book_accepts_the_demo_book():
    load_book = pytest.importorskip("basiswise.data_adapters.book").load_book
    parsed = load_book(demo_book_path())
    assert len(parsed.exposures) == 9 and len(parsed.instruments) == 11
    assert parsed.prices_path.resolve() == (DEMO / "prices.csv").resolve()


def test_load_prices_accepts_the_demo_prices():
    load_book = pytest.importorskip("basiswise.data_adapters.book").load_book
    load_prices = pytest.importorskip("basiswise.data_adapters.prices").load_prices
    panel = load_prices(load_book(demo_book_path()))
    assert panel.prices.shape == (2600, 20)  # every generated series is used, no dropped date
    assert panel.dropped_rows == 0
