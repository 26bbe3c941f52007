"""Depth-first Schnorr–Euchner enumeration over prepared levels, with a true frontier bound.

The levels come from :func:`optimizer.integer_bounds.prepare_root` (levels are the contract counts,
permuted) or :func:`optimizer.integer_lattice.lattice_root` (levels are LLL coordinates ``y`` with
``x = X y``). For every feasible ``x`` on the levels,

    f(x) ≥ K + Σ_i φ_i,   φ_i = (R_ii δ_i + Σ_{j>i} R_ij δ_j)² + ψ_i(y_i) − ψ̲_i ≥ 0,   δ = y − z,

so the partial sum over the fixed levels bounds every completion. Levels are fixed from ``n−1``
down to ``0``. ``φ_i`` is convex in ``y_i`` alone, so its integer values are visited in increasing
order by a two-pointer walk outwards from its integer minimiser (zig-zag); the first value whose
partial sum reaches the incumbent ends the level. Before a level is entered its range is cut to
the values that can still meet every row and the margin budget, given the cheapest reachable
contribution of the levels not yet fixed. At the last level the true ``f`` (a convex quadratic in
``y_0``) is minimised directly; it is scored with scalars from the exact expansion
``f(y) = f(z) + 2gᵀδ + Σ_i (R_ii δ_i + t_i)²`` (``g = Az + b``, accumulated along the path) and only
a leaf that beats the incumbent is re-evaluated from scratch. The coupling
``t_{i−1} = Σ_{j≥i} R_{i−1,j} δ_j`` of a child is linear in the parent's value, so the parent
computes it once and passes it down. The clock is read every 1024 nodes; on time-out the bound
is the smallest lower bound of the unexplored subtrees (the values not yet entered at each level
of the current path, and the node being entered).

On lattice levels a separable integrality bound is added. Once levels ``≥ k`` are fixed, the
free levels ``0 … k−1`` contribute exactly ``(y − c)ᵀQ_k(y − c)`` with ``Q_k = R[:k,:k]ᵀR[:k,:k]``
and ``c`` their free (continuous) minimiser, which moves by ``W_k (y_k − c_k)`` when level ``k``
is fixed. For a diagonal ``0 ⪯ D_k ⪯ Q_k`` (precomputed per level by :func:`level_diagonals`),

    (y − c)ᵀQ_k(y − c) ≥ Σ_l D_k,l (y_l − c_l)² ≥ Σ_l D_k,l (c_l − round c_l)²

for integer ``y``: zero for the continuous relaxation, positive where the centres are
fractional. A node is pruned when its partial sum plus this bound reaches the incumbent.

References
----------
Agrell, Eriksson, Vardy & Zeger (2002), "Closest point search in lattices", IEEE Trans. Inf.
Theory 48(8), 2201–2214.
Schnorr & Euchner (1994), Math. Programming 66, 181–199.
Buchheim, Caprara & Lodi (2012), "An effective branch-and-bound algorithm for convex quadratic
integer programming", Math. Programming 135, 369–395 (from memory).
Buchheim & Wiegele (2013), "Semidefinite relaxations for non-convex quadratic mixed-integer
programming", Math. Programming 141, 435–452 (diagonal perturbations, from memory).
"""

from __future__ import annotations

import math
import time

import numpy as np
from scipy.linalg import solve_triangular

from .qp import HedgeQP

__all__ = ["enumerate_levels", "level_diagonals"]

_TOL = 1e-9
_SEP_MIN_N = 3  # separable integrality bound below a node from this many levels


