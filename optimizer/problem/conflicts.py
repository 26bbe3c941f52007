"""Why a set of limits admits no position: conflicts found from the limits themselves."""

from __future__ import annotations

import numpy as np

from .model import HedgeModel


def limit_conflicts(model: HedgeModel, tol: float = 1e-9) -> list[str]:
    """Limits that cannot hold together, found from each instrument's bounds alone.

    A group ``|Σ n_j| ≤ L`` conflicts when ``Σ lo_j > L`` or ``Σ hi_j < −L``; the margin budget
    conflicts when ``Σ margin_j · dist(0, [lo_j, hi_j]) > B``. Empty when no such conflict.
    """
    qp, book, src = model.qp, model.book, model.sources
    idx = {ins.id: j for j, ins in enumerate(book.instruments)}
    out = []
    for g in book.group_limits:
        js = [idx[i] for i in g.instruments]
        for side, vals, names, bad in (
            ("minimum", qp.lo, src.lo, float(np.sum(qp.lo[js])) > g.limit + tol),
            ("maximum", qp.hi, src.hi, float(np.sum(qp.hi[js])) < -g.limit - tol),
        ):
            if bad:
                parts = ", ".join(f"{book.instruments[j].id} {side} {vals[j]:g} ({names[j]})"
                                  for j in js if abs(vals[j]) > tol)
                out.append(f"group '{g.id}' limit {g.limit:g}: its members' {side} positions "
                           f"sum to {float(np.sum(vals[js])):g} contracts ({parts})")
    budget = book.constraints.margin_budget
    if budget is not None:
        need = np.where(qp.lo > 0, qp.lo, np.where(qp.hi < 0, -qp.hi, 0.0))
        m = np.array([float(i.margin) for i in book.instruments])
        total = float(m @ need)
        if total > budget * (1 + 1e-9):
            parts = ", ".join(f"{book.instruments[j].id} {need[j]:g} × {m[j]:,.0f}"
                              for j in np.flatnonzero(need * m > 0))
            out.append(f"margin budget {budget:,.0f}: the minimum positions need {total:,.0f} "
                       f"of initial margin ({parts})")
    return out
