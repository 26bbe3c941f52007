"""Make results safe for JSON: numbers are finite or ``None`` (never NaN or infinity), and a
zero has no sign."""

from __future__ import annotations

import math

import numpy as np


def finite(obj):
    """``obj`` with non-finite floats replaced by ``None`` and numpy scalars made plain."""
    if isinstance(obj, dict):
        return {k: finite(v) for k, v in obj.items()}
    if isinstance(obj, list | tuple):
        return [finite(v) for v in obj]
    if isinstance(obj, float | np.floating):
        return float(obj) + 0.0 if math.isfinite(obj) else None  # + 0.0: no -0.0
    if isinstance(obj, np.integer):
        return int(obj)
    return obj
