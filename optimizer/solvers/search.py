"""Depth-first Schnorr–Euchner enumeration over prepared levels, with a true frontier bound.

The levels come from :func:`optimizer.solvers.bounds.prepare_root` (levels are the contract counts,
permuted) or :func:`optimizer.solvers.lattice.lattice_root` (levels are LLL coordinates ``y`` with
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

On lattice levels a separable integrality bound on the free levels below a node is added
(:mod:`optimizer.solvers.levels`): a node is pruned when its partial sum plus that bound reaches
the incumbent.

Two engines run this search: the compiled twin ``optimizer/solvers/native/levels.c``
(:mod:`optimizer.solvers.native_search`, used when available) and the plain Python below, kept as
the reference that the tests compare it with — same arrays (:func:`prepare_levels`), same visiting
order, same node counts.

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

from ..problem.qp import HedgeQP
from .levels import level_diagonals
from .native_search import native_search, run_native

__all__ = ["enumerate_levels", "prepare_levels", "level_diagonals"]

_TOL = 1e-9
_SEP_MIN_N = 3  # separable integrality bound below a node from this many levels


class _Stop(Exception):
    """Raised inside the search when the time limit is reached."""

    def __init__(self, partial: float) -> None:
        super().__init__()
        self.partial = partial


def prepare_levels(qp: HedgeQP, root, *, node_bounds: bool | None = None,
                   best_f: float = math.inf) -> dict:
    """The arrays both searches (pure Python and compiled) run on, in level order.

    ``node_bounds`` switches the separable integrality bound on or off; by default it is on for
    lattice levels (``root.X`` set) of at least ``_SEP_MIN_N`` levels. Rows that no point of the box
    can break are left out, and so, with an incumbent ``best_f``, are rows that no point of the
    search ellipsoid can break: every point the search scores has ``(y − z)ᵀRᵀR(y − z) ≤ best_f −
    K``, on which row ``g`` is at most ``gᵀz + √((best_f − K) gᵀ(RᵀR)⁻¹g)``.
    """
    n = qp.n
    perm = root.perm
    if root.X is None:  # levels are the original variables, permuted: index, do not multiply
        X = np.eye(n)[:, perm]
        Gl, hl = qp.G[:, perm], qp.h
        Mp, A, bp = qp.M[:, perm], qp.A[np.ix_(perm, perm)], qp.b[perm]
    else:  # levels are lattice coordinates, x = X y
        X, Gl, hl = root.X, root.Gl, root.hl
        Mp, A, bp = qp.M @ X, X.T @ qp.A @ X, X.T @ qp.b
    R = np.ascontiguousarray(root.R, float)
    zl = np.asarray(root.z, float)
    off = float(getattr(qp, "offset", 0.0))  # constant outside ‖Mx + u‖²
    # exact expansion of the true objective around the centre: with δ = y − z and g = A z + b,
    # f(y) = f(z) + 2gᵀδ + Σ_i (R_ii δ_i + t_i)², so a leaf is scored with scalars only
    rz = Mp @ zl + qp.u
    # rows that no point of the box can break are left out of the search
    can_bind = np.maximum(Gl * root.lo, Gl * root.hi).sum(axis=1) > np.asarray(hl) + _TOL
    r2 = best_f - float(root.K)
    dR = np.abs(np.diag(R))
    if can_bind.any() and np.isfinite(r2) and r2 >= 0 and dR.min() > 1e-12 * max(dR.max(), 1e-300):
        V = np.linalg.solve(R.T, np.asarray(Gl, float).T)  # columns R⁻ᵀg: ‖·‖² = gᵀ(RᵀR)⁻¹g
        reach = Gl @ zl + np.sqrt(r2 * (V * V).sum(axis=0)) * (1 + 1e-9) + 1e-9
        can_bind &= ~(reach < np.asarray(hl) - _TOL * (1 + np.abs(np.asarray(hl))))
    Gl, hl = np.asarray(Gl[can_bind], float).reshape(-1, n), np.asarray(hl, float)[can_bind]
    g = Gl.shape[0]
    low = np.minimum(Gl * root.lo, Gl * root.hi)  # cheapest contribution of each variable
    # minimum reachable row sums of the levels below i (not yet fixed when i is entered)
    rest = (np.vstack([np.zeros(g), np.cumsum(low.T, axis=0)[:-1]]) if g
            else np.zeros((n, 0)))
    has_m = qp.margin_budget is not None and qp.margin is not None
    if has_m and root.X is not None:
        raise ValueError("lattice levels do not carry the margin budget")
    if has_m:
        mg = np.asarray(qp.margin, float)[perm]
        dist0 = np.maximum(np.maximum(root.lo, -root.hi), 0.0) * mg
        mrest = np.concatenate([[0.0], np.cumsum(dist0)[:-1]])
        budget = float(qp.margin_budget)
    else:
        mg, mrest, budget = np.zeros(n), np.zeros(n), 0.0
    if node_bounds is None:
        node_bounds = root.X is not None and n >= _SEP_MIN_N
    sep = level_diagonals(R) if node_bounds and n >= 3 else None
    W = D = capsep = None
    if sep is not None:
        Wl, Dl = sep
        W, D = np.zeros((n + 1, n)), np.zeros((n + 1, n))
        for k in range(2, n + 1):
            W[k, :k] = Wl[k][:k]
            D[k, :k] = Dl[k]
        # largest value the separable bound can take (each distance at most 1/2)
        capsep = 0.25 * D.sum(axis=1)
    return dict(n=n, g=g, X=X, R=R, z=zl, slope=np.asarray(root.slope, float),
                absw=np.asarray(root.absw, float), psimin=np.asarray(root.psimin, float),
                lo=np.asarray(root.lo).astype(np.int64), hi=np.asarray(root.hi).astype(np.int64),
                G=Gl, h=hl, rest=rest, has_m=has_m, mg=mg, mrest=mrest, budget=budget,
                mtol=_TOL * (1 + budget), Mp=Mp, u=qp.u, off=off, fz=float(rz @ rz) + off,
                g2=2.0 * (A @ zl + bp), W=W, D=D, capsep=capsep, K=float(root.K))


def enumerate_levels(qp: HedgeQP, root, best_f: float, best_x, deadline: float, *,
                     engine: str | None = None, node_bounds: bool | None = None):
    """Search below incumbent ``best_f`` (``inf`` if none) until done or ``deadline``.

    Returns ``(best_f, best_x, nodes, frontier)``: ``frontier`` is ``None`` when the search
    finished, else a lower bound on every point not yet excluded. ``best_x`` is in the original
    coordinates (``None`` if no feasible point is known). ``engine`` is ``"native"`` (the
    compiled twin, :mod:`optimizer.solvers.native_search`), ``"python"`` or ``None`` (native when
    available).
    """
    prep = prepare_levels(qp, root, node_bounds=node_bounds, best_f=best_f)
    use_native = engine == "native" or (engine is None and native_search())
    x0 = None if best_x is None else np.asarray(best_x, float)
    if use_native:
        f, y, nodes, frontier = run_native(prep, best_f, deadline - time.perf_counter())
        if y is None:
            return f, x0, nodes, frontier
        x = prep["X"] @ y
        if not qp.is_feasible(x):  # cannot happen by construction; never trust it blindly
            raise RuntimeError("the compiled search returned a point that breaks a limit")
        return f, x, nodes, frontier
    return _search_python(qp, prep, best_f, x0, deadline)


def _search_python(qp: HedgeQP, prep: dict, best_f: float, best_x, deadline: float):
    """The plain search (reference for the compiled one; same order, bounds and results)."""
    n, g = prep["n"], prep["g"]
    X, R = prep["X"], prep["R"]
    Rd = [float(v) for v in np.diag(R)]
    R1 = [0.0] + [float(R[i - 1, i]) for i in range(1, n)]  # superdiagonal
    z = [float(v) for v in prep["z"]]
    sl = [float(v) for v in prep["slope"]]
    aw = [float(v) for v in prep["absw"]]
    pm = [float(v) for v in prep["psimin"]]
    lo = [int(v) for v in prep["lo"]]
    hi = [int(v) for v in prep["hi"]]
    Mp, u, off, fz = prep["Mp"], prep["u"], prep["off"], prep["fz"]
    g2 = [float(v) for v in prep["g2"]]
    delta = np.zeros(n)
    xs = np.zeros(n)
    nodes = [0]
    state = {"f": best_f, "x": best_x}
    Gp = prep["G"]
    h = [float(v) for v in prep["h"]]
    rows_of = [[(r, float(Gp[r, i]), float(prep["rest"][i, r])) for r in np.flatnonzero(Gp[:, i])]
               for i in range(n)]
    gs = [0.0] * g
    has_m = prep["has_m"]
    mg = [float(v) for v in prep["mg"]]
    mrest = [float(v) for v in prep["mrest"]]
    budget, mtol = prep["budget"], prep["mtol"]
    floor, ceil, inf = math.floor, math.ceil, math.inf
    W, D, capsep = prep["W"], prep["D"], prep["capsep"]

    def below(k, c):
        """Separable bound Σ_l D_k,l (c_l − round c_l)² on the free levels 0 … k−1."""
        dd = c - np.rint(c)
        return float(D[k, :k] @ (dd * dd))

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
                p += below(i, cv[:i] + W[i, :i] * (v - cv[i]))
                if p < low:
                    low = p
        return low

    def centre(i, pcv, py):
        """Free centre of levels 0 … i once level i + 1 is fixed at ``py``."""
        return pcv[:i + 1] + W[i + 1, :i + 1] * (py - pcv[i + 1])

    def visit(i, partial, ms, qa, t, pcv, py):
        nodes[0] += 1
        if not nodes[0] & 1023 and time.perf_counter() > deadline:
            raise _Stop(partial + (0.0 if pcv is None else below(i + 1, centre(i, pcv, py))))
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
            cv = centre(i, pcv, py)
            if partial + capsep[i + 1] >= best and partial + below(i + 1, cv) >= best:
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
        pass_cv = cv is not None and i > 2
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
                      cv if pass_cv else None, cur)
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
        if W is not None:  # the root's free centre is z; a virtual level n fixed at z_n = 0
            top = np.append(prep["z"], 0.0)
        visit(n - 1, prep["K"], 0.0, 0.0, 0.0, top, 0.0)
    except _Stop as stop:
        frontier = stop.partial
    return state["f"], state["x"], nodes[0], frontier
