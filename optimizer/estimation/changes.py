"""Price changes over the hedge horizon.

The hedge is judged on the book's P&L over ``horizon_days`` trading days, so the covariance that
drives it must be a covariance of *horizon* price moves. This module turns an aligned price panel
(rows = trading days, columns = series) into a matrix of horizon changes and, after a covariance
of those changes has been estimated, into a covariance of price moves in price units squared.

Change kinds, for a price ``P`` and horizon ``h``:

* ``"relative"``: ``r_t = P[t+h] / P[t] - 1``
* ``"log"``:      ``r_t = ln(P[t+h] / P[t])``
* ``"absolute"``: ``r_t = P[t+h] - P[t]``

Sampling schemes, for ``n`` price rows:

* ``"overlapping"``: a window starts on every row, ``T = n - h`` changes. Consecutive windows
  share ``h - 1`` days, so the changes are autocorrelated (for iid daily moves the lag-``j``
  autocorrelation is ``(h - j) / h``) and the sample holds roughly ``n / h`` independent
  observations, not ``T``. Uses all the data, but the effective sample is smaller than it looks.
* ``"non-overlapping"``: windows step by ``h`` and are anchored so the last window ends on the
  last row, ``T = floor((n - 1) / h)`` independent-looking changes; few observations when ``h`` is
  long.
* ``"scaled"``: daily (``h = 1``) changes, and the caller multiplies their covariance by ``h``
  (``Changes.scale``). This is the square-root-of-time rule: it assumes daily changes are iid —
  no autocorrelation, no mean reversion, no volatility clustering — which commodity spreads and
  basis often violate.

Which scheme is used is the book's choice, made in ``[estimation] sampling`` and reported with
every result; this module has no default so that the choice is always explicit.

References
----------
.. [1] Hansen, L. P. and Hodrick, R. J. (1980). "Forward exchange rates as optimal predictors of
   future spot rates: an econometric analysis." Journal of Political Economy 88(5), 829-853
   (overlapping observations and their serial correlation).
.. [2] J.P. Morgan/Reuters (1996). RiskMetrics Technical Document, 4th ed., ch. 3 and 5
   (square-root-of-time scaling under iid returns).
.. [3] Hull, J. C. Options, Futures, and Other Derivatives, ch. 3 (minimum-variance hedge over a
   horizon, estimated from changes over that horizon).
"""

from __future__ import annotations

import operator
from dataclasses import dataclass

import numpy as np
import pandas as pd

from basiswise.data_adapters.choices import CHANGE_KINDS as _CHANGE_KINDS
from basiswise.data_adapters.choices import SAMPLINGS as _SAMPLINGS
from basiswise.data_adapters.errors import InputError

CHANGE_KINDS, SAMPLINGS = _CHANGE_KINDS, _SAMPLINGS  # defined once, in data_adapters.choices

MIN_OBSERVATIONS = 3


@dataclass(frozen=True)
class Changes:
    """Horizon changes of a price panel.

    Attributes
    ----------
    values : numpy.ndarray
        ``(T, k)`` float64, C-contiguous; one row per change window, one column per series.
    columns : list of str
        Series names, in column order.
    kind : str
        One of ``CHANGE_KINDS``.
    sampling : str
        One of ``SAMPLINGS``.
    horizon_days : int
        The hedge horizon ``h`` in trading days.
    scale : float
        Multiply a covariance estimated from ``values`` by this to obtain the horizon covariance:
        ``horizon_days`` for ``"scaled"`` sampling (``values`` are daily changes), 1 otherwise.
    last_prices : numpy.ndarray
        ``(k,)`` prices on the last row used (the "current" prices).
    end_dates : pandas.DatetimeIndex
        Date at the end of each change window, ascending.
    """

    values: np.ndarray
    columns: list[str]
    kind: str
    sampling: str
    horizon_days: int
    scale: float
    last_prices: np.ndarray
    end_dates: pd.DatetimeIndex

    @property
    def n_obs(self) -> int:
        """Number of change rows ``T``."""
        return int(self.values.shape[0])


def _as_int(value: object, key: str, what: str) -> int:
    if isinstance(value, bool):
        raise InputError(f"{what} must be a whole number, got {value!r}", key=key)
    try:
        return operator.index(value)  # type: ignore[arg-type]
    except TypeError:
        raise InputError(f"{what} must be a whole number, got {value!r}", key=key) from None


