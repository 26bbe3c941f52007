"""Hedge-effectiveness evidence: regression test and dollar-offset ratio."""

from __future__ import annotations

import math

import numpy as np
import pytest
import statsmodels.api as sm

from basiswise.data_adapters.errors import InputError
from basiswise.optimizer.backtest.effectiveness import (
    DOLLAR_OFFSET_BAND,
    EVIDENCE_NOTE,
    MIN_R2,
    SLOPE_BAND,
    assess,
    default_groups,
    dollar_offset,
    effectiveness_by_group,
    regression_test,
)

from bw_testkit import book_dict, make_book


def _pnl(seed: int, n: int = 60, noise: float = 0.3):
    rng = np.random.default_rng(seed)
    x = rng.normal(0.0, 1000.0, n)
    y = -0.95 * x + rng.normal(0.0, noise * 1000.0, n)
    return x, y


def test_regression_matches_statsmodels_ols():
    x, y = _pnl(1)
    slope, intercept, r2 = regression_test(x, y)
    fit = sm.OLS(y, sm.add_constant(x)).fit()
    # source: statsmodels OLS (reference library), params and rsquared
    assert slope == pytest.approx(fit.params[1], rel=1e-10)
    assert intercept == pytest.approx(fit.params[0], rel=1e-8, abs=1e-8)
    assert r2 == pytest.approx(fit.rsquared, rel=1e-10)


def test_r2_equals_variance_reduction_of_the_ols_hedge():
    # source: Ederington (1979), J. Finance 34(1), hedging effectiveness of the minimum-variance
    # hedge equals the R² of the regression of spot on futures changes (from memory)
    rng = np.random.default_rng(5)
    f = rng.normal(0.0, 1.0, 400)
    s = 0.8 * f + rng.normal(0.0, 0.5, 400)
    beta = np.cov(s, f)[0, 1] / np.var(f, ddof=1)
    hedge = -beta * f
    vr = 1.0 - np.var(s + hedge, ddof=1) / np.var(s, ddof=1)
    _, _, r2 = regression_test(s, hedge)
    assert r2 == pytest.approx(vr, rel=1e-10)


def test_perfect_offset_passes_both_tests():
    x, _ = _pnl(2)
    e = assess("g", x, -x)
    assert e.slope == pytest.approx(-1.0)
    assert e.r2 == pytest.approx(1.0)
    assert e.dollar_offset == pytest.approx(1.0)
    assert e.within_practice is True


def test_dollar_offset_band_edges():
    # common practice, no source: the 80-125 % band and R² >= 0.8 with a slope in [-1.25, -0.8]
    assert DOLLAR_OFFSET_BAND == (0.80, 1.25)
    assert MIN_R2 == 0.80 and SLOPE_BAND == (-1.25, -0.80)
    x = np.array([-40.0, -30.0, -30.0])            # exposure loses 100 in total
    assert dollar_offset(x, np.array([30.0, 30.0, 30.0])) == pytest.approx(0.9)
    inside = assess("in", x, np.array([35.0, 28.0, 27.0]))
    assert inside.offset_ok is True
    over = assess("over", x, np.array([50.0, 40.0, 40.0]))   # 130 % offset
    assert over.dollar_offset == pytest.approx(1.3)
    assert over.offset_ok is False and over.within_practice is False


def test_undefined_figures_are_none_not_nan():
    x = np.array([10.0, -10.0, 5.0, -5.0])        # cumulative exposure P&L is zero
    e = assess("flat", x, -x)
    assert e.dollar_offset is None and e.offset_ok is None and e.within_practice is None
    c = assess("const", np.full(5, 3.0), np.arange(5.0))   # exposure P&L does not vary
    assert c.slope is None and c.r2 is None
    for v in (e.slope, e.r2, c.dollar_offset):
        assert v is None or math.isfinite(v)


def test_bad_input_raises_input_error():
    with pytest.raises(InputError, match="3 periods"):
        regression_test([1.0, 2.0], [1.0, 2.0])
    with pytest.raises(InputError, match="not finite"):
        dollar_offset([1.0, np.nan, 2.0], [1.0, 2.0, 3.0])
    with pytest.raises(InputError, match="exposure P&Ls"):
        assess("g", [1.0, 2.0, 3.0], [1.0, 2.0])


def _book(tmp_path):
    data = book_dict(
        "prices.csv", {"a": "USD/gal", "b": "USD/gal", "fa": "USD/gal", "fb": "USD/gal"},
        exposures=[{"id": "ea", "series": "a", "quantity": -1.0, "unit": "gal", "proxy": "FA1"},
                   {"id": "eb", "series": "b", "quantity": -1.0, "unit": "gal", "proxy": "FB"}],
        instruments=[{"id": "FA1", "series": "fa", "contract_size": 1.0, "unit": "gal"},
                     {"id": "FA2", "series": "fa", "contract_size": 1.0, "unit": "gal"},
                     {"id": "FB", "series": "fb", "contract_size": 1.0, "unit": "gal"}],
        group_limit=[{"id": "fa-all", "instruments": ["FA1", "FA2"], "limit": 10.0}],
    )
    return make_book(tmp_path, data)


def test_groups_follow_proxy_and_group_limits(tmp_path):
    book = _book(tmp_path)
    groups = default_groups(book)
    assert groups[0] == ("whole book", [0, 1], [0, 1, 2])
    assert ("fa-all", [0], [0, 1]) in groups and ("FB", [1], [2]) in groups
    rng = np.random.default_rng(3)
    X = rng.normal(size=(30, 2))
    Y = np.column_stack([-0.5 * X[:, 0], -0.5 * X[:, 0], -X[:, 1]])
    res = {e.group: e for e in effectiveness_by_group(book, X, Y)}
    assert res["fa-all"].slope == pytest.approx(-1.0)
    assert res["FB"].dollar_offset == pytest.approx(1.0)
    assert res["whole book"].instruments == ("FA1", "FA2", "FB")
    with pytest.raises(InputError, match="line up"):
        effectiveness_by_group(book, X, Y[:5])
    assert "auditor" in EVIDENCE_NOTE and "accounting standard" in EVIDENCE_NOTE
