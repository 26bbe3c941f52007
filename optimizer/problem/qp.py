"""The hedge problem in normalised units, independent of any solver.

A book's P&L over the horizon, written in series space, is ``dV = yᵀ dP`` where ``y = e + Cᵀ n``:
``e`` holds the exposures' quantities per series (in each series' price unit), ``C`` (n × k) maps
one contract of each instrument onto its series, and ``n`` is the vector of futures positions in
contracts. With ``Σ`` the covariance of the horizon price moves (price units²) the variance is
``yᵀ Σ y``. Dividing by the unhedged variance ``v₀ = eᵀ Σ e`` and factoring ``Σ / v₀ = UᵀU`` gives

    f(n) = ‖M n + u‖² + r,   f(0) = 1,

the hedged variance as a fraction of the unhedged one. ``M`` has one row per independent
direction of the futures (at most one per instrument, whatever the number of exposures): with
``A = C Σ Cᵀ / v₀ = V W Vᵀ`` and ``b = C Σ e / v₀``, ``M = W^½ Vᵀ``, ``u = W^-½ Vᵀ b`` and
``r = 1 − ‖u‖²`` is the share of variance no futures position can remove (pure basis risk).
Solvers see only ``M``, ``u`` and the limits, all of order one, which keeps mixed-integer solvers
from stalling on dollar² magnitudes.

Limits: ``lo ≤ n ≤ hi`` (position limits, liquidity and hedge-only signs already intersected; may be
±inf), ``G n ≤ h`` (group limits, two rows per group), ``Σ_j margin_j |n_j| ≤ margin_budget``.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import cached_property

import numpy as np


@dataclass(frozen=True)
class HedgeQP:
    """Normalised minimum-variance hedge problem ``min ‖M n + u‖²`` over limited positions.

    Attributes
    ----------
    M : ndarray of shape (k, n)
        Factor of the normalised covariance mapped onto contracts.
    u : ndarray of shape (k,)
        Factor applied to the exposures; ``‖u‖² = 1`` when normalised by the unhedged variance.
    lo, hi : ndarray of shape (n,)
        Bounds on positions in contracts; ``-inf`` / ``inf`` where unlimited.
    G : ndarray of shape (g, n)
        Linear limit rows (group limits as ``+sum ≤ L`` and ``-sum ≤ L``).
    h : ndarray of shape (g,)
        Right-hand sides of ``G``.
    margin : ndarray of shape (n,) or None
        Initial margin per contract (any consistent scale) for the budget row.
    margin_budget : float or None
        Budget for ``Σ margin_j |n_j|``; ``None`` when there is no budget.
    offset : float
        Constant ``r`` added to ``‖M n + u‖²`` (variance share out of the futures' reach).
    names : tuple of str
        Instrument ids, for messages.
    row_names : tuple of str
        Names of the rows of ``G``, for messages and shadow prices.
    """

    M: np.ndarray
    u: np.ndarray
    lo: np.ndarray
    hi: np.ndarray
    G: np.ndarray = field(default_factory=lambda: np.zeros((0, 0)))
    h: np.ndarray = field(default_factory=lambda: np.zeros(0))
    margin: np.ndarray | None = None
    margin_budget: float | None = None
    offset: float = 0.0
    names: tuple[str, ...] = ()
    row_names: tuple[str, ...] = ()

    def __post_init__(self) -> None:
        n = self.M.shape[1]
        if self.G.size == 0:
            object.__setattr__(self, "G", np.zeros((0, n)))
            object.__setattr__(self, "h", np.zeros(0))
        if not self.names:
            object.__setattr__(self, "names", tuple(f"x{j}" for j in range(n)))

    @property
    def n(self) -> int:
        """Number of instruments."""
        return self.M.shape[1]

    @cached_property
    def A(self) -> np.ndarray:
        """Quadratic term ``MᵀM`` of ``f(n) = nᵀAn + 2bᵀn + c`` (computed once, read-only)."""
        A = self.M.T @ self.M
        A.setflags(write=False)
        return A

    @cached_property
    def b(self) -> np.ndarray:
        """Linear term ``Mᵀu`` (computed once, read-only)."""
        b = self.M.T @ self.u
        b.setflags(write=False)
        return b

    @property
    def c(self) -> float:
        """Constant ``uᵀu + offset`` (1 when normalised by the unhedged variance)."""
        return float(self.u @ self.u) + self.offset

    def value(self, x: np.ndarray) -> float:
        """Normalised hedged variance ``‖M x + u‖² + offset`` at positions ``x``."""
        r = self.M @ np.asarray(x, dtype=float) + self.u
        return float(r @ r) + self.offset

    def violations(self, x: np.ndarray, tol: float = 1e-7) -> list[str]:
        """Names of the limits that positions ``x`` break (empty when feasible)."""
        x = np.asarray(x, dtype=float)
        out = [f"{self.names[j]} below its minimum" for j in np.flatnonzero(x < self.lo - tol)]
        out += [f"{self.names[j]} above its maximum" for j in np.flatnonzero(x > self.hi + tol)]
        if self.G.shape[0]:
            bad = np.flatnonzero(self.G @ x > self.h + tol)
            out += [self.row_names[i] if self.row_names else f"row {i}" for i in bad]
        if self.margin_budget is not None and self.margin is not None:
            if float(self.margin @ np.abs(x)) > self.margin_budget * (1 + tol) + tol:
                out.append("margin budget")
        return out

    def is_feasible(self, x: np.ndarray, tol: float = 1e-7) -> bool:
        """Whether positions ``x`` meet every limit (``not violations(x, tol)``, without names)."""
        x = np.asarray(x, dtype=float)
        if np.any(x < self.lo - tol) or np.any(x > self.hi + tol):
            return False
        if self.G.shape[0] and np.any(self.G @ x > self.h + tol):
            return False
        if self.margin_budget is not None and self.margin is not None:
            if float(self.margin @ np.abs(x)) > self.margin_budget * (1 + tol) + tol:
                return False
        return True