def _check_prices(prices: pd.DataFrame, kind: str) -> tuple[np.ndarray, pd.DatetimeIndex]:
    """Validate the panel and return its values (float64) and a DatetimeIndex."""
    if not isinstance(prices, pd.DataFrame):
        raise InputError(
            f"prices must be a pandas DataFrame, got {type(prices).__name__}", key="data.prices"
        )
    if prices.shape[1] == 0:
        raise InputError("the price panel has no series columns", key="data.prices")
    if prices.shape[0] == 0:
        raise InputError("the price panel has no rows", key="data.prices")
    names = [str(c) for c in prices.columns]
    seen: set[str] = set()
    for name in names:
        if name in seen:
            raise InputError(f"series {name!r} appears twice in the price panel", column=name)
        seen.add(name)
    try:
        if pd.api.types.is_numeric_dtype(prices.index) or pd.api.types.is_bool_dtype(
            prices.index
        ):
            raise TypeError("numbers are not dates")
        index = pd.DatetimeIndex(prices.index)
    except (TypeError, ValueError):
        raise InputError(
            "the price panel's index must hold dates", key="data.prices"
        ) from None
    if index.hasnans:
        pos = int(np.flatnonzero(index.isna())[0])
        raise InputError(f"missing date at position {pos} of the price panel", key="data.prices")
    if len(index) > 1:
        steps = np.asarray(index[1:] > index[:-1])
        if not steps.all():
            bad = int(np.flatnonzero(~steps)[0]) + 1
            raise InputError(
                f"dates must be strictly increasing; {index[bad].date()} follows "
                f"{index[bad - 1].date()}",
                key="data.prices",
            )
    for name, col in zip(names, prices.columns, strict=True):
        if not pd.api.types.is_numeric_dtype(prices[col]) or pd.api.types.is_bool_dtype(
            prices[col]
        ):
            raise InputError(f"series {name!r} is not numeric", column=name)
    values = np.ascontiguousarray(prices.to_numpy(dtype=np.float64, na_value=np.nan))
    finite = np.isfinite(values)
    if not finite.all():
        r, c = np.argwhere(~finite)[0]
        raise InputError(
            f"price of {names[c]!r} on {index[r].date()} is missing or not finite",
            column=names[c],
        )
    if kind in ("relative", "log"):
        positive = values > 0
        if not positive.all():
            r, c = np.argwhere(~positive)[0]
            raise InputError(
                f"{kind} changes need positive prices; {names[c]!r} is {values[r, c]:g} on "
                f"{index[r].date()} (use changes = \"absolute\" for series that can be zero or "
                "negative)",
                column=names[c],
            )
    return values, index


def _change(start: np.ndarray, end: np.ndarray, kind: str) -> np.ndarray:
    if kind == "relative":
        return end / start - 1.0
    if kind == "log":
        return np.log(end / start)
    return end - start


