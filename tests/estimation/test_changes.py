"""Tests for optimizer.estimation.changes: horizon changes and their dollar covariance."""

from __future__ import annotations

import dataclasses

import numpy as np
import pandas as pd
import pytest

from basiswise.data_adapters.errors import InputError
from basiswise.optimizer.estimation.changes import (
    CHANGE_KINDS,
    SAMPLINGS,
    dollar_covariance,
    horizon_changes,
)


def _frame(values: dict[str, list[float]]) -> pd.DataFrame:
    n = len(next(iter(values.values())))
    return pd.DataFrame(values, index=pd.bdate_range("2024-01-01", periods=n))


@pytest.fixture
def small() -> pd.DataFrame:
    # 7 rows; A doubles-ish, B steps by 1 so absolute changes are easy to read by hand
    return _frame(
        {
            "A": [10.0, 11.0, 12.0, 15.0, 14.0, 16.0, 20.0],
            "B": [1.0, 2.0, 3.0, 4.0, 5.0, 6.0, 7.0],
        }
    )


def test_overlapping_counts_and_values(small):
    ch = horizon_changes(small, horizon_days=2, kind="absolute", sampling="overlapping")
    # source: definition of an h-period change P[t+h] - P[t] over every start t, T = n - h
    # (Hull, Options, Futures, and Other Derivatives, ch. 3 (from memory))
    assert ch.values.shape == (5, 2)
    np.testing.assert_allclose(ch.values[:, 0], [2.0, 4.0, 2.0, 1.0, 6.0])
    np.testing.assert_allclose(ch.values[:, 1], [2.0, 2.0, 2.0, 2.0, 2.0])
    assert list(ch.end_dates) == list(small.index[2:])
    assert ch.scale == 1.0
    assert ch.values.flags["C_CONTIGUOUS"] and ch.values.dtype == np.float64
    np.testing.assert_allclose(ch.last_prices, [20.0, 7.0])
    assert ch.columns == ["A", "B"]


def test_non_overlapping_anchored_on_last_row(small):
    ch = horizon_changes(small, horizon_days=2, kind="absolute", sampling="non-overlapping")
    # common practice, no source: windows ending on the last row, stepping back by h:
    # rows 4->6, 2->4, 0->2, reported oldest first
    np.testing.assert_allclose(ch.values[:, 0], [12.0 - 10.0, 14.0 - 12.0, 20.0 - 14.0])
    assert list(ch.end_dates) == [small.index[2], small.index[4], small.index[6]]
    assert ch.values.shape[0] == (len(small) - 1) // 2


def test_non_overlapping_leaves_oldest_rows_unused():
    prices = _frame({"A": [1.0, 2.0, 4.0, 8.0, 16.0, 32.0, 64.0, 128.0]})
    ch = horizon_changes(prices, horizon_days=2, kind="relative", sampling="non-overlapping")
    # common practice, no source: 8 rows, h = 2 -> windows 5->7, 3->5, 1->3; row 0 is unused.
    # The price doubles daily so every 2-day relative change is 4 - 1 = 3
    assert ch.values.shape == (3, 1)
    np.testing.assert_allclose(ch.values[:, 0], 3.0)
    assert ch.end_dates[0] == prices.index[3]


def test_relative_and_log(small):
    rel = horizon_changes(small, horizon_days=1, kind="relative", sampling="overlapping")
    log = horizon_changes(small, horizon_days=1, kind="log", sampling="overlapping")
    a = small["A"].to_numpy()
    # source: definitions r = P1/P0 - 1 and ln(P1/P0) = ln(1 + r) (Hull, ch. 15 (from memory))
    np.testing.assert_allclose(rel.values[:, 0], a[1:] / a[:-1] - 1.0)
    np.testing.assert_allclose(log.values, np.log1p(rel.values))
    # log changes add up over time: the 3-day log change equals the sum of daily log changes
    log3 = horizon_changes(small, horizon_days=3, kind="log", sampling="overlapping")
    daily = log.values
    summed = daily[:-2] + daily[1:-1] + daily[2:]
    np.testing.assert_allclose(log3.values, summed)


def test_scaled_sampling(small):
    ch = horizon_changes(small, horizon_days=5, kind="absolute", sampling="scaled")
    # common practice, no source (square-root-of-time rule): daily changes, covariance x h
    assert ch.values.shape == (6, 2)
    assert ch.scale == 5.0
    np.testing.assert_allclose(ch.values[:, 1], 1.0)
    assert ch.horizon_days == 5


def test_window_uses_most_recent_rows(small):
    ch = horizon_changes(small, horizon_days=1, kind="absolute", sampling="overlapping", window=4)
    # rows 3..6 of A are 15, 14, 16, 20
    np.testing.assert_allclose(ch.values[:, 0], [-1.0, 2.0, 4.0])
    assert ch.end_dates[0] == small.index[4]


