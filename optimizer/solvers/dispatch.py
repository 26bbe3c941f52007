"""Choose and run a solution method for a normalised hedge problem.

``exact``
    whole contracts, proven optimal (or time-limited with a true gap) by
    :func:`optimizer.solvers.exact.solve_exact`, warm-started from the best rounded point;
``round``
    the continuous optimum rounded to whole contracts and repaired to meet the limits, for
    comparison (it can lose much of the hedge when counts are small);
``continuous``
    the fractional optimum, for analysis.

Every method also reports the continuous relaxation, which bounds any whole-contract answer from
below, so the cost of whole contracts is always visible.
"""

from __future__ import annotations

import time
from dataclasses import dataclass, replace

import numpy as np

from basiswise.data_adapters.choices import METHODS as _METHODS

from ..problem.formulation import FormulationResult, SolverFailure, solve_relaxed
from ..problem.qp import HedgeQP

METHODS = _METHODS  # defined once, in data_adapters.choices
__all__ = ["METHODS", "HedgeSolution", "SolverFailure", "solve_qp"]


@dataclass(frozen=True)
class HedgeSolution:
    """Positions chosen by one method, with the relaxation that bounds them.

    ``objective`` and ``bound`` are normalised hedged variances (fraction of unhedged).
    ``status`` is ``certified`` / ``time-limited`` (exact), ``rounded`` / ``rounded-infeasible``
    (round), ``optimal`` (continuous) or ``infeasible``.
    """

    method: str
    status: str
    x: np.ndarray | None
    objective: float | None
    bound: float | None
    relaxed: FormulationResult
    seconds: float
    detail: str = ""

    @property
    def ok(self) -> bool:
        return self.x is not None


def _infeasible(method: str, relaxed: FormulationResult, t0: float) -> HedgeSolution:
    return HedgeSolution(method, "infeasible", None, None, None, relaxed, time.perf_counter() - t0,
                         detail=f"the limits admit no position (solver status {relaxed.status})")


def solve_qp(qp: HedgeQP, method: str = "exact", *, time_limit: float = 30.0,
             reuse: bool = True, start: np.ndarray | None = None) -> HedgeSolution:
    """Solve ``qp`` with ``method`` (one of :data:`METHODS`).

    ``start`` (whole contracts, e.g. the positions held now) may speed up ``exact``; it is used
    only if it meets the limits, and never changes the answer.
    """
    if method not in METHODS:
        raise ValueError(f"unknown method {method!r}; valid: {', '.join(METHODS)}")
    t0 = time.perf_counter()
    relaxed = solve_relaxed(qp, reuse=reuse)
    if relaxed.status.startswith("solver_error"):
        raise SolverFailure(f"the continuous solver ({relaxed.solver}) failed: "
                            f"{relaxed.status.removeprefix('solver_error: ')[:150]}; no hedge "
                            "is reported")
    if relaxed.x is None:
        return _infeasible(method, relaxed, t0)
    if method == "continuous":
        return HedgeSolution(method, "optimal", relaxed.x, relaxed.objective, relaxed.objective,
                             relaxed, time.perf_counter() - t0)
    from .rounding import best_rounded

    if method == "round":
        x = best_rounded(qp, relaxed.x)
        if x is None:
            return HedgeSolution(method, "rounded-infeasible", None, None, relaxed.objective,
                                 relaxed, time.perf_counter() - t0,
                                 detail="no rounding of the continuous optimum meets the limits")
        return HedgeSolution(method, "rounded", x, qp.value(x), relaxed.objective, relaxed,
                             time.perf_counter() - t0)
    from .exact import solve_exact

    # the integer search sees the reachable part only; the constant basis-risk share is added back
    r = qp.offset
    core = replace(qp, offset=0.0)
    res = solve_exact(core, time_limit=time_limit,
                      relaxed=replace(relaxed, objective=relaxed.objective - r), start=start)
    if res.status == "infeasible":
        return _infeasible(method, relaxed, t0)
    return HedgeSolution(method, res.status, res.x, qp.value(res.x), max(res.bound + r, 0.0),
                         relaxed,
                         time.perf_counter() - t0,
                         detail=f"{res.method}, {res.nodes} nodes, gap {res.gap:.2e}")
