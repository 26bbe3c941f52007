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