def test_window_longer_than_history(small):
    with pytest.raises(InputError) as err:
        horizon_changes(small, horizon_days=1, kind="log", sampling="overlapping", window=50)
    assert err.value.key == "estimation.window"
    assert "50" in str(err.value) and "7" in str(err.value)


def test_too_few_observations(small):
    with pytest.raises(InputError) as err:
        horizon_changes(small, horizon_days=3, kind="log", sampling="non-overlapping")
    assert err.value.key == "book.horizon_days"
    with pytest.raises(InputError) as err:
        horizon_changes(small, horizon_days=5, kind="log", sampling="overlapping")
    assert err.value.key == "book.horizon_days"
    with pytest.raises(InputError) as err:
        horizon_changes(small, horizon_days=0, kind="log", sampling="overlapping")
    assert err.value.key == "book.horizon_days"


def test_unknown_kind_and_sampling(small):
    with pytest.raises(InputError) as err:
        horizon_changes(small, horizon_days=1, kind="pct", sampling="overlapping")
    for name in CHANGE_KINDS:
        assert name in str(err.value)
    with pytest.raises(InputError) as err:
        horizon_changes(small, horizon_days=1, kind="log", sampling="rolling")
    for name in SAMPLINGS:
        assert name in str(err.value)


def test_bad_prices_name_the_column(small):
    bad = small.copy()
    bad.iloc[3, 1] = np.nan
    with pytest.raises(InputError) as err:
        horizon_changes(bad, horizon_days=1, kind="absolute", sampling="overlapping")
    assert err.value.column == "B"
    assert str(small.index[3].date()) in str(err.value)
    neg = small.copy()
    neg.iloc[2, 0] = -1.0
    with pytest.raises(InputError) as err:
        horizon_changes(neg, horizon_days=1, kind="log", sampling="overlapping")
    assert err.value.column == "A"
    # absolute changes accept non-positive prices (spreads can go negative)
    ch = horizon_changes(neg, horizon_days=1, kind="absolute", sampling="overlapping")
    assert np.isfinite(ch.values).all()
    with pytest.raises(InputError) as err:
        horizon_changes(small.reset_index(drop=True), horizon_days=1, kind="log",
                        sampling="overlapping")
    assert err.value.key == "data.prices"
    unsorted = small.iloc[[0, 2, 1, 3, 4, 5, 6]]
    with pytest.raises(InputError):
        horizon_changes(unsorted, horizon_days=1, kind="absolute", sampling="overlapping")


def test_overlapping_autocorrelation_and_scaling():
    rng = np.random.default_rng(7)
    daily = rng.normal(0.0, 1.0, size=(20_000, 1))
    prices = pd.DataFrame(
        100.0 + np.vstack([[0.0], np.cumsum(daily, axis=0)]),
        index=pd.bdate_range("2000-01-03", periods=daily.shape[0] + 1),
        columns=["X"],
    )
    h = 4
    ov = horizon_changes(prices, horizon_days=h, kind="absolute", sampling="overlapping").values
    # source: Hansen & Hodrick (1980), JPE 88(5): overlapping h-period sums of iid terms have
    # lag-1 autocorrelation (h - 1)/h (from memory)
    lag1 = np.corrcoef(ov[:-1, 0], ov[1:, 0])[0, 1]
    assert abs(lag1 - (h - 1) / h) < 0.03
    no = horizon_changes(prices, horizon_days=h, kind="absolute", sampling="non-overlapping")
    lag1_no = np.corrcoef(no.values[:-1, 0], no.values[1:, 0])[0, 1]
    assert abs(lag1_no) < 0.05
    sc = horizon_changes(prices, horizon_days=h, kind="absolute", sampling="scaled")
    # source: RiskMetrics Technical Document 1996, ch. 3: variance of an h-day sum of iid daily
    # changes is h times the daily variance (from memory)
    assert abs(sc.scale * sc.values.var() / ov.var() - 1.0) < 0.05


def test_dollar_covariance():
    prices = _frame({"A": [50.0, 51.0, 49.0, 52.0, 50.0], "B": [2.0, 2.1, 2.2, 2.0, 2.5]})
    cov = np.array([[0.04, 0.01], [0.01, 0.09]])
    rel = horizon_changes(prices, horizon_days=1, kind="relative", sampling="scaled")
    rel = dataclasses.replace(rel, scale=3.0)
    # source: Anderson & Danthine (1981), JPE 89(6): price-move covariance D Σ D for
    # percentage changes at current prices D (from memory)
    d = np.diag([50.0, 2.5])
    np.testing.assert_allclose(dollar_covariance(cov, rel), 3.0 * d @ cov @ d)
    ab = horizon_changes(prices, horizon_days=2, kind="absolute", sampling="overlapping")
    np.testing.assert_allclose(dollar_covariance(cov, ab), cov)
    with pytest.raises(InputError):
        dollar_covariance(np.eye(3), ab)
