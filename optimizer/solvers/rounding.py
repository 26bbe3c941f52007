"""Rounding a continuous hedge to whole contracts: the naive rule and a repaired greedy one.

Both work on the normalised problem of :mod:`optimizer.problem.qp`, ``f(n) = nᵀAn + 2bᵀn + c``.

* :func:`naive_round` takes the nearest integer of each relaxed position and clips it into the
  integer box ``[⌈lo⌉, ⌊hi⌋]``. It ignores group limits and the margin budget; it is the baseline
  that shows what rounding costs.
* :func:`best_rounded` chooses floor or ceiling coordinate by coordinate (greedy, each choice given
  the earlier ones), repairs group rows and the margin budget by single-contract moves that remove
  the most violation for the least variance, and then improves the point by single-contract moves
  while it stays feasible (pairs of moves, such as calendar spreads, when no single move helps),
  and keeps naive rounding instead when that is feasible and better.
  The change of ``f`` under ``n → n + s e_j`` is
  ``2 s (An + b)_j + A_jj``, so each move is evaluated for all ``j`` at once.

It is a heuristic (an incumbent for :mod:`optimizer.solvers.exact`), never a claim of optimality.

References
----------
Agrell, Eriksson, Vardy & Zeger (2002), "Closest point search in lattices", IEEE Trans. Inf.
Theory 48(8) (the Babai nearest-plane idea behind sequential rounding).
"""

from __future__ import annotations

import numpy as np

from ..problem.qp import HedgeQP

__all__ = ["integer_box", "naive_round", "best_rounded"]

_FEAS_TOL = 1e-9


def integer_box(qp: HedgeQP) -> tuple[np.ndarray, np.ndarray]:
    """Integer bounds ``(⌈lo⌉, ⌊hi⌋)`` as float arrays (``±inf`` kept where unlimited)."""
    lo = np.ceil(np.asarray(qp.lo, dtype=float) - _FEAS_TOL)
    hi = np.floor(np.asarray(qp.hi, dtype=float) + _FEAS_TOL)
    return lo, hi


def naive_round(qp: HedgeQP, x_relaxed: np.ndarray) -> np.ndarray:
    """Nearest integers of ``x_relaxed`` clipped into the integer box (limits on rows ignored).

    Parameters
    ----------
    qp : HedgeQP
        The problem (only its bounds are used).
    x_relaxed : ndarray of shape (n,)
        Continuous positions, usually the relaxed optimum.

    Returns
    -------
    ndarray of shape (n,)
        Integer-valued floats. Where the integer box is empty the bound nearest to the value wins.
    """
    lo, hi = integer_box(qp)
    x = np.round(np.asarray(x_relaxed, dtype=float))
    return np.minimum(np.maximum(x, lo), hi)


def _violation(qp: HedgeQP, x: np.ndarray) -> float:
    """Total amount by which ``x`` breaks the rows and the margin budget (0 when feasible)."""
    v = 0.0
    if qp.G.shape[0]:
        v += float(np.maximum(qp.G @ x - qp.h, 0.0).sum())
    if qp.margin_budget is not None and qp.margin is not None:
        v += max(float(qp.margin @ np.abs(x)) - float(qp.margin_budget), 0.0)
    return v


def _violations_after(qp: HedgeQP, x: np.ndarray, dx: np.ndarray) -> np.ndarray:
    """:func:`_violation` at ``x + dx_c`` for every row ``dx_c`` of ``dx`` (shape (k, n)) at once.

    Rows: ``Σ_r max((Gx − h)_r + (G dx_c)_r, 0)``; margin:
    ``max(mᵀ|x| − B + mᵀ(|x + dx_c| − |x|), 0)``.
    """
    v = np.zeros(dx.shape[0])
    if qp.G.shape[0]:
        slack = qp.G @ x - qp.h
        v += np.maximum(slack[None, :] + dx @ qp.G.T, 0.0).sum(axis=1)
    if qp.margin_budget is not None and qp.margin is not None:
        m = np.asarray(qp.margin, float)
        used = float(m @ np.abs(x)) - float(qp.margin_budget)
        v += np.maximum(used + (np.abs(x[None, :] + dx) - np.abs(x)[None, :]) @ m, 0.0)
    return v


def _move_violations(qp: HedgeQP, x: np.ndarray, steps: np.ndarray) -> np.ndarray:
    """:func:`_violation` after each single move ``x_j → x_j + s``; shape (len(steps), n)."""
    n = len(x)
    dx = (steps[:, None, None] * np.eye(n)[None]).reshape(-1, n)
    return _violations_after(qp, x, dx).reshape(len(steps), n)


def _sequential_floor_ceil(A: np.ndarray, b: np.ndarray, z: np.ndarray,
                           lo: np.ndarray, hi: np.ndarray) -> np.ndarray:
    """Floor or ceiling per coordinate, given the earlier choices and ``z`` for the rest.

    Coordinates are taken in order of decreasing ``A_jj`` (the most influential first).
    """
    x = z.copy()
    for j in np.argsort(-np.diag(A), kind="stable"):
        best_v, best_t = np.inf, x[j]
        for t in (np.floor(z[j]), np.ceil(z[j])):
            t = min(max(t, lo[j]), hi[j])
            d = t - x[j]
            # change of f when only x_j moves by d
            dv = 2.0 * d * float(A[j] @ x + b[j]) + A[j, j] * d * d
            if dv < best_v:
                best_v, best_t = dv, t
        x[j] = best_t
    return x