def _max_diagonal(Q: np.ndarray, passes: int = 4, share: float = 0.5) -> np.ndarray:
    """A large diagonal ``D`` with ``0 ⪯ D ⪯ Q`` (``Q`` positive definite), by coordinate ascent.

    In the unit-diagonal scaling ``S = diag(Q)^{−1/2} Q diag(Q)^{−1/2}`` start from half its
    smallest eigenvalue, then raise each ``d_l`` in turn by ``share / ((S − diag d)⁻¹)_ll`` —
    lowering one diagonal entry of a positive definite matrix by less than the inverse of the
    matching entry of its inverse keeps it positive definite — updating the inverse by
    Sherman–Morrison. A final eigenvalue check shrinks the result until ``S − diag d ⪰ 0``.
    """
    s = 1.0 / np.sqrt(np.diag(Q))
    S = s[:, None] * Q * s[None, :]
    t = float(np.linalg.eigvalsh(S)[0])
    if t <= 0:
        return np.zeros(len(Q))
    d = np.full(len(Q), 0.5 * t)
    Si = np.linalg.inv(S - np.diag(d))
    for _ in range(passes):
        for j in range(len(Q)):
            a = share / Si[j, j]
            col = Si[:, j].copy()
            Si += (a / (1.0 - a * col[j])) * np.outer(col, col)
            d[j] += a
    d *= 1 - 1e-9
    base = np.full(len(Q), 0.5 * t * (1 - 1e-9))
    for _ in range(60):
        if np.linalg.eigvalsh(S - np.diag(d))[0] >= 0:
            break
        d = base + 0.5 * (d - base)  # fall back towards the eigenvalue start
    else:
        d = np.zeros(len(Q))
    return d / (s * s)


def level_diagonals(R: np.ndarray):
    """Per level ``i = 2 … n``: centre update ``W_i`` and a diagonal ``0 ⪯ D_i ⪯ Q_i``, or ``None``.

    ``Q_i = R[:i, :i]ᵀ R[:i, :i]`` is the quadratic of the levels ``0 … i−1`` left free once level
    ``i`` is fixed (``i = n``: the root). ``W_i = −R[:i, :i]⁻¹ R[:i, i]`` moves their free centre
    when level ``i`` is fixed, ``c' = c[:i] + W_i (y_i − c_i)``; ``W_n = 0``. ``D_i`` from
    :func:`_max_diagonal`. ``None`` when some ``R_ii`` is zero (no free centre) or ``n < 3``.
    """
    n = R.shape[0]
    d = np.abs(np.diag(R))
    if n < 3 or d.min() <= 1e-12 * max(d.max(), 1e-300):
        return None
    A = R.T @ R
    W: list = [None] * (n + 1)
    D: list = [None] * (n + 1)
    for i in range(2, n + 1):
        W[i] = -solve_triangular(R[:i, :i], R[:i, i]) if i < n else np.zeros(n)
        D[i] = _max_diagonal(A[:i, :i])
    return W, D


class _Stop(Exception):
    """Raised inside the search when the time limit is reached."""

    def __init__(self, partial: float) -> None:
        super().__init__()
        self.partial = partial


