"""Trading-cost arrays of the whole-contract search (one table of cost values per level).

The cost of a line is a convex function of its own position only, so on the levels of
:mod:`optimizer.integer_search` (the contract counts, permuted) each level ``i`` gets a table of
``cost_i(v)`` for the whole values ``v = lo_i … hi_i`` of its finite box. The search adds
``w · cost_i(v)`` to ``φ_i`` (``w`` = :attr:`RootData.cw`, the same weight the root bound used
for ``ψ̲_i``), adds ``cost`` to a leaf's objective when the cost is priced in, cuts each level's
range to the values that keep the cost budget given the cheapest cost of the levels below, and
steps over the values a minimum trade size forbids (``0 < |v − current| < m``). Lattice levels
mix contract counts and do not carry costs.
"""

from __future__ import annotations

import numpy as np

__all__ = ["cost_levels", "NO_COST"]

_TOL = 1e-9

NO_COST = dict(has_c=False, ctab=np.zeros(1), coff=np.zeros(1, dtype=np.int64), cw=0.0, ow=0.0,
               has_cb=False, cbudget=0.0, crest=np.zeros(1), ctol=0.0,
               c0=np.zeros(1, dtype=np.int64), mt=np.ones(1, dtype=np.int64))


def cost_levels(qp, root, perm: np.ndarray) -> dict:
    """The cost arrays of one search, in level order (``NO_COST`` without trading cost)."""
    ct = getattr(qp, "cost", None)
    if ct is None:
        return dict(NO_COST)
    if root.X is not None:
        raise ValueError("lattice levels do not carry trading costs")
    n = qp.n
    lo = np.asarray(root.lo).astype(np.int64)
    hi = np.asarray(root.hi).astype(np.int64)
    tabs, offs, mins = [], np.zeros(n, dtype=np.int64), np.zeros(n)
    at = 0
    for i in range(n):
        tab = ct.table(int(perm[i]), int(lo[i]), int(hi[i]))
        tabs.append(tab)
        offs[i] = at
        at += len(tab)
        mins[i] = float(tab.min()) if len(tab) else 0.0
    has_cb = ct.budget is not None
    budget = float(ct.budget) if has_cb else 0.0
    return dict(has_c=True, ctab=np.concatenate(tabs) if tabs else np.zeros(1), coff=offs,
                cw=float(root.cw), ow=1.0 if ct.in_objective else 0.0, has_cb=has_cb,
                cbudget=budget, crest=np.concatenate([[0.0], np.cumsum(mins)[:-1]]),
                ctol=_TOL * (1.0 + budget),
                c0=np.rint(np.asarray(ct.current, float)[perm]).astype(np.int64),
                mt=np.asarray(ct.min_trade, dtype=np.int64)[perm])