def horizon_changes(
    prices: pd.DataFrame,
    *,
    horizon_days: int,
    kind: str,
    sampling: str,
    window: int | None = None,
) -> Changes:
    """Changes of every series over the hedge horizon.

    For price rows ``P[0], ..., P[n-1]`` (the last ``window`` rows of ``prices``) and horizon
    ``h``, a change window runs from row ``t`` to row ``t + h`` and yields

    * relative: ``P[t+h] / P[t] - 1``
    * log:      ``ln(P[t+h] / P[t])``
    * absolute: ``P[t+h] - P[t]``

    Sampling picks the windows:

    * ``"overlapping"``: every ``t = 0, ..., n-h-1``, so ``T = n - h``. Neighbouring windows
      share ``h - 1`` days, hence the changes are autocorrelated (lag-``j`` autocorrelation
      ``(h - j)/h`` for iid days) and carry about ``n/h`` independent observations, fewer than
      the ``T`` rows suggest.
    * ``"non-overlapping"``: ``t`` steps by ``h`` and the last window ends on the last row:
      end rows ``n-1, n-1-h, ...`` while the start is ``>= 0``, ``T = floor((n-1)/h)``.
    * ``"scaled"``: daily changes (``h = 1`` windows, ``T = n - 1``) with ``scale = h``. This
      assumes iid daily changes — no autocorrelation or mean reversion — so that the horizon
      covariance is ``h`` times the daily one (square-root-of-time rule).

    The book picks the scheme with ``[estimation] sampling``; there is no default here.

    Parameters
    ----------
    prices : pandas.DataFrame
        Aligned price panel: strictly increasing date index, one numeric column per series, no
        missing values. Relative and log changes need strictly positive prices.
    horizon_days : int
        Hedge horizon ``h >= 1`` in trading days (price rows).
    kind : {"relative", "log", "absolute"}
    sampling : {"overlapping", "non-overlapping", "scaled"}
    window : int, optional
        Number of most recent price rows to use; ``None`` uses all rows.

    Returns
    -------
    Changes

    Raises
    ------
    data_adapters.errors.InputError
        Unknown kind (key ``estimation.changes``) or sampling (``estimation.sampling``); window
        longer than the history or shorter than 2 rows (``estimation.window``); horizon below 1
        or too long to leave at least 3 changes (``book.horizon_days``); a bad price panel
        (naming the date row and series column).

    References
    ----------
    .. [1] Hansen, L. P. and Hodrick, R. J. (1980). Journal of Political Economy 88(5),
       829-853 (overlapping observations).
    .. [2] J.P. Morgan/Reuters (1996). RiskMetrics Technical Document, 4th ed.
       (square-root-of-time scaling).
    """
    if kind not in CHANGE_KINDS:
        raise InputError(
            f"unknown change kind {kind!r}; valid kinds are {', '.join(CHANGE_KINDS)}",
            key="estimation.changes",
        )
    if sampling not in SAMPLINGS:
        raise InputError(
            f"unknown sampling {sampling!r}; valid samplings are {', '.join(SAMPLINGS)}",
            key="estimation.sampling",
        )
    h = _as_int(horizon_days, "book.horizon_days", "horizon_days")
    if h < 1:
        raise InputError(f"horizon_days must be at least 1, got {h}", key="book.horizon_days")

    values, index = _check_prices(prices, kind)
    n_total = values.shape[0]
    if window is not None:
        w = _as_int(window, "estimation.window", "window")
        if w < 2:
            raise InputError(
                f"window must be at least 2 price rows, got {w}", key="estimation.window"
            )
        if w > n_total:
            raise InputError(
                f"window of {w} rows is longer than the price history of {n_total} rows",
                key="estimation.window",
            )
        values = values[n_total - w:]
        index = index[n_total - w:]
    n = values.shape[0]

    step = 1 if sampling == "scaled" else h
    if sampling == "non-overlapping":
        ends = np.arange(n - 1, h - 1, -h)[::-1]
    else:
        ends = np.arange(step, n)
    n_obs = int(ends.size)
    if n_obs < MIN_OBSERVATIONS:
        raise InputError(
            f"{n} price rows with a horizon of {h} days and {sampling} sampling give {n_obs} "
            f"changes; at least {MIN_OBSERVATIONS} are needed (shorten the horizon or use more "
            "history)",
            key="book.horizon_days",
        )
    starts = ends - step
    out = np.ascontiguousarray(_change(values[starts], values[ends], kind), dtype=np.float64)
    if not np.isfinite(out).all():  # overflow on extreme inputs; never hand on NaN/inf
        r, c = np.argwhere(~np.isfinite(out))[0]
        raise InputError(
            f"{kind} change of {str(prices.columns[c])!r} ending {index[ends[r]].date()} is not "
            "finite",
            column=str(prices.columns[c]),
        )
    return Changes(
        values=out,
        columns=[str(c) for c in prices.columns],
        kind=kind,
        sampling=sampling,
        horizon_days=h,
        scale=float(h) if sampling == "scaled" else 1.0,
        last_prices=values[-1].copy(),
        end_dates=pd.DatetimeIndex(index[ends]),
    )


def dollar_covariance(cov_changes: np.ndarray, changes: Changes) -> np.ndarray:
    """Covariance of horizon price moves in price units squared.

    With ``Σ`` the covariance of ``changes.values`` and ``s = changes.scale``:

    * absolute changes: ``Σ_$ = s Σ``;
    * relative changes: ``Σ_$ = s D Σ D`` with ``D = diag(changes.last_prices)``, since a price
      move is ``dP = P r``;
    * log changes: the same ``s D Σ D``, using the first-order approximation
      ``dP ≈ P ln(1 + dP/P)``, accurate while horizon moves are small.

    Parameters
    ----------
    cov_changes : numpy.ndarray
        ``(k, k)`` covariance of ``changes.values``.
    changes : Changes

    Returns
    -------
    numpy.ndarray
        ``(k, k)`` symmetric covariance of ``P[t+h] - P[t]`` at today's price level.

    Raises
    ------
    data_adapters.errors.InputError
        If the shape does not match the number of series or an entry is not finite.

    References
    ----------
    .. [1] Anderson, R. W. and Danthine, J.-P. (1981). "Cross hedging." Journal of Political
       Economy 89(6), 1182-1196.
    .. [2] Hull, J. C. Options, Futures, and Other Derivatives, ch. 3 ("tailing the hedge":
       value-based contract counts from percentage changes).
    """
    cov = np.asarray(cov_changes, dtype=np.float64)
    k = len(changes.columns)
    if cov.shape != (k, k):
        raise InputError(
            f"covariance has shape {cov.shape} but there are {k} series", key="estimation"
        )
    if not np.isfinite(cov).all():
        raise InputError("covariance of changes has non-finite entries", key="estimation")
    if changes.kind == "absolute":
        out = cov * changes.scale
    else:
        d = changes.last_prices
        out = cov * np.outer(d, d) * changes.scale
    return (out + out.T) / 2.0