def _moves(A: np.ndarray, grad: np.ndarray, x: np.ndarray, lo: np.ndarray, hi: np.ndarray):
    """Objective change of every ``±1`` move, ``inf`` where it leaves the box; shape (2, n)."""
    d = np.diag(A)
    up = np.where(x + 1 <= hi, 2.0 * grad + d, np.inf)
    dn = np.where(x - 1 >= lo, -2.0 * grad + d, np.inf)
    return np.vstack([up, dn])


def _pair_move(qp: HedgeQP, A: np.ndarray, grad: np.ndarray, x: np.ndarray,
               lo: np.ndarray, hi: np.ndarray, tries: int = 64) -> bool:
    """Apply the best improving feasible move of two contracts at once (e.g. a calendar spread).

    ``f(x + s e_j + t e_k) − f(x) = 2s g_j + 2t g_k + A_jj + A_kk + 2st A_jk`` for
    ``s, t ∈ {±1}``, evaluated for all pairs; the ``tries`` best are checked for feasibility.
    """
    n = len(x)
    d = np.diag(A)
    sj = np.array([1.0, 1.0, -1.0, -1.0])[:, None]  # the four sign pairs (s, t)
    tk = np.array([1.0, -1.0, 1.0, -1.0])[:, None]
    dv = ((2 * sj * grad + d)[:, :, None] + (2 * tk * grad + d)[:, None, :]
          + 2 * (sj * tk)[:, :, None] * A[None])
    ok_j = (x + sj <= hi) & (x + sj >= lo)
    ok_k = (x + tk <= hi) & (x + tk >= lo)
    dv = np.where(ok_j[:, :, None] & ok_k[:, None, :], dv, np.inf)
    dv[:, np.arange(n), np.arange(n)] = np.inf
    flat = dv.ravel()
    m = min(tries, flat.size)
    top = np.argpartition(flat, m - 1)[:m]
    top = top[np.argsort(flat[top], kind="stable")]
    top = top[flat[top] < -1e-15]  # improving pairs, best first
    if not top.size:
        return False
    c, rest = np.divmod(top, n * n)
    j, k = np.divmod(rest, n)
    s, t = sj[c, 0], tk[c, 0]
    # violation of every candidate at once (as _violation after the pair move)
    dx = np.zeros((len(top), n))
    rows = np.arange(len(top))
    dx[rows, j] += s
    dx[rows, k] += t
    v = _violations_after(qp, x, dx)
    ok = np.flatnonzero(v <= _FEAS_TOL)
    if not ok.size:
        return False
    f = ok[0]
    x[j[f]] += s[f]
    x[k[f]] += t[f]
    return True


def best_rounded(qp: HedgeQP, x_relaxed: np.ndarray, *, max_moves: int | None = None
                 ) -> np.ndarray | None:
    """A feasible whole-contract point near ``x_relaxed``, or ``None`` if the repair fails.

    Parameters
    ----------
    qp : HedgeQP
        The problem.
    x_relaxed : ndarray of shape (n,)
        Continuous positions (infinite or NaN entries are replaced by 0 before rounding).
    max_moves : int, optional
        Cap on single-contract moves in repair and improvement (default ``50 n + 200``).

    Returns
    -------
    ndarray or None
        Integer-valued positions that pass ``qp.is_feasible``, or ``None``.
    """
    n = qp.n
    A, b = qp.A, qp.b
    lo, hi = integer_box(qp)
    if np.any(lo > hi):
        return None
    z = np.asarray(x_relaxed, dtype=float).copy()
    z[~np.isfinite(z)] = 0.0
    z = np.minimum(np.maximum(z, lo), hi)
    x = _sequential_floor_ceil(A, b, z, lo, hi)
    cap = max_moves if max_moves is not None else 50 * n + 200
    steps = np.array([1.0, -1.0])
    # repair: single moves that reduce the violation most, ties broken by the variance added
    viol = _violation(qp, x)
    count = 0
    while viol > _FEAS_TOL and count < cap:
        grad = A @ x + b
        dv = _moves(A, grad, x, lo, hi).ravel()
        v = _move_violations(qp, x, steps).ravel()
        # the move with the least violation, then the least variance added, in (step, j) order;
        # only moves that do not add violation
        ok = np.isfinite(dv) & (v <= viol)
        if not ok.any():
            break
        cand = np.flatnonzero(ok)
        pick = cand[np.lexsort((dv[cand], v[cand]))[0]]
        s_idx, j = divmod(int(pick), n)
        x[j] += steps[s_idx]
        viol = float(v[pick])
        count += 1
    if viol > _FEAS_TOL or not qp.is_feasible(x):
        return None
    # improvement: best single move that lowers f and keeps every limit
    count = 0
    while count < cap:
        grad = A @ x + b
        dv = _moves(A, grad, x, lo, hi)
        order = np.argsort(dv, axis=None)
        moved = False
        flat_dv = dv.ravel()[order]
        # moves in order of the variance they remove (a prefix of the sorted list); the first
        # that keeps every limit
        improving = flat_dv < -1e-15
        if improving.any():
            keeps = _move_violations(qp, x, steps).ravel()[order] <= _FEAS_TOL
            hit = np.flatnonzero(improving & keeps)
            if hit.size:
                s_idx, j = divmod(int(order[hit[0]]), n)
                x[j] += steps[s_idx]
                moved = True
        if not moved:
            moved = _pair_move(qp, A, grad, x, lo, hi)
        if not moved:
            break
        count += 1
    if not qp.is_feasible(x):
        return None
    xr = naive_round(qp, z)
    if qp.is_feasible(xr) and qp.value(xr) < qp.value(x):
        return xr
    return x
