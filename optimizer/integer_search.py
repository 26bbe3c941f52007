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
is the smallest partial sum of the unexplored subtrees (the next value at each level of the
current path, and the node being entered).

References
----------
Agrell, Eriksson, Vardy & Zeger (2002), "Closest point search in lattices", IEEE Trans. Inf.
Theory 48(8), 2201–2214.
Schnorr & Euchner (1994), Math. Programming 66, 181–199.
"""

from __future__ import annotations

import math
import time

import numpy as np

from .qp import HedgeQP

__all__ = ["enumerate_levels"]

_TOL = 1e-9


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
    pending = [math.inf] * n
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

    def visit(i, partial, ms, qa, t):
        nodes[0] += 1
        if not nodes[0] & 1023 and time.perf_counter() > deadline:
            raise _Stop(partial)
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
            pending[i] = partial + (pl if pl < pr else pr)
            delta[i] = dc
            xs[i] = cur
            for r, c, _ in rows:
                gs[r] += c * cur
            q = rd * cur + tz
            visit(i - 1, v, ms + mi * abs(cur), qa + q * q + g2i * dc, tc)
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
        pending[i] = inf

    frontier = None
    try:
        visit(n - 1, root.K, 0.0, 0.0, 0.0)
    except _Stop as stop:
        frontier = min([stop.partial] + pending)
    return state["f"], state["x"], nodes[0], frontier
