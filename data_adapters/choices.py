"""Every set of named choices a book, the command line and the engine share, defined once.

The book schema (:mod:`data_adapters.book`), the command-line options, the estimators, the
solvers and the README all take their lists from here, so a new choice is added in one place.
Each tuple is ordered as the documentation lists it; the ``Literal`` types beside them are what
the book schema validates against. This module imports nothing heavy: the command line reads it
at start-up.
"""

from __future__ import annotations

from typing import Literal

#: ``[estimation] changes``: how a price move over the horizon is measured.
CHANGE_KINDS = ("relative", "log", "absolute")
#: ``[estimation] sampling``: how horizon changes are cut from the history.
SAMPLINGS = ("overlapping", "non-overlapping", "scaled")
#: ``[estimation] estimator``: the covariance estimators.
ESTIMATORS = ("sample", "ledoit-wolf", "oas", "constant-correlation", "ewma")
#: ``[data.roll] adjust``: back-adjustment of rolled generic months.
ROLL_ADJUSTMENTS = ("ratio", "difference", "none")
#: ``[data] format``: layouts of a price file.
PRICE_FORMATS = ("wide", "long", "contracts")
#: ``solve --method``: how the hedge reaches its positions.
METHODS = ("exact", "round", "continuous")
#: The methods that give whole contracts (the backtest's ``joint-whole`` strategy).
WHOLE_METHODS = ("exact", "round")
#: Change kinds that divide by a price, and so need positive prices.
RATIO_CHANGES = ("relative", "log")

ChangeKind = Literal[CHANGE_KINDS]
Sampling = Literal[SAMPLINGS]
Estimator = Literal[ESTIMATORS]
RollAdjustment = Literal[ROLL_ADJUSTMENTS]
Method = Literal[METHODS]
WholeMethod = Literal[WHOLE_METHODS]

__all__ = [
    "CHANGE_KINDS",
    "ESTIMATORS",
    "METHODS",
    "PRICE_FORMATS",
    "RATIO_CHANGES",
    "ROLL_ADJUSTMENTS",
    "SAMPLINGS",
    "WHOLE_METHODS",
    "ChangeKind",
    "Estimator",
    "Method",
    "RollAdjustment",
    "Sampling",
    "WholeMethod",
]
