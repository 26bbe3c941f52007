"""Shared fixtures. Each helper prefixes its fixtures (``adapters_`` for data_adapters)."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

ADAPTERS_BOOK_TEXT = """\
[book]
name = "Test fleet"
currency = "USD"
horizon_days = 5

[data]
prices = "prices.csv"

[estimation]
window = 40

[series.rack_diesel]
unit = "USD/gal"

[series.ulsd_m1]
unit = "USD/gal"

[series.crude_m1]
unit = "USD/bbl"

[[exposure]]
id = "fleet-diesel"
series = "rack_diesel"
quantity = -2000000.0
unit = "gal"
proxy = "ULSD-M1"

[[instrument]]
id = "ULSD-M1"
series = "ulsd_m1"
contract_size = 42000
unit = "gal"
position_limit = 100
adv = 5000
margin = 5000

[[instrument]]
id = "CRD-M1"
series = "crude_m1"
contract_size = 1000
unit = "bbl"
min_position = -50
max_position = 50

[[group_limit]]
id = "all-energy"
instruments = ["ULSD-M1", "CRD-M1"]
limit = 120

[constraints]
margin_budget = 1000000.0
"""


@pytest.fixture
def adapters_book_text() -> str:
    """A valid book (TOML text) over three invented series."""
    return ADAPTERS_BOOK_TEXT


@pytest.fixture
def adapters_prices_frame() -> pd.DataFrame:
    """Invented, seeded wide prices for the adapters book: 30 business days, three series."""
    rng = np.random.default_rng(7)
    dates = pd.bdate_range("2025-01-06", periods=30)
    steps = rng.normal(0.0, 0.01, size=(30, 3)).cumsum(axis=0)
    base = np.array([2.50, 2.40, 75.0])
    frame = pd.DataFrame(
        np.round(base * np.exp(steps), 4),
        index=pd.Index(dates, name="date"),
        columns=["rack_diesel", "ulsd_m1", "crude_m1"],
    )
    return frame


@pytest.fixture
def adapters_book_path(tmp_path, adapters_book_text, adapters_prices_frame):
    """``tmp_path/book.toml`` plus its ``prices.csv``; returns the book path."""
    adapters_prices_frame.to_csv(tmp_path / "prices.csv", date_format="%Y-%m-%d")
    path = tmp_path / "book.toml"
    path.write_text(adapters_book_text, encoding="utf-8")
    return path
