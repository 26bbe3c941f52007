"""Lattice-reduced levels for the exact search: LLL on the hedge factor, quadratic Lagrangian bound.

Months of one product move almost together, so the columns of ``M`` are nearly parallel and the
enumeration over contract counts themselves sees very uneven levels. A unimodular ``T`` (integer,
``|det T| = 1``) maps integer ``y`` one-to-one onto integer ``x = T y`` (in a curve book ``T``
turns outright months into spreads). LLL reduction of the columns of ``M`` (Lenstra, Lenstra &
Lovász 1982) gives a ``T`` with ``M T`` closer to orthogonal, and enumeration over ``y`` is then
much smaller.

The box ``lo ≤ x ≤ hi`` is not a box in ``y``; it becomes the rows ``T y ≤ hi``, ``−T y ≤ −lo``,
joined by ``G T y ≤ h``. The separable Lagrangian of :mod:`optimizer.solvers.bounds` is not
separable in ``y``, so here the bound is the quadratic Lagrangian with the box multipliers
``ν_lo, ν_hi ≥ 0`` and row multipliers ``λ ≥ 0``:

    L(x) = f(x) + λᵀ(Gx − h) + ν_hiᵀ(x − hi) + ν_loᵀ(lo − x) ≤ f(x)   for feasible x,
    L(x) = L(c) + 2∇L(c)ᵀ(x − c) + (x − c)ᵀA(x − c)                   for any c,

an exact quadratic identity. With ``c`` the free minimiser of ``L`` the gradient is zero up to
round-off, and the remainder is bounded below over the (finite) box by ``−2Σ|∇_j| max|x_j − c_j|``,
so the root bound ``K = L(c) − 2Σ|∇_j| max_j|x_j − c_j|`` holds for any multipliers. The margin
budget is not carried (the caller keeps the original levels when there is one).

References
----------
Lenstra, Lenstra & Lovász (1982), "Factoring polynomials with rational coefficients", Math. Ann.
261, 515–534.
Wübben, Böhnke, Kühn & Kammeyer (2004), "Near-maximum-likelihood detection of MIMO systems using
MMSE-based lattice reduction", IEEE ICC (LLL carried out on the R factor, from memory).
Agrell, Eriksson, Vardy & Zeger (2002), IEEE Trans. Inf. Theory 48(8), 2201–2214.
"""

from __future__ import annotations

import numpy as np

from ..problem.qp import HedgeQP
from .bounds import RootData, _inverse_diag, search_order

__all__ = ["lll_reduce", "lattice_root"]


def lll_reduce(B: np.ndarray, delta: float = 0.99, max_swaps: int = 20000) -> np.ndarray:
    """Unimodular ``T`` such that the columns of ``B T`` are LLL-reduced (Lovász ``delta``).

    Works on the R factor of ``B`` with Givens rotations; ``T`` is kept as exact integers.
    """
    n = B.shape[1]
    R = np.linalg.qr(B, mode="r").astype(float)
    if R.shape[0] < n:
        return np.eye(n, dtype=np.int64)
    T = np.eye(n, dtype=np.int64)
    k, swaps = 1, 0
    while k < n and swaps < max_swaps:
        mu = round(R[k - 1, k] / R[k - 1, k - 1])
        if mu:
            R[:k, k] -= mu * R[:k, k - 1]
            T[:, k] -= mu * T[:, k - 1]
        a, b, c = R[k - 1, k - 1], R[k - 1, k], R[k, k]
        if delta * a * a > b * b + c * c:
            R[:, [k - 1, k]] = R[:, [k, k - 1]]
            T[:, [k - 1, k]] = T[:, [k, k - 1]]
            x, y = R[k - 1, k - 1], R[k, k - 1]
            r = np.hypot(x, y)
            G = np.array([[x / r, y / r], [-y / r, x / r]])
            R[k - 1:k + 1, k - 1:] = G @ R[k - 1:k + 1, k - 1:]
            R[k, k - 1] = 0.0
            k = max(k - 1, 1)
            swaps += 1
        else:
            for j in range(k - 2, -1, -1):
                mu = round(R[j, k] / R[j, j])
                if mu:
                    R[:j + 1, k] -= mu * R[:j + 1, j]
                    T[:, k] -= mu * T[:, j]
            k += 1
    return T


