"""Small builders shared by tests: books as dicts and price files with known moments."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd

from basiswise.data_adapters.book import Book


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
