"""Which contract a generic month holds on a date, and its last trading day (rolled books).

Same rule as :func:`data_adapters.rolls.roll_generic`: on date ``d`` month ``k`` of a product
is the ``k``-th listed contract (by last trading day) whose roll date — ``roll_days`` business
days before its last trading day — is not before ``d``.
"""

from __future__ import annotations

import numpy as np

from basiswise.data_adapters.rolls import GENERIC_NAME, _expiry_table, _roll_dates, read_expiries

__all__ = ["held_contracts"]


def held_contracts(book, date) -> dict[str, tuple[str, str]]:
    """``{series: (contract, last trading day ISO)}`` for the book's generic months on ``date``.

    Empty for books without ``[data.roll]``. ``date`` is a Timestamp (the last price date).
    """
    if book.data.roll is None or date is None:
        return {}
    table = _expiry_table(read_expiries(book.expiries_path), str(book.expiries_path))
    day = np.datetime64(date.date(), "D")
    out = {}
    for name in book.series_ids():
        m = GENERIC_NAME.match(name)
        if not m:
            continue
        listed = table.loc[table["product"] == m["product"]]
        if listed.empty:
            continue
        roll = _roll_dates(listed["last_trade"], book.data.roll.roll_days)
        i = int(np.searchsorted(roll, day, side="left")) + int(m["k"]) - 1
        if i < len(listed):
            row = listed.iloc[i]
            out[name] = (str(row["contract"]), str(row["last_trade"].date()))
    return out
