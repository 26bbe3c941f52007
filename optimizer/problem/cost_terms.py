"""Trading cost as separable convex terms of the normalised hedge problem.

With ``t = x − x₀`` the trade of each line (``x₀`` = positions held now) the cost is
``Σ_j a_j |t_j| + b_j |t_j|^1.5`` in the units of the problem:

- *price of risk* P (currency per percentage point of variance reduction): the objective is
  ``f(x) + cost(x) / (100 P)``, so spending P of trading cost is worth exactly one point of
  variance reduction (0.01 of the unhedged variance);
- *cost budget* B (currency): ``cost(x) / B ≤ 1`` beside the variance objective.

Each term is zero at no trade, non-negative and convex, so the relaxation stays convex and the
whole-contract search's quadratic bound plus the separable cost stays a valid lower bound. The
minimum trade size ``m_j`` (0 or at least ``m_j`` contracts) is an exact disjunctive constraint
that the whole-contract search enforces point by point; the relaxation drops it (a valid
relaxation).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["CostTerms"]


@dataclass(frozen=True)
class CostTerms:
    """Normalised cost terms of a :class:`~optimizer.qp.HedgeQP`.

    Attributes
    ----------
    current : ndarray (n,)
        Positions held now (trade = x − current).
    lin, imp : ndarray (n,)
        Coefficients of ``|t|`` and ``|t|^1.5`` in problem units (objective or budget share).
    in_objective : bool
        True for the price-of-risk form (cost added to the objective).
    budget : float or None
        Right-hand side of ``Σ cost ≤ budget`` (1 in the budget form), else None.
    min_trade : ndarray (n,) of int
        Smallest nonzero trade per line (1 = any whole trade).
    to_currency : float
        Multiply a cost in problem units by this to get currency.
    """

    current: np.ndarray
    lin: np.ndarray
    imp: np.ndarray
    in_objective: bool
    budget: float | None
    min_trade: np.ndarray
    to_currency: float

    def line_values(self, x: np.ndarray) -> np.ndarray:
        """Cost of each line's trade at positions ``x`` (problem units)."""
        a = np.abs(np.asarray(x, dtype=float) - self.current)
        return self.lin * a + self.imp * a ** 1.5

    def value(self, x: np.ndarray) -> float:
        """Total cost at positions ``x`` (problem units)."""
        return float(self.line_values(x).sum())

    def objective_part(self, x: np.ndarray) -> float:
        """What the cost adds to the objective (0 in the budget form)."""
        return self.value(x) if self.in_objective else 0.0

    def table(self, j: int, lo: int, hi: int) -> np.ndarray:
        """Cost of line ``j`` for every whole position ``lo … hi`` (problem units)."""
        a = np.abs(np.arange(int(lo), int(hi) + 1, dtype=float) - self.current[j])
        return self.lin[j] * a + self.imp[j] * a ** 1.5

    def violations(self, x: np.ndarray, tol: float = 1e-7) -> list[str]:
        """Cost-budget and minimum-trade breaches at ``x`` (names)."""
        out = []
        if self.budget is not None and self.value(x) > self.budget * (1 + tol) + tol:
            out.append("cost budget")
        t = np.abs(np.asarray(x, dtype=float) - self.current)
        small = (t > tol) & (t < self.min_trade - tol)
        out += [f"line {j} below its minimum trade" for j in np.flatnonzero(small)]
        return out

    def cap(self, limit: float) -> np.ndarray:
        """Largest ``|t_j|`` whose cost alone stays within ``limit`` (inf where cost is 0)."""
        out = np.full(len(self.lin), np.inf)
        for j in range(len(self.lin)):
            a, b = self.lin[j], self.imp[j]
            if a <= 0 and b <= 0:
                continue
            hi = limit / a if a > 0 else (limit / b) ** (2 / 3)
            lo = 0.0
            for _ in range(80):  # bisection on the increasing a t + b t^1.5
                mid = 0.5 * (lo + hi)
                if a * mid + b * mid ** 1.5 <= limit:
                    lo = mid
                else:
                    hi = mid
            out[j] = hi
        return out
