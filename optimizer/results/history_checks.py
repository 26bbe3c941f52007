"""Warnings in words when the price history is too short for what is asked of it.

Two cases are never left silent:

- the window holds few *independent* observations for the number of series: overlapping
  horizon windows share most of their days, so ``T`` overlapping rows carry about ``T / h``
  independent horizon moves; a covariance of ``k`` series from fewer than
  :data:`SAFE_PER_SERIES` × ``k`` of them is poorly determined (hedge ratios swing with the
  sample);
- the basis-risk floor (best std with no limits) is 0 because the covariance is singular: with
  fewer observations than series the futures can replicate the exposures exactly *in sample*,
  which says nothing about the next horizon.
"""

from __future__ import annotations

import numpy as np

# common practice, no source: at least a few independent observations per series estimated
SAFE_PER_SERIES = 3
FLOOR_ZERO = 1e-10  # normalised basis floor treated as 0


def independent_observations(rows: int, horizon_days: int, sampling: str) -> int:
    """Independent horizon moves in ``rows`` change rows of the given sampling."""
    if sampling == "overlapping":
        return max(1, (rows + horizon_days - 1) // horizon_days)
    return rows


def history_warnings(model) -> list[str]:
    """The short-history warnings of a built :class:`~optimizer.model.HedgeModel`."""
    ch = model.changes
    rows, k = ch.values.shape
    indep = independent_observations(rows, ch.horizon_days, ch.sampling)
    out = []
    if indep < SAFE_PER_SERIES * k:
        kind = ("independent horizon moves" if ch.sampling == "overlapping"
                else "observations")
        out.append(f"short history: the window gives about {indep} {kind} for {k} series "
                   f"(fewer than {SAFE_PER_SERIES} per series), so the covariance and the hedge "
                   "ratios are poorly determined; use a longer window, non-overlapping or "
                   "scaled sampling, or fewer series")
    rank = int(np.linalg.matrix_rank(np.asarray(model.estimate.matrix, dtype=float)))
    if model.qp.offset <= FLOOR_ZERO and rank < k:
        out.append(f"the basis-risk floor is 0 only because the covariance is singular (rank "
                   f"{rank} for {k} series from {rows} rows): the futures replicate the "
                   "exposures exactly in this sample, which will not hold out of sample")
    return out
