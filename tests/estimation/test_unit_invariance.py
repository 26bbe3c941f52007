"""The hedge does not depend on the unit a series is quoted in, for every estimator and change kind.

Re-quoting crude from USD/bbl to USD/gal (prices divided by 42) or gas from USD/MMBtu to USD/GJ
(prices divided by 1.05505585262) changes nothing a desk trades on: the same contracts, the same
risk.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from basiswise.optimizer.estimation.changes import CHANGE_KINDS
from basiswise.optimizer.estimation.covariance import ESTIMATORS
from basiswise.optimizer.pipeline import solve_book

from bw_testkit import book_dict, make_book

# source: International Table Btu, 1 Btu_IT = 1055.05585262 J exactly (Fifth International
# Conference on the Properties of Steam, London 1956; NIST SP 811 App. B.9 rounds it) (from memory)
MMBTU_PER_GJ = 1.0 / 1.05505585262
GAL_PER_BBL = 42.0  # source: API MPMS / ASTM D1250, 1 bbl = 42 US gal (from memory)


def _prices(n: int = 320, seed: int = 3) -> pd.DataFrame:
    """Correlated random-walk prices: rack diesel, ULSD future, crude future, two gas months."""
    rng = np.random.default_rng(seed)
    common = rng.normal(0.0, 0.015, size=(n, 1))
    gas = rng.normal(0.0, 0.03, size=(n, 1))
    moves = np.hstack([
        common + rng.normal(0.0, 0.006, size=(n, 1)),  # rack diesel
        common + rng.normal(0.0, 0.004, size=(n, 1)),  # ULSD
        0.8 * common + rng.normal(0.0, 0.01, size=(n, 1)),  # crude
        gas + rng.normal(0.0, 0.01, size=(n, 1)),  # regional gas
        gas + rng.normal(0.0, 0.005, size=(n, 1)),  # gas future
    ])
    start = np.array([2.6, 2.5, 70.0, 3.2, 3.0])
    levels = start * np.exp(np.cumsum(moves, axis=0))
    dates = pd.date_range("2022-01-03", periods=n, freq="B")
    return pd.DataFrame(levels, index=dates, columns=["rack", "ulsd", "crude", "gas_hub", "gas"])


def _book(tmp_path, prices: pd.DataFrame, crude_unit: str, gas_unit: str, changes: str,
          estimator: str):
    frame = prices.copy()
    if crude_unit == "USD/gal":
        frame["crude"] = frame["crude"] / GAL_PER_BBL
    if gas_unit == "USD/GJ":
        frame["gas"] = frame["gas"] * MMBTU_PER_GJ
        frame["gas_hub"] = frame["gas_hub"] * MMBTU_PER_GJ
    folder = tmp_path / f"{crude_unit.replace('/', '_')}-{gas_unit.replace('/', '_')}"
    folder.mkdir(exist_ok=True)
    out = frame.copy()
    out.insert(0, "date", frame.index.strftime("%Y-%m-%d"))
    out.to_csv(folder / "prices.csv", index=False, float_format="%.17g")
    data = book_dict(
        "prices.csv",
        {"rack": "USD/gal", "ulsd": "USD/gal", "crude": crude_unit, "gas_hub": gas_unit,
         "gas": gas_unit},
        exposures=[
            {"id": "fleet diesel", "series": "rack", "quantity": -2_000_000.0, "unit": "gal"},
            {"id": "plant gas", "series": "gas_hub", "quantity": -400_000.0, "unit": "MMBtu"},
        ],
        instruments=[
            {"id": "ULSD", "series": "ulsd", "contract_size": 42_000.0, "unit": "gal",
             "position_limit": 200},
            {"id": "CRUDE", "series": "crude", "contract_size": 1_000.0, "unit": "bbl",
             "position_limit": 200},
            {"id": "GAS", "series": "gas", "contract_size": 10_000.0, "unit": "MMBtu",
             "position_limit": 200},
        ],
        book={"name": "unit check", "currency": "USD", "horizon_days": 5},
        estimation={"window": 300, "changes": changes, "estimator": estimator,
                    "sampling": "overlapping"},
    )
    return make_book(folder, data)


@pytest.mark.parametrize("changes", CHANGE_KINDS)
@pytest.mark.parametrize("estimator", ESTIMATORS)
def test_hedge_unchanged_when_a_series_is_requoted(tmp_path, estimator, changes):
    prices = _prices()
    base = _book(tmp_path, prices, "USD/bbl", "USD/MMBtu", changes, estimator)
    others = [_book(tmp_path, prices, "USD/gal", "USD/MMBtu", changes, estimator),
              _book(tmp_path, prices, "USD/bbl", "USD/GJ", changes, estimator)]
    ref_cont = solve_book(base, "continuous")
    ref_exact = solve_book(base, "exact")
    assert ref_exact.status == "certified"
    for book in others:
        cont = solve_book(book, "continuous")
        # the conic solver stops at its own tolerance: fractional targets agree to 1e-4 contracts
        np.testing.assert_allclose([i.target for i in cont.instruments],
                                   [i.target for i in ref_cont.instruments], rtol=0, atol=1e-4)
        assert cont.hedged_std == pytest.approx(ref_cont.hedged_std, rel=1e-6)
        assert cont.unhedged_std == pytest.approx(ref_cont.unhedged_std, rel=1e-9)
        exact = solve_book(book, "exact")
        assert [i.target for i in exact.instruments] == [i.target for i in ref_exact.instruments]
        assert exact.hedged_std == pytest.approx(ref_exact.hedged_std, rel=1e-9)
        if ref_cont.shrinkage is not None:
            assert cont.shrinkage == pytest.approx(ref_cont.shrinkage, rel=1e-9, abs=1e-12)
