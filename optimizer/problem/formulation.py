"""The hedge problem as a cvxpy problem, built once with Parameters and re-solved fast.

The problem of :mod:`optimizer.problem.qp` is written in disciplined parametrized programming
(DPP) form::

    minimise    ‖M n + u‖²
    subject to  n_j ≥ lo_j        (finite lower bounds only)
                n_j ≤ hi_j        (finite upper bounds only)
                G n ≤ h           (group limits)
                marginᵀ t ≤ B,  −t ≤ n ≤ t   (margin budget on |n|)

``M``, ``u``, the finite bounds, ``G``, ``h``, the margins and ``B`` are Parameters, so that a sweep
over limits, margins or re-estimated covariances re-uses the canonicalised problem. Which bounds are
finite, the sizes and whether a margin budget exists form the *structure*; :func:`formulation_for`
caches one problem per structure.

References
----------
Agrawal, Barratt, Boyd, Diamond & Verschueren (2019), "Differentiable convex optimization layers",
NeurIPS (the DPP rule set used by cvxpy Parameters).
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import cvxpy as cp
import numpy as np

from .qp import HedgeQP

SOLVED = ("optimal", "optimal_inaccurate")


@dataclass(frozen=True)
class Structure:
    """What fixes the shape of the cvxpy problem (hashable cache key)."""

    k: int
    n: int
    finite_lo: tuple[bool, ...]
    finite_hi: tuple[bool, ...]
    g: int
    has_margin: bool
    integer: bool

    @classmethod
    def of(cls, qp: HedgeQP, integer: bool = False) -> Structure:
        has_margin = qp.margin_budget is not None and qp.margin is not None
        return cls(
            k=qp.M.shape[0],
            n=qp.n,
            finite_lo=tuple(bool(v) for v in np.isfinite(qp.lo)),
            finite_hi=tuple(bool(v) for v in np.isfinite(qp.hi)),
            g=qp.G.shape[0],
            has_margin=has_margin,
            integer=integer,
        )


class SolverFailure(RuntimeError):
    """A solver failed (an error, not an answer): no hedge is reported, none is certified."""


@dataclass(frozen=True)
class FormulationResult:
    """Solution of one solve.

    ``dual_lo``/``dual_hi`` are per instrument (zero where the bound is infinite); all duals are
    the sensitivity of the normalised objective to the limit (objective falls by ``dual`` per unit
    the limit is relaxed). They are ``None`` for integer solves.
    """

    status: str
    x: np.ndarray | None
    objective: float | None
    dual_lo: np.ndarray | None = None
    dual_hi: np.ndarray | None = None
    dual_rows: np.ndarray | None = None
    dual_margin: float | None = None
    solver: str = ""
    dual_cost: float | None = None  # multiplier of the cost budget (problem.cost_formulation)


class HedgeFormulation:
    """One parametrised cvxpy problem for a given :class:`Structure`."""

    def __init__(self, s: Structure) -> None:
        self.structure = s
        self.x = cp.Variable(s.n, integer=s.integer, name="contracts")
        self.M = cp.Parameter((s.k, s.n), name="M")
        self.u = cp.Parameter(s.k, name="u")
        self._ilo = np.flatnonzero(s.finite_lo)
        self._ihi = np.flatnonzero(s.finite_hi)
        self.lo = cp.Parameter(len(self._ilo), name="lo")
        self.hi = cp.Parameter(len(self._ihi), name="hi")
        cons: list[cp.Constraint] = []
        self.c_lo = self.c_hi = self.c_rows = self.c_margin = None
        if len(self._ilo):
            self.c_lo = self.x[self._ilo] >= self.lo
            cons.append(self.c_lo)
        if len(self._ihi):
            self.c_hi = self.x[self._ihi] <= self.hi
            cons.append(self.c_hi)
        if s.g:
            self.G = cp.Parameter((s.g, s.n), name="G")
            self.h = cp.Parameter(s.g, name="h")
            self.c_rows = self.G @ self.x <= self.h
            cons.append(self.c_rows)
        if s.has_margin:
            self.m = cp.Parameter(s.n, nonneg=True, name="margin")
            self.B = cp.Parameter(nonneg=True, name="budget")
            t = cp.Variable(s.n, name="abs_contracts")
            self.c_margin = self.m @ t <= self.B
            cons += [t >= self.x, t >= -self.x, self.c_margin]
        self.problem = cp.Problem(cp.Minimize(cp.sum_squares(self.M @ self.x + self.u)), cons)

    def load(self, qp: HedgeQP) -> None:
        """Copy the numbers of ``qp`` into the Parameters."""
        self.M.value = qp.M
        self.u.value = qp.u
        if len(self._ilo):
            self.lo.value = qp.lo[self._ilo]
        if len(self._ihi):
            self.hi.value = qp.hi[self._ihi]
        if self.structure.g:
            self.G.value = qp.G
            self.h.value = qp.h
        if self.structure.has_margin:
            self.m.value = qp.margin
            self.B.value = float(qp.margin_budget)

    def solve(
        self,
        qp: HedgeQP,
        *,
        solver: str | None = None,
        time_limit: float | None = None,
        start: np.ndarray | None = None,
    ) -> FormulationResult:
        """Solve for the numbers of ``qp``; integer structures use SCIP."""
        self.load(qp)
        kwargs: dict = {}
        if self.structure.integer:
            solver = solver or "SCIP"
            # SCIP would catch Ctrl-C itself, stop and return as if done: the interrupt would be
            # lost and the run go on; left to Python, it stops the run once SCIP returns
            kwargs["scip_params"] = {"misc/catchctrlc": False}
            if time_limit is not None:
                kwargs["scip_params"]["limits/time"] = float(time_limit)
            if start is not None:
                self.x.value = np.asarray(start, dtype=float)
                kwargs["warm_start"] = True
        else:
            solver = solver or "CLARABEL"
            if solver == "CLARABEL":
                # tight tolerances: the relaxation is reported as a bound on whole contracts
                kwargs.update(tol_gap_abs=1e-10, tol_gap_rel=1e-10, tol_feas=1e-10)
        try:
            self.problem.solve(solver=solver, **kwargs)
        except cp.error.SolverError as exc:
            return FormulationResult(status=f"solver_error: {exc}", x=None, objective=None,
                                     solver=solver)
        status = self.problem.status
        if status not in SOLVED or self.x.value is None:
            return FormulationResult(status=status, x=None, objective=None, solver=solver)
        x = np.asarray(self.x.value, dtype=float).copy()
        if self.structure.integer:
            x = np.round(x)
            return FormulationResult(status=status, x=x, objective=qp.value(x), solver=solver)
        n = self.structure.n
        dual_lo = np.zeros(n)
        dual_hi = np.zeros(n)
        if self.c_lo is not None:
            dual_lo[self._ilo] = np.maximum(np.asarray(self.c_lo.dual_value, dtype=float), 0.0)
        if self.c_hi is not None:
            dual_hi[self._ihi] = np.maximum(np.asarray(self.c_hi.dual_value, dtype=float), 0.0)
        dual_rows = (np.maximum(np.asarray(self.c_rows.dual_value, dtype=float), 0.0)
                     if self.c_rows is not None else np.zeros(0))
        dual_margin = (max(float(self.c_margin.dual_value), 0.0)
                       if self.c_margin is not None else None)
        return FormulationResult(
            status=status, x=x, objective=qp.value(x), dual_lo=dual_lo, dual_hi=dual_hi,
            dual_rows=dual_rows, dual_margin=dual_margin, solver=solver,
        )


@lru_cache(maxsize=64)
def _cached(structure: Structure) -> HedgeFormulation:
    return HedgeFormulation(structure)


def formulation_for(qp: HedgeQP, *, integer: bool = False, reuse: bool = True) -> HedgeFormulation:
    """The cvxpy problem for ``qp``'s structure, cached (Parameters re-used) unless not reuse."""
    s = Structure.of(qp, integer=integer)
    return _cached(s) if reuse else HedgeFormulation(s)


def solve_relaxed(qp: HedgeQP, *, reuse: bool = True) -> FormulationResult:
    """Continuous optimum of ``qp`` with duals: the proven lower bound for any integer answer."""
    if qp.cost is not None:
        from .cost_formulation import solve_relaxed_costs

        return solve_relaxed_costs(qp)
    return formulation_for(qp, integer=False, reuse=reuse).solve(qp)


def solve_scip(
    qp: HedgeQP,
    *,
    time_limit: float | None = None,
    start: np.ndarray | None = None,
    reuse: bool = True,
) -> FormulationResult:
    """Integer optimum of ``qp`` through cvxpy's mixed-integer interface with SCIP."""
    if qp.cost is not None:
        from .cost_formulation import solve_scip_costs

        return solve_scip_costs(qp, time_limit=time_limit)
    return formulation_for(qp, integer=True, reuse=reuse).solve(
        qp, time_limit=time_limit, start=start
    )
