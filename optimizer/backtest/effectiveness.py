"""Hedge-effectiveness evidence from realised P&L: the regression test and the dollar offset.

For a hedge relationship (a group of exposures and the futures designated to hedge them) with
realised period P&Ls ``x_t`` (exposures) and ``y_t`` (hedge leg), ``t = 1..T``:

* regression test: the OLS fit ``y_t = α + β x_t + ε_t`` (``scipy.stats.linregress``); a hedge
  that offsets the exposure has a slope ``β`` near −1 and a coefficient of determination ``R²``
  near 1;
* dollar-offset ratio: ``−Σ_t y_t / Σ_t x_t``, the cumulative hedge gain per unit of cumulative
  exposure loss (1 = full offset). It is undefined when the exposure's cumulative P&L is close to
  zero, and is then reported as ``None`` rather than a meaningless large number.

The thresholds below are widely used rules of thumb, not a standard's text. Whether a hedge
qualifies for hedge accounting is for the firm's auditor under the applicable accounting
standard to decide; this module only computes the evidence.

References
----------
Ederington, L. H. (1979), "The hedging performance of the new futures markets", Journal of
Finance 34(1) (regression of spot on futures changes; R² as hedging effectiveness).
Finnerty, J. D. & Grant, D. (2002), "Alternative approaches to testing hedge effectiveness under
SFAS No. 133", Accounting Horizons 16(2) (dollar offset and regression tests compared).
"""

from __future__ import annotations

from dataclasses import asdict, dataclass

import numpy as np
from scipy import stats

from basiswise.data_adapters.book import Book
from basiswise.data_adapters.errors import InputError

# common practice, no source: the "80-125 %" dollar-offset band
DOLLAR_OFFSET_BAND = (0.80, 1.25)
# common practice, no source: regression test passes with R² of at least 0.8 ...
MIN_R2 = 0.80
# common practice, no source: ... and a slope between -1.25 and -0.8
SLOPE_BAND = (-1.25, -0.80)
#: below this share of the summed absolute exposure P&L the cumulative P&L counts as zero
_OFFSET_FLOOR = 1e-6

EVIDENCE_NOTE = (
    "Effectiveness evidence only: the 80-125 % dollar-offset band and the regression test "
    "(R² ≥ 0.8, slope between -1.25 and -0.8) are common practice, not a rule of this tool. "
    "Whether a hedge relationship qualifies for hedge accounting is decided by the firm's "
    "auditor under the applicable accounting standard."
)


@dataclass(frozen=True)
class Effectiveness:
    """Evidence for one hedge relationship.

    ``slope``, ``intercept`` and ``r2`` are ``None`` when the exposure P&L does not vary;
    ``dollar_offset`` is ``None`` when the cumulative exposure P&L is (close to) zero.
    ``within_practice`` is ``True`` when both tests fall inside the common-practice thresholds,
    ``False`` when one falls outside, ``None`` when a figure is undefined.
    """

    group: str
    exposures: tuple[str, ...]
    instruments: tuple[str, ...]
    periods: int
    slope: float | None
    intercept: float | None
    r2: float | None
    exposure_pnl: float
    hedge_pnl: float
    dollar_offset: float | None
    regression_ok: bool | None
    offset_ok: bool | None
    within_practice: bool | None

    def to_dict(self) -> dict:
        d = asdict(self)
        d["exposures"], d["instruments"] = list(self.exposures), list(self.instruments)
        return d


def regression_test(exposure_pnl, hedge_pnl) -> tuple[float, float, float] | None:
    """OLS of hedge-leg P&L on exposure P&L: ``(slope, intercept, R²)``.

    Returns ``None`` when the exposure P&L is constant (slope undefined). With a constant hedge
    leg the slope is 0 and ``R²`` is 0.

    References
    ----------
    Ederington (1979), Journal of Finance 34(1).
    """
    x, y = _pair(exposure_pnl, hedge_pnl)
    if np.ptp(x) == 0:
        return None
    if np.ptp(y) == 0:
        return 0.0, float(y[0]), 0.0
    fit = stats.linregress(x, y)
    slope, intercept, r = float(fit.slope), float(fit.intercept), float(fit.rvalue)
    if not all(np.isfinite([slope, intercept, r])):
        return None
    return slope, intercept, min(1.0, r * r)