def enumerate_levels(qp: HedgeQP, root, best_f: float, best_x, deadline: float):
    """Search below incumbent ``best_f`` (``inf`` if none) until done or ``deadline``.

    Returns ``(best_f, best_x, nodes, frontier)``: ``frontier`` is ``None`` when the search
    finished, else a lower bound on every point not yet excluded. ``best_x`` is in the original
    coordinates (``None`` if no feasible point is known).
    """
    n = qp.n
    perm = root.perm
    if root.X is None:  # levels are the original variables, permuted
        X = np.eye(n)[:, perm]
        Gl, hl = qp.G[:, perm], qp.h
    else:  # levels are lattice coordinates, x = X y
        X, Gl, hl = root.X, root.Gl, root.hl
    R = root.R
    Rd = [float(v) for v in np.diag(R)]
    R1 = [0.0] + [float(R[i - 1, i]) for i in range(1, n)]  # superdiagonal
    z = [float(v) for v in root.z]
    sl = [float(v) for v in root.slope]
    aw = [float(v) for v in root.absw]
    pm = [float(v) for v in root.psimin]
    lo = [int(v) for v in root.lo]
    hi = [int(v) for v in root.hi]
    Mp = qp.M @ X
    u = qp.u
    A = X.T @ qp.A @ X
    bp = X.T @ qp.b
    off = float(getattr(qp, "offset", 0.0))  # constant outside ‖Mx + u‖²
    # exact expansion of the true objective around the centre: with δ = y − z and g = A z + b,
    # f(y) = f(z) + 2gᵀδ + Σ_i (R_ii δ_i + t_i)², so a leaf is scored with scalars only
    zl = np.asarray(root.z, float)
    rz = Mp @ zl + u
    fz = float(rz @ rz) + off
    g2 = [2.0 * float(v) for v in (A @ zl + bp)]
    delta = np.zeros(n)
    xs = np.zeros(n)
    nodes = [0]
    state = {"f": best_f, "x": None if best_x is None else np.asarray(best_x, float)}

    # rows that no point of the box can break are left out of the search
    can_bind = np.maximum(Gl * root.lo, Gl * root.hi).sum(axis=1) > np.asarray(hl) + _TOL
    Gl, hl = Gl[can_bind], np.asarray(hl)[can_bind]
    g = Gl.shape[0]
    if g:
        Gp = Gl
        h = [float(v) for v in hl]
        low = np.minimum(Gp * root.lo, Gp * root.hi)  # cheapest contribution of each variable
        # minimum reachable row sums of the levels below i (not yet fixed when i is entered)
        rest = np.vstack([np.zeros(g), np.cumsum(low.T, axis=0)[:-1]])
        rows_of = [[(r, float(Gp[r, i]), float(rest[i, r])) for r in np.flatnonzero(Gp[:, i])]
                   for i in range(n)]
    else:
        rows_of = [[] for _ in range(n)]
    gs = [0.0] * g
    has_m = qp.margin_budget is not None and qp.margin is not None
    if has_m and root.X is not None:
        raise ValueError("lattice levels do not carry the margin budget")
    if has_m:
        mg = [float(v) for v in np.asarray(qp.margin, float)[perm]]
        dist0 = np.maximum(np.maximum(root.lo, -root.hi), 0.0) * np.asarray(qp.margin, float)[perm]
        mrest = [0.0] + [float(v) for v in np.cumsum(dist0)[:-1]]
        budget = float(qp.margin_budget)
        mtol = _TOL * (1 + budget)
    else:
        mg = [0.0] * n
    floor, ceil, inf = math.floor, math.ceil, math.inf
    sep = level_diagonals(R) if root.X is not None and n >= _SEP_MIN_N else None
    Wl, Dl = sep if sep is not None else (None, None)
    if sep is not None:
        # largest value the separable bound can take (each distance at most 1/2)
        capsep = [0.0 if d is None else 0.25 * float(d.sum()) for d in Dl]

    def sep_bound(k, c):
        """Separable bound Σ_l D_k,l (c_l − round c_l)² on the free levels 0 … k−1."""
        dd = c - np.rint(c)
        return float(Dl[k] @ (dd * dd))

    def unexplored(i, partial, cv, left, right, L, U, rd, tz, si, wi, cz):
        """Lower bound on the subtrees of level i's values not yet entered (left…L, right…U)."""
        def phi(v):
            q = rd * v + tz
            return q * q + si * v + wi * abs(v) + cz
        if cv is None:
            return partial + min(phi(left) if left >= L else inf, phi(right) if right <= U else inf)
        low = state["f"]  # values at or above the incumbent are excluded already
        for side in (range(left, L - 1, -1), range(right, U + 1)):
            for v in side:  # partial + φ(v) grows along each side (φ convex, walk outwards)
                p = partial + phi(v)
                if p >= low:
                    break
                p += sep_bound(i, cv[:i] + Wl[i] * (v - cv[i]))
                if p < low:
                    low = p
        return low

    def visit(i, partial, ms, qa, t, pcv, py):
        nodes[0] += 1
        if not nodes[0] & 1023 and time.perf_counter() > deadline:
            raise _Stop(partial + (0.0 if pcv is None else sep_bound(
                i + 1, pcv[:i + 1] + Wl[i + 1] * (py - pcv[i + 1]))))
        # range of x_i that can still meet every row and the margin budget
        L, U = lo[i], hi[i]
        rows = rows_of[i]
        for r, c, rr in rows:
            cap = h[r] - gs[r] - rr
            if c > 0:
                k = floor(cap / c + _TOL)
                if k < U:
                    U = k
            else:
                k = ceil(cap / c - _TOL)
                if k > L:
                    L = k
        mi = mg[i]
        if has_m:
            capm = budget - ms - mrest[i]
            if capm < -mtol:
                return
            if mi > 0:
                k = floor(capm / mi + _TOL)
                if k < U:
                    U = k
                if -k > L:
                    L = -k
        if L > U:
            return
        rd, zi, si, wi, pmi = Rd[i], z[i], sl[i], aw[i], pm[i]
        tz = t - rd * zi  # quadratic term is (rd*v + tz)^2
        cz = -si * zi - pmi

        # integer minimiser of the convex phi(v) = (rd v + tz)^2 + si v + wi |v| + cz on [L, U]
        if rd * rd > 1e-14:
            c0 = -tz / rd
            d2 = 2 * rd * rd
            cand = c0 - (si + wi) / d2
            if cand <= 0:
                cand = c0 - (si - wi) / d2
                if cand > 0:
                    cand = 0.0
        else:
            cand = 0.0 if wi >= abs(si) else (L if si > 0 else U)
        s = min(max(int(round(cand)), L), U)
        q = rd * s + tz
        ps = q * q + si * s + wi * abs(s) + cz
        while s > L:
            q = rd * (s - 1) + tz
            v = q * q + si * (s - 1) + wi * abs(s - 1) + cz
            if v >= ps:
                break
            s, ps = s - 1, v
        while s < U:
            q = rd * (s + 1) + tz
            v = q * q + si * (s + 1) + wi * abs(s + 1) + cz
            if v >= ps:
                break
            s, ps = s + 1, v
        best = state["f"]
        if partial + ps >= best:
            return
        cv = None
        if pcv is not None:
            # free centre of levels 0 … i once level i + 1 is fixed at py, and the separable
            # integrality bound Σ_l D_l (c_l − round c_l)² ≤ (y − c)ᵀQ(y − c) of those levels
            cv = pcv[:i + 1] + Wl[i + 1] * (py - pcv[i + 1])
            if partial + capsep[i + 1] >= best and partial + sep_bound(i + 1, cv) >= best:
                return
        if i == 0:
            # true f is the convex quadratic fz + qa + (rd v + tz)² + g2_0 (v − z_0) in y_0:
            # minimise it exactly on [L, U], then re-evaluate the winner from scratch
            g0 = g2[0]
            a0 = rd * rd
            if a0 > 0:
                v = min(max(int(round(-(tz * rd + 0.5 * g0) / a0)), L), U)
            else:
                v = L if rd * tz + 0.5 * g0 > 0 else U
            q = rd * v + tz
            if fz + qa + q * q + g0 * (v - zi) >= best + 1e-13 * (1.0 + abs(best)):
                return
            xs[0] = v
            r = Mp @ xs + u
            fv = float(r @ r) + off
            if fv < best:
                x_orig = X @ xs
                if qp.is_feasible(x_orig):
                    state["f"], state["x"] = fv, x_orig
            return
        g2i = g2[i]
        # the child's coupling t_{i−1} = Σ_{j≥i} R_{i−1,j} δ_j, linear in this level's value
        tb = float(R[i - 1, i + 1:] @ delta[i + 1:]) if i < n - 1 else 0.0
        rc = R1[i]
        left, right = s - 1, s + 1
        if left >= L:
            q = rd * left + tz
            pl = q * q + si * left + wi * abs(left) + cz
        else:
            pl = inf
        if right <= U:
            q = rd * right + tz
            pr = q * q + si * right + wi * abs(right) + cz
        else:
            pr = inf
        cur, pc = s, ps
        while True:
            v = partial + pc
            if v >= state["f"]:
                break
            dc = cur - zi
            tc = tb + rc * dc
            delta[i] = dc
            xs[i] = cur
            for r, c, _ in rows:
                gs[r] += c * cur
            q = rd * cur + tz
            try:
                visit(i - 1, v, ms + mi * abs(cur), qa + q * q + g2i * dc, tc,
                      cv if i > 2 else None, cur)
            except _Stop as stop:  # add the bound of this level's unexplored values
                stop.partial = min(stop.partial, unexplored(
                    i, partial, cv, left, right, L, U, rd, tz, si, wi, cz))
                raise
            for r, c, _ in rows:
                gs[r] -= c * cur
            if pl <= pr:
                if pl == inf:
                    break
                cur, pc = left, pl
                left -= 1
                if left >= L:
                    q = rd * left + tz
                    pl = q * q + si * left + wi * abs(left) + cz
                else:
                    pl = inf
            else:
                cur, pc = right, pr
                right += 1
                if right <= U:
                    q = rd * right + tz
                    pr = q * q + si * right + wi * abs(right) + cz
                else:
                    pr = inf

    frontier = None
    try:
        top = None
        if sep is not None:  # the root's free centre is z; a virtual level n fixed at z_n = 0
            top = np.append(np.asarray(root.z, float), 0.0)
        visit(n - 1, root.K, 0.0, 0.0, 0.0, top, 0.0)
    except _Stop as stop:
        frontier = stop.partial
    return state["f"], state["x"], nodes[0], frontier
