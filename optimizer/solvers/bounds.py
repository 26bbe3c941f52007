"""Root of the exact integer search: a Lagrangian lower bound, finite boxes and a variable order.

For multipliers ``λ ≥ 0`` (rows ``G n ≤ h``) and ``μ ≥ 0`` (margin budget) and any point ``z``, the
Lagrangian of the hedge problem of :mod:`optimizer.problem.qp` is, with ``δ = x − z`` and ``g = Az +
b``,

    L(x) = f(x) + λᵀ(Gx − h) + μ(mᵀ|x| − B)
         = K₀ + δᵀAδ + Σ_j ψ_j(x_j),
    K₀   = f(z) + λᵀ(Gz − h) − μB,
    ψ_j(x_j) = (2g_j + (Gᵀλ)_j) δ_j + μ m_j |x_j|,

an identity (no optimality needed). For every feasible ``x``, ``L(x) ≤ f(x)``. Each ``ψ_j`` is
convex and separable, so with ``ψ̲_j = min ψ_j`` over the integer box,

    f(x) ≥ K + δᵀAδ + Σ_j (ψ_j(x_j) − ψ̲_j),      K = K₀ + Σ_j ψ̲_j,

where every term after ``K`` is non-negative. With ``z`` and the multipliers of the continuous
relaxation (its KKT point) ``K`` equals the relaxed optimum up to solver accuracy; with any other
values it is still a true bound, so solver inaccuracy can weaken the bound but never break it. Write
``A = RᵀR`` with ``R`` from a QR factorisation of ``M`` (columns permuted). Then
``δᵀAδ = Σ_i (R_ii δ_i + Σ_{j>i} R_ij δ_j)²`` and the terms of levels ``i ≥ k`` depend only on
``δ_k … δ_{n−1}``: partial sums are lower bounds for depth-first enumeration from the last level
down (Schnorr–Euchner), valid also when ``A`` is singular (a zero ``R_ii`` only weakens a level).

Unlimited positions are made finite before the search: ``(x − z)ᵀA(x − z) ≤ f_inc − K`` for every
``x`` at least as good as an incumbent, so ``|x_j − z_j| ≤ √((f_inc − K)(A⁻¹)_jj)``; the margin
budget gives ``|x_j| ≤ B / m_j``.

The order puts the best-determined variables on the top levels (enumerated first): greedily the
one with the fewest expected candidates, ``min(box width + 1, 2√(r · conditional variance) + 1)``,
the conditional variance taken under covariance ``A⁻¹`` given the variables already placed.

References
----------
Agrell, Eriksson, Vardy & Zeger (2002), "Closest point search in lattices", IEEE Trans. Inf.
Theory 48(8), 2201–2214.
Chang & Han (2008), "Solving box-constrained integer least squares problems", IEEE Trans. Wireless
Communications 7(1), 277–287 (from memory).
Schnorr & Euchner (1994), "Lattice basis reduction: improved practical algorithms and solving
subset sum problems", Math. Programming 66, 181–199.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.linalg.lapack import dtrtri

from ..problem.qp import HedgeQP
from .native_search import native_search, run_active_set

__all__ = ["RootData", "lagrangian_terms", "finite_box", "search_order", "prepare_root", "polish",
           "quick_relaxation"]

_EPS = 1e-9
_COND_MAX = 1e7  # largest condition number of R trusted for ellipsoid boxes


@dataclass
class RootData:
    """Everything the search needs, in *level* order (level ``i`` is variable ``perm[i]``)."""

    perm: np.ndarray        # level → original variable index
    R: np.ndarray           # (n, n) upper triangular, A[perm][:, perm] = RᵀR
    z: np.ndarray           # centre of the expansion, level order
    slope: np.ndarray       # 2g + Gᵀλ, level order
    absw: np.ndarray        # μ m, level order
    psimin: np.ndarray      # min of ψ_j over the integer box, level order
    lo: np.ndarray          # finite integer box, level order
    hi: np.ndarray
    K: float                # root lower bound on the integer optimum
    X: np.ndarray | None = None   # x = X y when levels are lattice coordinates (else permuted x)
    Gl: np.ndarray | None = None  # rows on the levels (lattice mode: box rows and G X)
    hl: np.ndarray | None = None


def _psi_min(slope: np.ndarray, absw: np.ndarray, z: np.ndarray,
             lo: np.ndarray, hi: np.ndarray) -> np.ndarray:
    """Minimum of the convex piecewise-linear ψ_j over ``[lo_j, hi_j]`` (−inf if unbounded)."""
    with np.errstate(invalid="ignore"):
        cand = [np.where(np.isfinite(lo), slope * (lo - z) + absw * np.abs(lo),
                         np.where(slope - absw > 0, -np.inf, np.inf)),
                np.where(np.isfinite(hi), slope * (hi - z) + absw * np.abs(hi),
                         np.where(slope + absw < 0, -np.inf, np.inf))]
    zero_in = (lo <= 0) & (hi >= 0)
    cand.append(np.where(zero_in, -slope * z, np.inf))
    # a convex piecewise-linear function attains its minimum at an end or at its kink 0, or
    # decreases without bound towards an unlimited end
    return np.minimum.reduce(cand)


def lagrangian_terms(qp: HedgeQP, z: np.ndarray, lam: np.ndarray | None, mu: float | None,
                     lo: np.ndarray, hi: np.ndarray):
    """``(K, slope, absw, psimin)`` of the Lagrangian bound for box ``[lo, hi]`` (original order).

    ``K`` may be ``-inf`` when a ψ_j is unbounded below on an unlimited box.
    """
    n = qp.n
    A, b = qp.A, qp.b
    z = np.asarray(z, dtype=float)
    g = A @ z + b
    lam = np.zeros(qp.G.shape[0]) if lam is None else np.maximum(np.asarray(lam, float), 0.0)
    has_m = qp.margin_budget is not None and qp.margin is not None
    mu = max(float(mu), 0.0) if (has_m and mu is not None) else 0.0
    slope = 2.0 * g + (qp.G.T @ lam if qp.G.shape[0] else np.zeros(n))
    absw = mu * np.asarray(qp.margin, float) if has_m else np.zeros(n)
    K0 = qp.value(z)
    if qp.G.shape[0]:
        K0 += float(lam @ (qp.G @ z - qp.h))
    if has_m:
        K0 -= mu * float(qp.margin_budget)
    psimin = _psi_min(slope, absw, z, lo, hi)
    return K0 + float(psimin.sum()), slope, absw, psimin


def _inverse_diag(M: np.ndarray) -> np.ndarray | None:
    """``diag((MᵀM)⁻¹)`` via QR, or ``None`` when ``M`` is too ill-conditioned to trust."""
    n = M.shape[1]
    if M.shape[0] < n:
        return None
    R = np.linalg.qr(M, mode="r")
    d = np.abs(np.diag(R))
    if d.min() <= 0:
        return None
    # LAPACK's triangular inverse: unthreaded, microseconds for desk-sized books
    Rinv, info = dtrtri(np.ascontiguousarray(R[:n, :n]))
    if info != 0 or not np.all(np.isfinite(Rinv)):
        return None
    diag = np.einsum("ij,ij->i", Rinv, Rinv)
    # cond₂(R) ≤ ‖R‖_F ‖R⁻¹‖_F: a cheap upper bound on the condition number (conservative)
    if float(np.sqrt(np.sum(R * R) * diag.sum())) > _COND_MAX:
        return None
    return diag


def finite_box(qp: HedgeQP, lo: np.ndarray, hi: np.ndarray, centre: np.ndarray, radius2: float
               ) -> tuple[np.ndarray, np.ndarray]:
    """Intersect ``[lo, hi]`` with margin caps and the ellipsoid ``(x−c)ᵀA(x−c) ≤ radius2``.

    The ellipsoid box is applied only when ``radius2`` is finite and ``M`` is well conditioned;
    it is widened by a relative ``1e-6`` and an absolute ``1e-6`` before rounding inwards.
    Entries may stay infinite (the caller then cannot enumerate).
    """
    lo, hi = lo.copy(), hi.copy()
    if qp.margin_budget is not None and qp.margin is not None:
        m = np.asarray(qp.margin, float)
        with np.errstate(divide="ignore"):
            cap = np.where(m > 0, np.floor(float(qp.margin_budget) / np.where(m > 0, m, 1.0)
                                           * (1 + 1e-12) + _EPS), np.inf)
        lo, hi = np.maximum(lo, -cap), np.minimum(hi, cap)
    if np.isfinite(radius2):
        diag = _inverse_diag(qp.M)
        if diag is not None:
            w = np.sqrt(max(radius2, 0.0) * diag) * (1 + 1e-6) + 1e-6 * (1 + np.abs(centre))
            lo = np.maximum(lo, np.ceil(centre - w))
            hi = np.minimum(hi, np.floor(centre + w))
    return lo, hi


def search_order(A: np.ndarray, lo: np.ndarray, hi: np.ndarray, radius2: float) -> np.ndarray:
    """Variables from the top level down (first = enumerated first), greedy by expected candidates.

    Only the speed of the search depends on the order, never its correctness.
    """
    n = A.shape[0]
    ridge = 1e-10 * max(float(np.trace(A)) / max(n, 1), 1e-300)
    C = np.linalg.inv(A + ridge * np.eye(n))
    C = (C + C.T) / 2
    width = hi - lo
    r = radius2 if np.isfinite(radius2) and radius2 > 0 else 1.0
    placed = np.zeros(n, dtype=bool)
    out = np.empty(n, dtype=int)
    for step in range(n):
        var = np.maximum(C.diagonal(), 0.0)
        cands = np.minimum(width + 1, 2 * np.sqrt(r * var) + 1) + 1e-9 * var  # tie: smaller var
        cands[placed] = np.inf
        j = int(np.argmin(cands))  # first of equals, as in index order
        placed[j] = True
        out[step] = j
        cjj = C[j, j]
        if cjj > 0:
            cj = C[:, j].copy()
            C -= np.outer(cj, cj / cjj)
    return out


def prepare_root(qp: HedgeQP, z: np.ndarray, lam, mu, lo: np.ndarray, hi: np.ndarray,
                 f_inc: float) -> RootData | None:
    """Bound, tightened finite boxes, order and factor; ``None`` if a box stays unlimited."""
    lo0, hi0 = lo, hi
    K, slope, absw, psimin = lagrangian_terms(qp, z, lam, mu, lo, hi)
    if np.isfinite(K) and np.isfinite(f_inc):
        lo, hi = finite_box(qp, lo, hi, z, f_inc - K)
    elif np.isfinite(f_inc):
        # no usable Lagrangian bound yet: f(x) − offset ≥ (x − x_ls)ᵀA(x − x_ls), x_ls the free
        # least-squares optimum
        x_ls = np.linalg.lstsq(qp.M, -qp.u, rcond=None)[0]
        lo, hi = finite_box(qp, lo, hi, x_ls, f_inc - float(getattr(qp, "offset", 0.0)))
    else:
        lo, hi = finite_box(qp, lo, hi, z, np.inf)
    if not (np.all(np.isfinite(lo)) and np.all(np.isfinite(hi))):
        return None
    if not (np.array_equal(lo, lo0) and np.array_equal(hi, hi0)):  # else the terms stand
        K, slope, absw, psimin = lagrangian_terms(qp, z, lam, mu, lo, hi)
    n = qp.n
    if K >= f_inc:  # the incumbent is proven optimal: no search, so no order or factor
        return RootData(perm=np.arange(n), R=np.zeros((n, n)), z=np.asarray(z, float),
                        slope=slope, absw=absw, psimin=psimin, lo=lo, hi=hi, K=float(K))
    radius2 = f_inc - K if np.isfinite(f_inc) else np.inf
    top_first = search_order(qp.A, lo, hi, radius2)
    perm = top_first[::-1].copy()  # level 0 is enumerated last
    Rk = np.linalg.qr(qp.M[:, perm], mode="r")
    R = np.zeros((n, n))
    R[: Rk.shape[0]] = Rk
    return RootData(perm=perm, R=R, z=np.asarray(z, float)[perm], slope=slope[perm],
                    absw=absw[perm], psimin=psimin[perm], lo=lo[perm], hi=hi[perm], K=float(K))


@dataclass(frozen=True)
class KKTPoint:
    """A relaxed point with multipliers, as used by the bounds (any values give a valid bound)."""

    x: np.ndarray
    dual_lo: np.ndarray
    dual_hi: np.ndarray
    dual_rows: np.ndarray
    dual_margin: float | None


def polish(qp: HedgeQP, relaxed, act_tol: float = 1e-6, max_iter: int | None = None
           ) -> KKTPoint | None:
    """Refine the relaxation by an active-set iteration on its KKT system (machine precision).

    Start from the constraints active at the solver's point (bounds and rows within ``act_tol``);
    solve the equality system ``2Ax + 2b + Eᵀν = 0, Ex = e`` by least squares; add the most
    violated inactive constraint or drop the active one whose multiplier has the wrong sign, and
    repeat (Nocedal & Wright 2006, "Numerical Optimization", §16.5, active-set methods for convex
    QP). Multipliers of the wrong sign are finally set to zero. Only the tightness of the bounds
    depends on the result, never their validity. Problems with a margin budget are returned
    unchanged (its ``|x|`` is handled by the solver's multiplier). ``None`` without a point.
    """
    if relaxed is None or relaxed.x is None or not np.all(np.isfinite(relaxed.x)):
        return None
    n = qp.n
    z = np.asarray(relaxed.x, float)
    g = qp.G.shape[0]
    if qp.margin_budget is not None and qp.margin is not None:
        return None
    # all constraints as rows c_i x <= d_i: upper bounds, lower bounds (as -x <= -lo), G rows
    fin_hi, fin_lo = np.flatnonzero(np.isfinite(qp.hi)), np.flatnonzero(np.isfinite(qp.lo))
    C = np.vstack([np.eye(n)[fin_hi], -np.eye(n)[fin_lo], qp.G]).reshape(-1, n)
    d = np.concatenate([qp.hi[fin_hi], -qp.lo[fin_lo], qp.h])
    scale = 1.0 + np.abs(d)
    active = list(np.flatnonzero(C @ z >= d - act_tol * scale))
    A2, b2 = 2 * qp.A, -2 * qp.b
    iters = max_iter if max_iter is not None else 3 * n + 10
    if native_search():  # the compiled twin of the loop below
        done = run_active_set(A2, b2, C, d, scale, active, iters)
        if done is not None:
            return _kkt_point(done[0], done[1], fin_hi, fin_lo, n, g)
    x, nu, solved = z, np.zeros(0), []
    for _ in range(iters):
        solved = list(active)  # the set that x and nu belong to (the cap may stop mid-change)
        E = C[active]
        p = len(active)
        Kkt = np.zeros((n + p, n + p))
        Kkt[:n, :n] = A2
        Kkt[:n, n:] = E.T
        Kkt[n:, :n] = E
        rhs = np.concatenate([b2, d[active]])
        sol = _kkt_solve(Kkt, rhs)
        x, nu = sol[:n], sol[n:]
        viol = C @ x - d
        viol[active] = -np.inf
        worst = int(np.argmax(viol)) if len(viol) else -1
        if worst >= 0 and viol[worst] > 1e-12 * scale[worst]:
            active.append(worst)
            continue
        if p and nu.min() < -1e-14:
            active.pop(int(np.argmin(nu)))
            continue
        break
    mult = np.zeros(len(d))
    mult[solved] = np.maximum(nu, 0.0)
    return _kkt_point(x, mult, fin_hi, fin_lo, n, g)


def _kkt_point(x, mult, fin_hi, fin_lo, n, g) -> KKTPoint | None:
    """Split the multipliers of the rows ``[x ≤ hi; −x ≤ −lo; Gx ≤ h]`` into a KKTPoint."""
    if not np.all(np.isfinite(x)):
        return None
    dual_hi, dual_lo = np.zeros(n), np.zeros(n)
    dual_hi[fin_hi] = mult[: len(fin_hi)]
    dual_lo[fin_lo] = mult[len(fin_hi): len(fin_hi) + len(fin_lo)]
    return KKTPoint(x=x, dual_lo=dual_lo, dual_hi=dual_hi, dual_rows=mult[len(mult) - g:],
                    dual_margin=None)


def _kkt_solve(K: np.ndarray, rhs: np.ndarray) -> np.ndarray:
    """``K⁻¹ rhs`` by LU, or by least squares when ``K`` is singular (degenerate active sets).

    Only the tightness of the bounds depends on the answer (the callers check KKT conditions or
    use the point in a bound that holds for any point).
    """
    try:
        sol = np.linalg.solve(K, rhs)  # LU with partial pivoting: backward stable
        if np.isfinite(sol).all():
            return sol
    except np.linalg.LinAlgError:
        pass
    return np.linalg.lstsq(K, rhs, rcond=None)[0]


@dataclass(frozen=True)
class _Start:
    x: np.ndarray


def quick_relaxation(qp: HedgeQP, tol: float = 1e-9) -> KKTPoint | None:
    """The continuous relaxation without a conic solver, when an active-set solve proves it.

    Start :func:`polish` from the free least-squares optimum clipped into the box and accept the
    result only if it satisfies the KKT conditions of the convex QP — ``Cx ≤ d`` (bounds and rows),
    multipliers ``ν ≥ 0`` and ``‖2Ax + 2b + Cᵀν‖∞ ≤ tol (1 + ‖2b‖∞)`` — which makes it the relaxed
    optimum (Nocedal & Wright 2006, Theorem 16.4: KKT conditions are sufficient for convex QP).
    Returns ``None`` with a margin budget, for a non-finite result or when the check fails (the
    caller then solves the relaxation with the conic solver). Any answer gives a valid bound; the
    check only guards its tightness.
    """
    if qp.margin_budget is not None and qp.margin is not None:
        return None
    lo, hi = np.asarray(qp.lo, float), np.asarray(qp.hi, float)
    if np.any(lo > hi):
        return None
    try:  # free least-squares optimum from the normal equations, else by lstsq
        x0 = np.linalg.solve(qp.A, -qp.b)
        if not np.isfinite(x0).all():
            raise np.linalg.LinAlgError
    except np.linalg.LinAlgError:
        x0 = np.linalg.lstsq(qp.M, -qp.u, rcond=None)[0]
    x0 = np.minimum(np.maximum(x0, lo), hi)
    kkt = polish(qp, _Start(x=x0), act_tol=1e-12)
    if kkt is None:
        return None
    x = kkt.x
    scale = 1.0 + float(np.max(np.abs(2.0 * qp.b), initial=0.0))
    grad = 2.0 * (qp.A @ x + qp.b) + kkt.dual_hi - kkt.dual_lo
    if qp.G.shape[0]:
        grad += qp.G.T @ kkt.dual_rows
        if np.any(qp.G @ x > qp.h + tol * (1.0 + np.abs(qp.h))):
            return None
    with np.errstate(invalid="ignore"):
        if np.any(x < lo - tol * (1.0 + np.abs(lo))) or np.any(x > hi + tol * (1.0 + np.abs(hi))):
            return None
    if not np.all(np.isfinite(grad)) or float(np.max(np.abs(grad))) > tol * scale:
        return None
    return kkt
