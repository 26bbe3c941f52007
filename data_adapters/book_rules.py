"""Rules every book key follows: plausible ranges of its numbers, plain text in its names.

Beyond the ranges a number is a typo or a unit slip, and carried into the solver it would
overflow (an int of 1e300 days) or lose all precision. Text keys reach tables, CSV and Markdown,
so a newline or an escape in them would forge lines there: they are refused.
"""

from __future__ import annotations

import re
from typing import Any

__all__ = ["CONTROL_CHARS", "MAX_CONTRACTS", "MAX_CONTRACT_SIZE", "MAX_DAYS", "MAX_MONEY",
           "MAX_PER_CONTRACT", "MAX_QUANTITY", "plain_text"]

MAX_CONTRACTS = 1e7        # positions, limits, current holdings (contracts)
MAX_CONTRACT_SIZE = 1e9    # units of the series per contract
MAX_QUANTITY = 1e12        # exposure quantity, in its unit
MAX_MONEY = 1e15           # margin budget (currency)
MAX_PER_CONTRACT = 1e9     # margin or cost per contract (currency)
MAX_DAYS = 1000            # horizon, execution days (business days)


CONTROL_CHARS = re.compile(r"[\x00-\x1f\x7f-\x9f]")


def _no_control(value: str) -> str:
    hit = CONTROL_CHARS.search(value)
    if hit:
        raise ValueError(f"contains a control character ({hit.group()!r} at position "
                         f"{hit.start() + 1}); use plain text")
    return value


def plain_text(value: Any) -> Any:
    """``value`` unchanged if it (or each text in a list) has no control character.

    Raises
    ------
    ValueError
        Naming the character and its position (pydantic turns it into the key's error).
    """
    if isinstance(value, str):
        return _no_control(value)
    if isinstance(value, list):
        for item in value:
            if isinstance(item, str):
                _no_control(item)
    return value
