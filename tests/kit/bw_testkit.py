"""Builders shared by the tests: books as dicts, price files with known moments, a copy of the
demo book, random and curve-like whole-contract problems and exhaustive enumeration.

The one module of the test folder on ``sys.path`` (``pythonpath = ["tests/kit"]``); tests import
the library by its installed name, ``basiswise``.
"""

from __future__ import annotations

import itertools
import shutil
from collections.abc import Callable
from pathlib import Path

import numpy as np
import pandas as pd

from basiswise.data_adapters.book import Book
from basiswise.optimizer.problem.qp import HedgeQP
from basiswise.scenarios import demo_book_path

DEMO_FILES = ("book.toml", "prices.csv")


def changes_with_moments(cov: np.ndarray, n: int, seed: int = 0) -> np.ndarray:
    """``n`` rows whose sample covariance (ddof=1) is exactly ``cov`` and whose mean is zero."""
    rng = np.random.default_rng(seed)
    z = rng.standard_normal((n, cov.shape[0]))
    z -= z.mean(axis=0)
    # whiten to identity sample covariance, then colour with the Cholesky factor of cov
    s = np.cov(z, rowvar=False)
    z = z @ np.linalg.inv(np.linalg.cholesky(s)).T
    return z @ np.linalg.cholesky(cov).T


def write_wide(path: Path, changes: np.ndarray, columns: list[str], start: list[float],
               freq: str = "B") -> Path:
    """Write prices built by cumulating absolute ``changes`` from ``start`` as a wide CSV."""
    levels = np.vstack([start, np.asarray(start) + np.cumsum(changes, axis=0)])
    dates = pd.date_range("2020-01-01", periods=len(levels), freq=freq)
    frame = pd.DataFrame(levels, columns=columns)
    frame.insert(0, "date", dates.strftime("%Y-%m-%d"))
    frame.to_csv(path, index=False)
    return path


def book_dict(prices: str, series: dict[str, str], exposures: list[dict],
              instruments: list[dict], **sections) -> dict:
    """A book as the parsed TOML would give it."""
    d = {
        "book": {"name": "test book", "currency": "USD", "horizon_days": 1},
        "data": {"prices": prices, "format": "wide"},
        "estimation": {"window": 10_000, "changes": "absolute", "estimator": "sample",
                       "sampling": "overlapping"},
        "series": {k: {"unit": v} for k, v in series.items()},
        "exposure": exposures,
        "instrument": instruments,
    }
    for k, v in sections.items():
        if isinstance(v, dict) and isinstance(d.get(k), dict):
            d[k] = {**d[k], **v}
        else:
            d[k] = v
    return d


def make_book(folder: Path, data: dict) -> Book:
    return Book.from_dict(data, folder, "book.toml")


def copy_demo(folder: Path, names: tuple[str, ...] = DEMO_FILES) -> Path:
    """Copy the installed demo files ``names`` into ``folder``; returns the copied book's path."""
    src = demo_book_path().parent
    folder.mkdir(parents=True, exist_ok=True)
    for name in names:
        shutil.copyfile(src / name, folder / name)
    return folder / "book.toml"


def random_qp(rng: np.random.Generator) -> HedgeQP:
    """Small random book: correlated columns, small boxes, sometimes group rows / margin budget."""
    n = int(rng.integers(2, 6))
    k = n + int(rng.integers(-1, 3))  # k < n gives a singular A (more futures than series)
    base = rng.normal(size=(k, 1))
    M = (0.8 * base + rng.normal(size=(k, n))) * rng.uniform(0.1, 1.5)
    u = rng.normal(size=k)
    u /= np.linalg.norm(u)
    width = rng.integers(1, 4, size=n).astype(float)
    lo, hi = -width, width.copy()
    if rng.random() < 0.3:  # one-sided and shifted boxes
        lo[0], hi[0] = float(rng.integers(-1, 2)), float(rng.integers(2, 4))
    G, h = np.zeros((0, n)), np.zeros(0)
    if rng.random() < 0.4:  # a group limit on two or three instruments, both signs
        idx = rng.choice(n, size=min(n, int(rng.integers(2, 4))), replace=False)
        row = np.zeros(n)
        row[idx] = 1.0
        lim = float(rng.integers(0, 3))
        G, h = np.vstack([row, -row]), np.array([lim, lim])
    margin, budget = None, None
    if rng.random() < 0.4:
        margin = rng.integers(1, 4, size=n).astype(float)
        budget = float(rng.integers(0, 9))
    if rng.random() < 0.08:  # contradictory: x0 >= 2 but x0 <= 1
        lo[0], hi[0] = 2.0, 3.0
        G, h = np.vstack([G, np.eye(n)[0]]), np.append(h, 1.0)
    return HedgeQP(M=M, u=u, lo=lo, hi=hi, G=G, h=h, margin=margin, margin_budget=budget)


