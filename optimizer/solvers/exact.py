"""Exact whole-contract hedge: depth-first enumeration with a certified lower bound.

Minimise ``f(x) = ‖Mx + u‖²`` over integer ``x`` with ``lo ≤ x ≤ hi``, ``Gx ≤ h`` and
``Σ_j m_j |x_j| ≤ B`` (:class:`optimizer.problem.qp.HedgeQP`).

Method (box-constrained integer least squares, Schnorr–Euchner order). The root
(:mod:`optimizer.solvers.bounds`) gives, for every feasible ``x``,

    f(x) ≥ K + Σ_i φ_i(x_i; x_{i+1}, …, x_{n−1}),
    φ_i = (R_ii δ_i + Σ_{j>i} R_ij δ_j)² + ψ_i(x_i) − ψ̲_i ≥ 0,   δ = x − z,

with ``K`` the Lagrangian bound of the continuous relaxation. Variables are fixed from level
``n−1`` down to ``0``; at a node the partial sum ``K + Σ_{i≥k} φ_i`` bounds every completion.
At each level ``φ_i`` is a convex function of ``x_i`` alone, so its integer values are visited in
increasing order by a two-pointer walk outwards from its integer minimiser (zig-zag); the first
value whose partial sum reaches the incumbent ends the level. Before a level is entered its range
is cut to the values that can still meet every row of ``G`` and the margin budget given the
cheapest reachable contribution of the variables not yet fixed. At the last level the true
``f`` (a convex quadratic in ``x_0``) is minimised directly.

Steps: (1) the relaxation (:func:`optimizer.problem.formulation.solve_relaxed`) is refined by an
active-set KKT solve (:func:`optimizer.solvers.bounds.polish`), whose multipliers give the tighter
root bound (the solver's own objective can be off by ~1e-7 on curve books); books of up to 24
instruments without a margin budget, when no relaxation is passed in, first try that active-set
solve alone (:func:`optimizer.solvers.bounds.quick_relaxation`, accepted only when its KKT
conditions check) and skip the conic solver; (2) an incumbent from
:func:`optimizer.solvers.rounding.best_rounded` (books of up to 12 instruments with finite boxes,
when the search is compiled: naive rounding if feasible, else the search's own first leaf), or the
caller's ``start`` when it is feasible and better; (3) enumeration over the contract counts
(:mod:`optimizer.solvers.search`, compiled when available); (4) for books of 3 or more instruments
without a margin budget that are not finished after 1 % of the time limit (at least 0.1 s), the same
enumeration in LLL-reduced coordinates (:mod:`optimizer.solvers.lattice`), which copes with months
that move together. When time runs out the bound reported is the best of the root bound and the
frontier bounds of the phases (each the smallest partial sum of its unexplored subtrees, capped by
the incumbent). Problems whose boxes cannot be made finite go to SCIP
(:func:`optimizer.problem.formulation.solve_scip`, warm-started); its answer is then reported
against the Lagrangian bound only, so it is never called certified unless that bound meets it.

References
----------
Agrell, Eriksson, Vardy & Zeger (2002), "Closest point search in lattices", IEEE Trans. Inf.
Theory 48(8), 2201–2214.
Chang & Han (2008), "Solving box-constrained integer least squares problems", IEEE Trans. Wireless
Communications 7(1), 277–287 (from memory).
Schnorr & Euchner (1994), Math. Programming 66, 181–199.
Lenstra, Lenstra & Lovász (1982), Math. Ann. 261, 515–534.
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass

import numpy as np

from ..problem.formulation import SolverFailure, solve_relaxed, solve_scip
from ..problem.qp import HedgeQP
from .bounds import lagrangian_terms, polish, prepare_root, quick_relaxation
from .lattice import lattice_root
from .native_search import native_search
from .rounding import best_rounded, integer_box, naive_round
from .search import enumerate_levels

__all__ = ["IntegerResult", "solve_exact"]

_TOL = 1e-9
_ROUNDOFF = 1e-12  # allowance for floating-point error in the partial sums
_LATTICE_MIN_N = 3  # from this size the lattice phase takes over when the first is slow
_SMALL_N = 12  # up to this size, with finite boxes, the search starts without repaired rounding
_QUICK_MAX_N = 24  # up to this size the relaxation is first tried by an active-set solve
_PHASE1_SHARE, _PHASE1_MIN = 0.01, 0.1  # time of the first phase: share of the limit, seconds


@dataclass(frozen=True)
class IntegerResult:
    """Outcome of :func:`solve_exact`.

    Attributes
    ----------
    x : ndarray
        Integer-valued positions (contracts). For ``"infeasible"`` the clipped rounding of the
        relaxed point, which breaks a limit.
    objective : float
        ``f(x)``, normalised hedged variance (includes the constant ``c``).
    bound : float
        Proven lower bound on the integer optimum (``inf`` when proven infeasible). It is computed
        from this module's own Lagrangian and search, so it can sit slightly below the objective
        the continuous solver reports when that solver is inaccurate.
    status : str
        ``"certified"`` (``objective − bound ≤ tol``), ``"time-limited"`` or ``"infeasible"``.
    gap : float
        ``objective − bound`` (0 when infeasible).
    nodes : int
        Search nodes visited.
    seconds : float
        Wall time of the call.
    method : str
        ``"box-enumeration"``, ``"lattice-enumeration"`` (the LLL phase ran) or
        ``"scip-fallback"``.
    """

    x: np.ndarray
    objective: float
    bound: float
    status: str
    gap: float
    nodes: int
    seconds: float
    method: str


def _result(qp, x, bound, nodes, t0, method, tol) -> IntegerResult:
    obj = qp.value(x)
    bound = min(bound, obj)
    gap = max(obj - bound, 0.0)
    status = "certified" if gap <= tol else "time-limited"
    return IntegerResult(x=np.asarray(x, float), objective=obj, bound=float(bound), status=status,
                         gap=float(gap), nodes=int(nodes), seconds=time.perf_counter() - t0,
                         method=method)


def _infeasible(qp, z, nodes, t0, method) -> IntegerResult:
    x = naive_round(qp, np.nan_to_num(z, nan=0.0, posinf=0.0, neginf=0.0))
    lo, hi = integer_box(qp)
    x = np.where(np.isfinite(x), x, np.where(np.isfinite(lo), lo, np.where(np.isfinite(hi), hi, 0)))
    return IntegerResult(x=x, objective=qp.value(x), bound=math.inf, status="infeasible", gap=0.0,
                         nodes=int(nodes), seconds=time.perf_counter() - t0, method=method)


def solve_exact(qp: HedgeQP, *, time_limit: float = 30.0, relaxed=None, tol: float = _TOL,
                start: np.ndarray | None = None) -> IntegerResult:
    """Whole-contract minimum-variance hedge with a proven lower bound.

    Parameters
    ----------
    qp : HedgeQP
        The normalised problem.
    time_limit : float
        Wall-clock seconds for the whole call (relaxation included when it is solved here).
    relaxed : FormulationResult, optional
        A solved continuous relaxation (``solve_relaxed(qp)``) to re-use: its point and duals set
        the root bound. Any values give a valid bound; accurate ones give a tight one.
    tol : float
        Certification tolerance on ``objective − bound`` in normalised units.
    start : ndarray, optional
        A candidate incumbent (for instance the previous rebalance's positions). It is used only
        when it is whole, finite, feasible and better than the solver's own rounded start; it can
        speed the search up but never changes the answer's optimality.

    Returns
    -------
    IntegerResult
        ``status`` is ``"certified"`` only when the search finished (the optimum is proven up to
        ``tol`` and floating-point round-off of order 1e-12).

    Notes
    -----
    The math and the search are described in the module docstring and in
    :mod:`optimizer.solvers.bounds`.

    References
    ----------
    Agrell, Eriksson, Vardy & Zeger (2002), IEEE Trans. Inf. Theory 48(8); Chang & Han (2008),
    IEEE Trans. Wireless Communications 7(1) (from memory).
    """
    t0 = time.perf_counter()
    deadline = t0 + float(time_limit)
    lo, hi = integer_box(qp)
    if np.any(lo > hi):
        return _infeasible(qp, np.zeros(qp.n), 0, t0, "box-enumeration")
    quick = None
    if relaxed is None and qp.n <= _QUICK_MAX_N:
        quick = quick_relaxation(qp)  # small books: skip the conic solver when KKT is proven
    if quick is not None:
        z, lam, mu = quick.x, quick.dual_rows, None
    else:
        if relaxed is None:
            relaxed = solve_relaxed(qp)
        if relaxed.x is not None and np.all(np.isfinite(relaxed.x)):
            z = np.asarray(relaxed.x, float)
            lam, mu = relaxed.dual_rows, relaxed.dual_margin
        else:
            # no relaxed point: any point in the box with zero multipliers still gives a valid
            # bound
            z = np.minimum(np.maximum(0.0, lo), hi)
            lam, mu = None, None
    if lam is not None and len(lam) != qp.G.shape[0]:
        lam = None
    if qp.n <= _SMALL_N and native_search() and np.all(np.isfinite(lo)) and np.all(np.isfinite(hi)):
        # small finite books: the compiled search finds the optimum in microseconds, so the
        # repaired rounding (about 0.3 ms) is not worth its time; the search starts from naive
        # rounding when that is feasible, else from its own first leaf
        inc = None
    else:
        inc = best_rounded(qp, z)
    cand = naive_round(qp, z)
    if np.all(np.isfinite(cand)) and qp.is_feasible(cand) and (
            inc is None or qp.value(cand) < qp.value(inc)):
        inc = cand
    cand = _usable_start(qp, start)
    if cand is not None and (inc is None or qp.value(cand) < qp.value(inc)):
        inc = cand
    f_inc = qp.value(inc) if inc is not None else math.inf
    mu_cost = getattr(relaxed, "dual_cost", None)  # cost budget's multiplier (trading cost)
    root = prepare_root(qp, z, lam, mu, lo, hi, f_inc, mu_cost)
    kkt = quick if quick is not None else polish(qp, relaxed)
    if kkt is not None and quick is None:  # keep the multipliers of the higher (tighter) bound
        root2 = prepare_root(qp, kkt.x, kkt.dual_rows, kkt.dual_margin, lo, hi, f_inc)
        if root2 is not None and (root is None or root2.K > root.K):
            root, z, lam, mu = root2, kkt.x, kkt.dual_rows, kkt.dual_margin
    if root is None:
        return _scip_fallback(qp, z, lam, mu, lo, hi, inc, deadline, t0, tol)
    if root.K >= f_inc:  # the rounded point already meets the bound
        return _result(qp, inc, root.K, 1, t0, "box-enumeration", tol)
    # phase 1: enumeration over the contract counts themselves, for a share of the time when the
    # lattice phase can take over
    lat_ok = kkt is not None and qp.n >= _LATTICE_MIN_N
    phase1 = deadline if not lat_ok else min(deadline, time.perf_counter() + max(
        _PHASE1_SHARE * float(time_limit), _PHASE1_MIN))
    best_f, best_x, nodes, frontier = enumerate_levels(qp, root, f_inc, inc, phase1)
    method = "box-enumeration"
    bound = root.K
    if frontier is not None and best_x is not None and lat_ok and time.perf_counter() < deadline:
        # phase 2: LLL-reduced coordinates; phase 1's frontier stays a valid bound
        bound = max(bound, min(frontier, best_f))
        box_lo, box_hi = np.empty(qp.n), np.empty(qp.n)
        box_lo[root.perm], box_hi[root.perm] = root.lo, root.hi
        lroot = lattice_root(qp, kkt, box_lo, box_hi, best_f)
        if lroot is not None:
            method = "lattice-enumeration"
            best_f, best_x, n2, frontier = enumerate_levels(qp, lroot, best_f, best_x, deadline)
            nodes += n2
            if frontier is not None:
                bound = max(bound, lroot.K, min(frontier, best_f))
    if best_x is None:
        best_x = inc
    if frontier is None:  # search complete
        if best_x is None:
            return _infeasible(qp, z, nodes, t0, method)
        bound = max(bound, best_f - _ROUNDOFF * (1.0 + abs(best_f)))
        return _result(qp, best_x, bound, nodes, t0, method, tol)
    if best_x is None:  # time ran out before any feasible point was seen
        return _scip_fallback(qp, z, lam, mu, lo, hi, None, deadline, t0, tol, nodes=nodes,
                              bound=frontier)
    bound = max(bound, min(frontier, best_f))
    return _result(qp, best_x, bound, nodes, t0, method, tol)


def _usable_start(qp: HedgeQP, start) -> np.ndarray | None:
    """``start`` as a float array when it is a whole, finite, feasible point, else ``None``."""
    if start is None:
        return None
    x = np.asarray(start, dtype=float).reshape(-1)
    if x.shape != (qp.n,) or not np.all(np.isfinite(x)) or not np.array_equal(x, np.round(x)):
        return None
    return x.copy() if qp.is_feasible(x) else None


def _scip_fallback(qp, z, lam, mu, lo, hi, inc, deadline, t0, tol, nodes=0, bound=None):
    """SCIP with the incumbent as start; bound from the Lagrangian (or the search frontier)."""
    K, *_ = lagrangian_terms(qp, z, lam, mu, lo, hi)
    if bound is not None:
        K = max(K, bound)
    remaining = max(deadline - time.perf_counter(), 1.0)
    res = solve_scip(qp, time_limit=remaining, start=inc)
    x = inc
    if res.x is not None and qp.is_feasible(res.x) and (x is None or qp.value(res.x) < qp.value(x)):
        x = res.x
    if x is None:
        if res.status in ("infeasible", "infeasible_inaccurate"):
            return _infeasible(qp, z, nodes, t0, "scip-fallback")
        x = naive_round(qp, z)
        x = np.where(np.isfinite(x), x, 0.0)
        if not qp.is_feasible(x):  # no point within the limits to report: an error, not an answer
            raise SolverFailure(f"the whole-contract search found no position within the limits "
                                f"in time and SCIP failed ({res.status}); no hedge is reported")
        obj = qp.value(x)
        return IntegerResult(x=x, objective=obj, bound=float(min(K, obj)) if np.isfinite(K)
                             else 0.0, status="time-limited", gap=float(obj - min(K, obj))
                             if np.isfinite(K) else obj, nodes=nodes,
                             seconds=time.perf_counter() - t0, method="scip-fallback")
    if not np.isfinite(K):
        K = 0.0  # f is a sum of squares
    return _result(qp, x, max(K, 0.0), nodes, t0, "scip-fallback", tol)