def dollar_offset(exposure_pnl, hedge_pnl) -> float | None:
    """Cumulative dollar-offset ratio ``−Σ hedge / Σ exposure`` (``None`` if Σ exposure ≈ 0)."""
    x, y = _pair(exposure_pnl, hedge_pnl)
    sx, scale = float(x.sum()), float(np.abs(x).sum())
    if scale == 0 or abs(sx) <= _OFFSET_FLOOR * scale:
        return None
    return -float(y.sum()) / sx


def assess(group: str, exposure_pnl, hedge_pnl, *, exposures: tuple[str, ...] = (),
           instruments: tuple[str, ...] = ()) -> Effectiveness:
    """Both tests on one relationship, marked against the common-practice thresholds."""
    x, y = _pair(exposure_pnl, hedge_pnl)
    reg = regression_test(x, y)
    offset = dollar_offset(x, y)
    slope, intercept, r2 = reg if reg is not None else (None, None, None)
    reg_ok = None if reg is None else bool(r2 >= MIN_R2 and SLOPE_BAND[0] <= slope <= SLOPE_BAND[1])
    off_ok = None if offset is None else bool(DOLLAR_OFFSET_BAND[0] <= offset
                                               <= DOLLAR_OFFSET_BAND[1])
    if reg_ok is False or off_ok is False:
        within = False
    elif reg_ok is None or off_ok is None:
        within = None
    else:
        within = True
    return Effectiveness(group, tuple(exposures), tuple(instruments), int(x.size), slope,
                         intercept, r2, float(x.sum()), float(y.sum()), offset, reg_ok, off_ok,
                         within)


def default_groups(book: Book) -> list[tuple[str, list[int], list[int]]]:
    """Hedge relationships to test: the whole book, then one per designated instrument set.

    An exposure is designated to the instruments of the first group limit that contains its
    ``proxy`` (e.g. all months of one product), or to the proxy alone; exposures sharing that
    set form one relationship. Returns ``(name, exposure indices, instrument indices)``.
    """
    ids = {ins.id: j for j, ins in enumerate(book.instruments)}
    groups: list[tuple[str, list[int], list[int]]] = [
        ("whole book", list(range(len(book.exposures))), list(range(len(ids))))
    ]
    by_set: dict[str, tuple[list[int], list[int]]] = {}
    for i, e in enumerate(book.exposures):
        if e.proxy is None:
            continue
        name, members = e.proxy, [ids[e.proxy]]
        for g in book.group_limits:
            if e.proxy in g.instruments:
                name, members = g.id, [ids[k] for k in g.instruments]
                break
        by_set.setdefault(name, ([], members))[0].append(i)
    groups += [(name, ex, ins) for name, (ex, ins) in by_set.items()]
    return groups


def effectiveness_by_group(book: Book, exposure_pnl: np.ndarray, instrument_pnl: np.ndarray,
                           groups: list[tuple[str, list[int], list[int]]] | None = None
                           ) -> list[Effectiveness]:
    """Evidence per relationship from per-exposure and per-instrument period P&L.

    Parameters
    ----------
    exposure_pnl : ndarray (T, exposures)
        Realised P&L of each exposure per period (currency).
    instrument_pnl : ndarray (T, instruments)
        Realised P&L of each instrument's position per period (currency).
    groups : list, optional
        ``(name, exposure indices, instrument indices)``; :func:`default_groups` when omitted.
    """
    X, Y = np.asarray(exposure_pnl, dtype=float), np.asarray(instrument_pnl, dtype=float)
    if X.ndim != 2 or Y.ndim != 2 or X.shape[0] != Y.shape[0]:
        raise InputError(f"P&L tables do not line up: {X.shape} vs {Y.shape}", key="effectiveness")
    groups = default_groups(book) if groups is None else groups
    out = []
    for name, ex, ins in groups:
        out.append(assess(name, X[:, ex].sum(axis=1), Y[:, ins].sum(axis=1),
                          exposures=tuple(book.exposures[i].id for i in ex),
                          instruments=tuple(book.instruments[j].id for j in ins)))
    return out


def _pair(x, y) -> tuple[np.ndarray, np.ndarray]:
    x, y = np.asarray(x, dtype=float).ravel(), np.asarray(y, dtype=float).ravel()
    if x.size != y.size:
        raise InputError(f"{x.size} exposure P&Ls but {y.size} hedge P&Ls", key="effectiveness")
    if x.size < 3:
        raise InputError(f"effectiveness needs at least 3 periods, got {x.size}",
                         key="effectiveness")
    if not (np.isfinite(x).all() and np.isfinite(y).all()):
        raise InputError("P&L contains values that are not finite", key="effectiveness")
    return x, y
