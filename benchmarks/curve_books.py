"""Seeded generator of curve-structured hedge books (products × contract months), invented numbers.

Price moves over the horizon follow a factor model per product: a level, a slope and a curvature
factor over the months, plus a small month-specific noise, so that months of one product correlate
0.95–0.99 (adjacent months highest). Products share a common factor (cross-product correlation
about 0.3–0.6). Volatility falls with the month (near months move most). Exposures sit on their own
physical series: each is a blend of two neighbouring months of one product plus basis noise, so
every hedge is a cross hedge.

The problem is built directly in normalised units (:class:`optimizer.problem.qp.HedgeQP`): with the
series covariance ``Σ`` (futures first, then exposure series), exposure quantities ``e`` and
contract sizes on the futures series, ``Σ / v₀ = UᵀU`` (Cholesky, ``v₀ = eᵀΣe``), ``M = U Cᵀ`` and
``u = U e``.

Regimes: ``"small"`` scales exposures so that the median unconstrained hedge is 2 contracts per
instrument (limits ±3 to ±6); ``"large"`` so that it is 80 (limits 0.6–1.5 × the unconstrained
hedge, at least ±40, at most ±400). Both add one group limit
per product (all months combined) at 80 % of the product's unconstrained net hedge, so that group
rows bind.
"""

from __future__ import annotations

import numpy as np

from basiswise.optimizer.problem.qp import HedgeQP

__all__ = ["curve_book", "sizes_for"]


def _curve_cov(rng: np.random.Generator, products: int, months: int) -> np.ndarray:
    """Covariance of futures price moves, products × months, in price units²."""
    t = np.linspace(0.0, 1.0, months)
    load = np.stack([np.ones(months), t - 0.5, (t - 0.5) ** 2 - 1 / 12])  # level, slope, curve
    n = products * months
    B = np.zeros((n, 3 * products + 1))
    for p in range(products):
        rows = slice(p * months, (p + 1) * months)
        B[rows, 3 * p] = load[0] * rng.uniform(0.85, 0.95)
        B[rows, 3 * p + 1] = load[1] * rng.uniform(0.25, 0.45)
        B[rows, 3 * p + 2] = load[2] * rng.uniform(0.3, 0.6)
        B[rows, -1] = rng.uniform(0.25, 0.5)  # shared factor
    cov = B @ B.T + np.diag(rng.uniform(0.004, 0.01, n))
    vol = np.concatenate([np.linspace(1.0, 0.6, months) * rng.uniform(0.8, 1.2)
                          for _ in range(products)])
    return cov * np.outer(vol, vol)


def sizes_for(n: int) -> tuple[int, int]:
    """(products, months) for ``n`` instruments: 2×4, 2×8, 2×12, 4×12, otherwise 1×n."""
    table = {8: (2, 4), 16: (2, 8), 24: (2, 12), 48: (4, 12)}
    return table.get(n, (1, n))


def curve_book(n: int, regime: str = "small", seed: int = 0) -> HedgeQP:
    """A curve-structured hedge problem with ``n`` futures in normalised units.

    Parameters
    ----------
    n : int
        Number of instruments (8, 16, 24, 48 map to 2×4, 2×8, 2×12, 4×12 products × months).
    regime : {"small", "large"}
        Contract counts of a few (small) or tens to hundreds (large).
    seed : int
        Seed of the generator; the same seed gives the same book.

    Returns
    -------
    HedgeQP
    """
    if regime not in ("small", "large"):
        raise ValueError(f"regime must be 'small' or 'large', got {regime!r}")
    rng = np.random.default_rng(seed + (0 if regime == "small" else 10_000))
    products, months = sizes_for(n)
    cov_f = _curve_cov(rng, products, months)
    n_exp = max(2, (3 * n) // 4)
    # exposure series: blends of two neighbouring months of one product, plus basis noise
    W = np.zeros((n_exp, n))
    for e in range(n_exp):
        p = rng.integers(products)
        m = rng.integers(months - 1)
        a = rng.uniform(0.2, 0.8)
        W[e, p * months + m] = a
        W[e, p * months + m + 1] = 1 - a
    basis = np.diag(rng.uniform(0.01, 0.04, n_exp) * np.diag(W @ cov_f @ W.T))
    k = n + n_exp
    cov = np.zeros((k, k))
    cov[:n, :n] = cov_f
    cov[n:, :n] = W @ cov_f
    cov[:n, n:] = cov[n:, :n].T
    cov[n:, n:] = W @ cov_f @ W.T + basis
    size = rng.choice([1.0, 2.0, 5.0], size=n)  # contract sizes in exposure units
    q = rng.uniform(0.3, 1.0, n_exp) * rng.choice([-1.0, 1.0], n_exp, p=[0.3, 0.7])
    e = np.concatenate([np.zeros(n), q])
    C = np.zeros((n, k))
    C[np.arange(n), np.arange(n)] = size
    v0 = float(e @ cov @ e)
    U = np.linalg.cholesky(cov / v0).T
    M = U @ C.T
    u = U @ e
    x_free = np.linalg.lstsq(M, -u, rcond=None)[0]
    # scale the exposures (M ∝ 1/scale in normalised units) to the regime's typical hedge size
    scale = (2.0 if regime == "small" else 80.0) / float(np.median(np.abs(x_free)))
    M = M / scale
    x_free = x_free * scale
    if regime == "small":
        lim = rng.integers(3, 7, n).astype(float)
    else:
        lim = np.round(np.maximum(np.abs(x_free) * rng.uniform(0.6, 1.5, n), 40.0))
        lim = np.minimum(lim, 400.0)
    rows, h, names = [], [], []
    for p in range(products):
        r = np.zeros(n)
        r[p * months:(p + 1) * months] = 1.0
        cap = max(1.0, np.floor(0.8 * abs(float(r @ x_free))))
        rows += [r, -r]
        h += [cap, cap]
        names += [f"P{p} all months max", f"P{p} all months min"]
    return HedgeQP(M=M, u=u, lo=-lim, hi=lim, G=np.array(rows), h=np.array(h),
                   names=tuple(f"P{j // months}M{j % months + 1:02d}" for j in range(n)),
                   row_names=tuple(names))