def lattice_root(qp: HedgeQP, relaxed, lo: np.ndarray, hi: np.ndarray, f_inc: float
                 ) -> RootData | None:
    """Levels in LLL coordinates for box ``[lo, hi]`` (finite), or ``None`` when not applicable.

    Not applicable: a margin budget, no relaxed duals, an ill-conditioned ``M`` or no incumbent.
    """
    n = qp.n
    if qp.margin_budget is not None and qp.margin is not None:
        return None
    if relaxed is None or relaxed.x is None or relaxed.dual_lo is None or not np.isfinite(f_inc):
        return None
    if not (np.all(np.isfinite(lo)) and np.all(np.isfinite(hi))):
        return None
    A, b = qp.A, qp.b
    lam = np.maximum(np.nan_to_num(np.asarray(relaxed.dual_rows, float)), 0.0) \
        if qp.G.shape[0] else np.zeros(0)
    if len(lam) != qp.G.shape[0]:
        return None
    fin_lo, fin_hi = np.isfinite(qp.lo), np.isfinite(qp.hi)
    nu_lo = np.where(fin_lo, np.maximum(np.nan_to_num(relaxed.dual_lo), 0.0), 0.0)
    nu_hi = np.where(fin_hi, np.maximum(np.nan_to_num(relaxed.dual_hi), 0.0), 0.0)
    lin = b + 0.5 * ((qp.G.T @ lam if len(lam) else 0.0) + nu_hi - nu_lo)
    const = (qp.value(np.zeros(n)) - (float(lam @ qp.h) if len(lam) else 0.0)
             - float(nu_hi[fin_hi] @ qp.hi[fin_hi]) + float(nu_lo[fin_lo] @ qp.lo[fin_lo]))
    if _inverse_diag(qp.M) is None:
        return None
    c = np.linalg.solve(A, -lin)
    grad = 2.0 * (A @ c + lin)
    Lc = float(c @ A @ c + 2.0 * lin @ c + const)
    K = Lc - float(np.abs(grad) @ np.maximum(np.abs(lo - c), np.abs(hi - c)))
    T = lll_reduce(qp.M)
    Tf = T.astype(float)
    MT = qp.M @ Tf
    diag = _inverse_diag(MT)
    if diag is None:
        return None
    yc = np.linalg.solve(Tf, c)
    # the expansion point actually used is c' = T y_c (equal to c up to round-off); the bound is
    # evaluated at c' so that the quadratic term ‖M T (y − y_c)‖² is exact
    cx = Tf @ yc
    grad2 = 2.0 * (A @ cx + lin)
    Lc2 = float(cx @ A @ cx + 2.0 * lin @ cx + const)
    K = min(K, Lc2 - float(np.abs(grad2) @ np.maximum(np.abs(lo - cx), np.abs(hi - cx))))
    r2 = max(f_inc - K, 0.0)
    w = np.sqrt(r2 * diag) * (1 + 1e-6) + 1e-6 * (1 + np.abs(yc))
    ylo, yhi = np.ceil(yc - w), np.floor(yc + w)
    ATT = Tf.T @ A @ Tf
    order = search_order(ATT, ylo, yhi, r2)[::-1].copy()
    Rk = np.linalg.qr(MT[:, order], mode="r")
    R = np.zeros((n, n))
    R[: Rk.shape[0]] = Rk
    X = Tf[:, order]
    Gl = np.vstack([X, -X] + ([qp.G @ X] if qp.G.shape[0] else []))
    hl = np.concatenate([hi, -lo] + ([qp.h] if qp.G.shape[0] else []))
    zeros = np.zeros(n)
    return RootData(perm=order, R=R, z=yc[order], slope=zeros, absw=zeros.copy(),
                    psimin=zeros.copy(), lo=ylo[order], hi=yhi[order], K=float(K),
                    X=X, Gl=Gl, hl=hl)