def curve_like_qp(rng: np.random.Generator, n: int = 16) -> HedgeQP:
    """Months that move almost together (level, slope, curvature factors), counts of a few."""
    k = n + 4
    t = np.linspace(0.0, 1.0, n)
    F = rng.normal(size=(k, 3))
    M = 0.3 * (np.outer(F[:, 0], np.ones(n)) + 0.3 * np.outer(F[:, 1], t - 0.5)
               + 0.2 * np.outer(F[:, 2], (t - 0.5) ** 2) + 0.03 * rng.normal(size=(k, n)))
    u = -M @ rng.uniform(-3, 3, size=n) + 0.02 * rng.normal(size=k)
    return HedgeQP(M=M, u=u, lo=np.full(n, -4.0), hi=np.full(n, 4.0))


def brute_force(qp: HedgeQP, value: Callable[[np.ndarray], float] | None = None):
    """Every integer point of ``qp``'s box that meets its limits, scored by ``value``.

    ``value`` defaults to the normalised objective ``‖M x + u‖²``; pass e.g. a model's
    ``variance`` to score in currency². Returns ``(best value, all minimisers)``, or
    ``(inf, [])`` when no point is feasible.
    """
    ranges = [range(int(a), int(b) + 1) for a, b in zip(qp.lo, qp.hi, strict=True)]
    pts = np.array(list(itertools.product(*ranges)), dtype=float)
    ok = np.array([qp.is_feasible(x) for x in pts], dtype=bool)
    if not ok.any():
        return np.inf, []
    pts = pts[ok]
    if value is None:
        r = pts @ qp.M.T + qp.u
        vals = np.einsum("ij,ij->i", r, r)
    else:
        vals = np.array([value(x) for x in pts])
    best = vals.min()
    return float(best), [pts[i] for i in np.flatnonzero(vals <= best + 1e-12)]


# --------------------------------------------------------------------------- backtest books

TWO_SPOT_SERIES = {"spot_a": "USD/gal", "spot_b": "USD/gal", "fut_a": "USD/gal", "fut_b": "USD/bbl"}



def two_spot_changes(n: int, seed: int) -> np.ndarray:
    """Daily moves of two spot series driven by two futures (USD/gal, USD/bbl)."""
    rng = np.random.default_rng(seed)
    f = rng.normal(0.0, [0.02, 0.8], size=(n, 2))          # futures moves (USD/gal, USD/bbl)
    sa = 0.9 * f[:, 0] + rng.normal(0.0, 0.006, n)
    sb = 0.6 * f[:, 0] + 0.01 * f[:, 1] + rng.normal(0.0, 0.008, n)
    return np.column_stack([sa, sb, f[:, 0], f[:, 1]])


# --------------------------------------------------------------------------- rolled books

# Invented product "ulsd" with four monthly contracts (all Fridays or weekdays).
EXPIRIES = pd.DataFrame({
    "contract": ["ULSD-2026-02", "ULSD-2026-03", "ULSD-2026-04", "ULSD-2026-05"],
    "last_trade": ["2026-01-30", "2026-02-27", "2026-03-31", "2026-04-30"],
    "product": ["ulsd", "ulsd", "ulsd", "ulsd"],
})
DATES = pd.bdate_range("2026-01-19", "2026-03-06")
# roll_days = 2 business days before last_trade: 2026-01-30 (Fri) -> Wed 2026-01-28;
# 2026-02-27 (Fri) -> Wed 2026-02-25. A contract is held through the close of its roll date.
# common practice, no source


def contract_prices(seed: int = 3) -> pd.DataFrame:
    """Long table of invented prices: each contract a random walk, later months dearer."""
    rng = np.random.default_rng(seed)
    rows = []
    for j, name in enumerate(EXPIRIES["contract"]):
        walk = 2.5 + 0.15 * j + np.cumsum(rng.normal(0.0, 0.03, len(DATES)))
        rows += [(d.strftime("%Y-%m-%d"), name, round(float(v), 4))
                 for d, v in zip(DATES, walk, strict=True)]
    return pd.DataFrame(rows, columns=["date", "contract", "price"])


ROLLED_BOOK = """\
[book]
name = "Rolled fleet"
horizon_days = 2

[data]
prices = "contracts.csv"
format = "contracts"

[data.roll]
expiries = "expiries.csv"
roll_days = 2
adjust = "{adjust}"

[series.ulsd_m1]
unit = "USD/gal"

[series.ulsd_m2]
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

[[instrument]]
id = "ULSD-M2"
series = "ulsd_m2"
contract_size = 42000
unit = "gal"
"""


def write_rolled_book(folder, adjust="ratio"):
    """A ``format = "contracts"`` book over ``contract_prices`` and a rack series; its path."""
    prices = contract_prices()
    rack = pd.DataFrame({"date": DATES.strftime("%Y-%m-%d"), "contract": "rack_diesel",
                         "price": np.linspace(2.6, 2.9, len(DATES))})
    pd.concat([prices, rack]).to_csv(folder / "contracts.csv", index=False)
    EXPIRIES.to_csv(folder / "expiries.csv", index=False)
    (folder / "book.toml").write_text(ROLLED_BOOK.format(adjust=adjust))
    return folder / "book.toml"
