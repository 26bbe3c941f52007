"""Execution plan: contracts per instrument per day, within the participation cap.

A line may trade at most ``cap_j = floor(max_participation × ADV_j)`` contracts a day (at least
one; unlimited without ADV). The plan lasts ``D = max_j ⌈|trade_j| / cap_j⌉`` days. Each day,
every line first trades what it must so that its remainder still fits the days left
(``max(0, remaining_j − cap_j (D − d))``); the rest of the day's capacity is then filled one
contract at a time, always with the contract that lowers the book's horizon variance the most,
and only while a contract lowers it (a greedy descent: the risk falls as fast as the caps allow
one contract at a time). The book's std is recorded at the end of each day.

References
----------
Almgren & Chriss (2000), "Optimal execution of portfolio transactions", Journal of Risk 3(2),
5–39 (trading trajectories that trade risk against cost; here the cost side is fixed by the cap
and the plan front-loads the risk-reducing contracts; from memory).
"""

from __future__ import annotations

import math

import numpy as np

from ..problem.model import HedgeModel

__all__ = ["daily_caps", "execution_schedule", "schedule_rows"]


def daily_caps(book) -> np.ndarray:
    """Contracts per day each line may trade (``inf`` without ADV)."""
    out = []
    for ins in book.instruments:
        if ins.adv is None:
            out.append(math.inf)
        else:
            out.append(max(math.floor(ins.max_participation * ins.adv + 1e-9), 1))
    return np.array(out, dtype=float)


def _greedy_fill(model: HedgeModel, x: np.ndarray, room: np.ndarray, sign: np.ndarray
                 ) -> np.ndarray:
    """Add single contracts (direction ``sign``) while one lowers the variance; ``room`` caps."""
    y = model.position(x)
    Cs = model.C @ model.cov  # one contract's covariance with every series
    quad = np.einsum("ij,ij->i", Cs, model.C)
    done = np.zeros_like(x)
    while True:
        gain = -(2 * sign * (Cs @ y) + quad)  # variance removed by one more contract
        gain[room - done < 1] = -np.inf
        j = int(np.argmax(gain))
        if not np.isfinite(gain[j]) or gain[j] <= 0:
            return done
        done[j] += 1
        y = y + sign[j] * model.C[j]


def execution_schedule(model: HedgeModel, target: np.ndarray) -> dict:
    """The plan from ``model.current`` to whole-contract ``target``.

    Returns a dict with ``days`` (int), ``caps`` (contracts/day per line), ``trades``
    (days × lines, signed contracts per day), ``std_end_of_day`` (currency, one per day) and
    ``needed`` (True when some line needs more than one day).
    """
    x0 = np.round(np.asarray(model.current, float))
    total = np.round(np.asarray(target, float)) - x0
    caps = daily_caps(model.book)
    need = np.where(total != 0, np.ceil(np.abs(total) / caps), 0.0)
    days = int(max(need.max(initial=0.0), 1.0 if np.any(total) else 0.0))
    sign = np.sign(total)
    remaining = np.abs(total)
    x = x0.copy()
    plan, stds = [], []
    for d in range(1, days + 1):
        left = days - d
        with np.errstate(invalid="ignore"):
            must = np.maximum(remaining - np.where(np.isfinite(caps), caps * left,
                                                   np.where(left > 0, np.inf, 0.0)), 0.0)
        must = np.nan_to_num(must, nan=0.0)
        today = must.copy()
        x = x + sign * today
        room = np.minimum(caps, remaining) - today
        extra = _greedy_fill(model, x, room, sign)
        today += extra
        x = x + sign * extra
        remaining -= today
        plan.append(sign * today)
        stds.append(math.sqrt(model.variance(x)))
    trades = np.array(plan) if plan else np.zeros((0, len(x0)))
    return {"days": days, "caps": caps, "trades": trades, "std_end_of_day": stds,
            "needed": days > 1}


def schedule_rows(model: HedgeModel, plan: dict) -> list[dict]:
    """One row per day and instrument with a trade (the schedule file), plus the day's std."""
    rows = []
    ids = model.instrument_ids
    pos = np.round(np.asarray(model.current, float))
    for d, (day, std) in enumerate(zip(plan["trades"], plan["std_end_of_day"], strict=True)):
        pos = pos + day
        for j, t in enumerate(day):
            if t == 0:
                continue
            cap = plan["caps"][j]
            rows.append({"day": d + 1, "instrument": ids[j], "side": "BUY" if t > 0 else "SELL",
                         "contracts": int(abs(t)), "position_end_of_day": int(pos[j]),
                         "daily_cap": None if not math.isfinite(cap) else int(cap),
                         "book_std_end_of_day": round(float(std), 2)})
    return rows
