"""Covariance estimators for horizon changes.

Given ``T`` observations ``x_t`` (rows of ``X``, shape ``(T, k)``), with mean ``x̄`` and
centred rows ``y_t = x_t - x̄``:

* ``"sample"``: unbiased sample covariance ``S_u = Σ_t y_t y_tᵀ / (T - 1)`` (``numpy.cov``).
* ``"ledoit-wolf"``: the Ledoit-Wolf (2004) estimator, ``(1 - δ) R + δ μ I``, applied to the
  *standardised* changes (see below), from ``sklearn.covariance.LedoitWolf``.
* ``"oas"``: same target, intensity from the oracle approximating shrinkage of Chen et al.
  (2010), ``sklearn.covariance.OAS``, on the standardised changes.
* ``"constant-correlation"``: ``δ F + (1 - δ) S`` with the constant-correlation target
  ``F_ii = s_ii``, ``F_ij = r̄ sqrt(s_ii s_jj)`` (``r̄`` = average sample correlation) and the
  optimal intensity of Ledoit and Wolf (2003, 2004), on the standardised changes. Cross hedges
  live on correlations, and an identity target shrinks every correlation toward zero and with it
  every cross-hedge ratio; this target keeps the common correlation. Written here because no
  maintained library has it.
* ``"ewma"``: zero-mean exponentially weighted average of outer products (RiskMetrics, 1996),
  ``Σ = Σ_t w_t x_t x_tᵀ`` with ``w_t ∝ (1 - λ) λ^(T-1-t)`` normalised to sum to 1.

Standardisation (the three shrinkage estimators). A book mixes quote units — USD/bbl next to
USD/gal, MMBtu next to GJ — and with absolute changes each column's variance is in its own unit.
The published intensities add squared errors over all entries and the identity target uses
``tr(S)/k``; neither is invariant to rescaling one series, so the series with the largest
variance *in its own unit* would decide the shrinkage, and re-quoting one series would change
the hedge (a 1 % intensity can triple the hedged risk). Shrinking the correlations and keeping
each variance is the remedy of Schäfer and Strimmer (2005). Each shrinkage estimator therefore
runs on ``z_t = D⁻¹ y_t`` with ``D = diag(sqrt(s_ii))`` the maximum-likelihood (``ddof = 0``)
standard deviations, and the result is scaled back, ``Σ̂ = D Σ̂_z D``. ``Σ̂_z`` has unit
diagonal (the target keeps the variances), so each series keeps its own ML variance and only the
correlations are shrunk. The result is
equivariant: for ``X' = X A`` with ``A`` diagonal and positive, ``Σ̂' = A Σ̂ A``, whatever the
change kind — which is what makes the hedge independent of the quote unit. The sample and EWMA
estimators are equivariant as they stand. A series that does not move over the sample
(``s_ii = 0``) gets zero variance and covariance and is left out of the shrinkage.

Shrinkage estimators report their intensity ``δ`` in ``[0, 1]``.

References
----------
.. [1] Ledoit, O. and Wolf, M. (2004). "A well-conditioned estimator for large-dimensional
   covariance matrices." Journal of Multivariate Analysis 88(2), 365-411.
.. [2] Ledoit, O. and Wolf, M. (2003). "Improved estimation of the covariance matrix of stock
   returns with an application to portfolio selection." Journal of Empirical Finance 10(5),
   603-621.
.. [3] Ledoit, O. and Wolf, M. (2004). "Honey, I shrunk the sample covariance matrix." Journal of
   Portfolio Management 30(4), 110-119.
.. [4] Chen, Y., Wiesel, A., Eldar, Y. C. and Hero, A. O. (2010). "Shrinkage algorithms for MMSE
   covariance estimation." IEEE Transactions on Signal Processing 58(10), 5016-5029.
.. [5] J.P. Morgan/Reuters (1996). RiskMetrics Technical Document, 4th ed., ch. 5.
.. [6] Schäfer, J. and Strimmer, K. (2005). "A shrinkage approach to large-scale covariance
   matrix estimation and implications for functional genomics." Statistical Applications in
   Genetics and Molecular Biology 4(1), article 32 (shrinking correlations, variances kept).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from sklearn.covariance import OAS, LedoitWolf

from basiswise.data_adapters.choices import ESTIMATORS as _ESTIMATORS
from basiswise.data_adapters.errors import InputError

ESTIMATORS = _ESTIMATORS  # defined once, in data_adapters.choices


@dataclass(frozen=True)
class CovarianceEstimate:
    """An estimated covariance of changes.

    Attributes
    ----------
    matrix : numpy.ndarray
        ``(k, k)`` symmetric positive semi-definite covariance.
    method : str
        One of ``ESTIMATORS``.
    shrinkage : float or None
        Intensity in ``[0, 1]`` for shrinkage estimators, ``None`` otherwise.
    n_obs : int
        Number of observations ``T`` used.
    detail : str
        Human-readable description of what was done.
    """

    matrix: np.ndarray
    method: str
    shrinkage: float | None
    n_obs: int
    detail: str


def _name(j: int, columns: Sequence[str] | None) -> str:
    if columns is not None and j < len(columns):
        return repr(str(columns[j]))
    return f"column {j}"


def _column(j: int, columns: Sequence[str] | None) -> str | None:
    if columns is not None and j < len(columns):
        return str(columns[j])
    return None


def _validate(X: object, columns: Sequence[str] | None) -> np.ndarray:
    try:
        arr = np.asarray(X, dtype=np.float64)
    except (TypeError, ValueError):
        raise InputError("changes must be a numeric matrix", key="estimation") from None
    if arr.ndim != 2:
        raise InputError(
            f"changes must be a 2-D matrix (observations x series), got {arr.ndim}-D",
            key="estimation",
        )
    if arr.shape[1] < 1:
        raise InputError("changes have no series columns", key="estimation")
    if arr.shape[0] < 2:
        raise InputError(
            f"at least 2 observations are needed to estimate a covariance, got {arr.shape[0]}",
            key="estimation.window",
        )
    finite = np.isfinite(arr)
    if not finite.all():
        r, c = np.argwhere(~finite)[0]
        raise InputError(
            f"change in observation {r} of {_name(int(c), columns)} is not finite",
            column=_column(int(c), columns),
            key=None if _column(int(c), columns) else "estimation",
        )
    return np.ascontiguousarray(arr)


def standardised(X: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Centred changes divided by their maximum-likelihood standard deviations.

    ``z_ti = (x_ti - x̄_i) / sqrt(s_ii)`` with ``s_ii = (1/T) Σ_t (x_ti - x̄_i)²``, for the
    columns that move (``s_ii > 0``).

    Parameters
    ----------
    X : numpy.ndarray
        ``(T, k)`` finite observations.

    Returns
    -------
    Z : numpy.ndarray
        ``(T, m)`` standardised columns of the ``m`` series that move.
    sd : numpy.ndarray
        ``(m,)`` their standard deviations ``sqrt(s_ii)``.
    moving : numpy.ndarray
        ``(k,)`` boolean mask of those columns.
    """
    Y = X - X.mean(axis=0)
    sd = np.sqrt((Y * Y).mean(axis=0))
    # a column whose spread is at rounding level of its mean does not move either
    moving = sd > 1e-12 * np.maximum(np.abs(X).max(axis=0), np.finfo(float).tiny)
    return Y[:, moving] / sd[moving], sd[moving], moving


def on_correlations(X: np.ndarray, shrink) -> tuple[np.ndarray, float]:
    """Run a shrinkage estimator on standardised changes and scale the result back.

    ``Σ̂ = D Σ̂_z D`` with ``Σ̂_z = shrink(Z)``, ``Z`` and ``D = diag(sd)`` from
    :func:`standardised`; rows and columns of series that do not move are zero. ``shrink``
    maps ``Z`` to ``(matrix, intensity)``.
    """
    Z, sd, moving = standardised(X)
    k = X.shape[1]
    out = np.zeros((k, k))
    if not moving.any():
        return out, 0.0
    inner, intensity = shrink(Z)
    idx = np.flatnonzero(moving)
    out[np.ix_(idx, idx)] = inner * np.outer(sd, sd)
    return out, float(intensity)


def sample_covariance(X: np.ndarray) -> np.ndarray:
    """Unbiased sample covariance.

    ``S_u = (1 / (T - 1)) Σ_t (x_t - x̄)(x_t - x̄)ᵀ`` (``numpy.cov`` with ``ddof = 1``).

    Parameters
    ----------
    X : numpy.ndarray
        ``(T, k)`` observations, ``T >= 2``.

    Returns
    -------
    numpy.ndarray
        ``(k, k)`` covariance.

    References
    ----------
    .. [1] NumPy documentation, ``numpy.cov``.
    """
    return np.atleast_2d(np.cov(X, rowvar=False, ddof=1))


def constant_correlation_shrinkage(
    X: np.ndarray, columns: Sequence[str] | None = None
) -> tuple[np.ndarray, float, float]:
    """Ledoit-Wolf shrinkage toward the constant-correlation target.

    With ``y_t = x_t - x̄`` and the maximum-likelihood covariance ``S = (1/T) Σ_t y_t y_tᵀ``
    (entries ``s_ij``), the sample correlations ``r_ij = s_ij / sqrt(s_ii s_jj)`` and their
    average ``r̄ = Σ_{i≠j} r_ij / (k (k - 1))``, the target is

    ``F_ii = s_ii``,  ``F_ij = r̄ sqrt(s_ii s_jj)``,

    and the estimator is ``Σ̂ = δ* F + (1 - δ*) S`` with ``δ* = max(0, min(1, κ / T))``,
    ``κ = (π - ρ) / γ`` where

    * ``π = Σ_ij π_ij``, ``π_ij = (1/T) Σ_t (y_it y_jt - s_ij)²``;
    * ``ρ = Σ_i π_ii + Σ_{i≠j} (r̄/2) (sqrt(s_jj/s_ii) θ_ii,ij + sqrt(s_ii/s_jj) θ_jj,ij)``,
      ``θ_kk,ij = (1/T) Σ_t (y_kt² - s_kk)(y_it y_jt - s_ij)``;
    * ``γ = ||F - S||²_F``.

    Computed with matrix products: ``π_ij = ((Y∘Y)ᵀ(Y∘Y))_ij / T - s_ij²`` and
    ``θ_ii,ij = ((Y∘Y∘Y)ᵀ Y)_ij / T - s_ii s_ij`` (``Y`` the centred data), so the cost is
    ``O(T k²)`` time and ``O(k²)`` memory. When ``γ = 0`` (``F = S``, e.g. ``k = 1``) the
    intensity is reported as 0 and the result is ``S``.

    Parameters
    ----------
    X : numpy.ndarray
        ``(T, k)`` finite observations, ``T >= 2``.
    columns : sequence of str, optional
        Series names for error messages.

    Returns
    -------
    matrix : numpy.ndarray
        ``(k, k)`` shrunk covariance.
    intensity : float
        ``δ*`` in ``[0, 1]``.
    mean_correlation : float
        ``r̄`` (1.0 when ``k = 1``).

    Raises
    ------
    data_adapters.errors.InputError
        If a series has zero variance (its correlations are undefined).

    References
    ----------
    .. [1] Ledoit, O. and Wolf, M. (2004). "Honey, I shrunk the sample covariance matrix."
       Journal of Portfolio Management 30(4), 110-119, appendix.
    .. [2] Ledoit, O. and Wolf, M. (2003). Journal of Empirical Finance 10(5), 603-621.
    """
    T, k = X.shape
    Y = X - X.mean(axis=0)
    S = (Y.T @ Y) / T
    s = np.diag(S).copy()
    zero = s <= 0.0
    if zero.any():
        j = int(np.flatnonzero(zero)[0])
        raise InputError(
            f"series {_name(j, columns)} does not move over the sample (zero variance); "
            "constant-correlation shrinkage needs every series to vary",
            column=_column(j, columns),
            key=None if _column(j, columns) else "estimation.estimator",
        )
    if k == 1:
        return S, 0.0, 1.0
    sd = np.sqrt(s)
    R = S / np.outer(sd, sd)
    r_bar = float((R.sum() - np.trace(R)) / (k * (k - 1)))
    F = r_bar * np.outer(sd, sd)
    np.fill_diagonal(F, s)

    Y2 = Y * Y
    pi_mat = (Y2.T @ Y2) / T - S * S
    pi_hat = float(pi_mat.sum())
    theta = ((Y2 * Y).T @ Y) / T - s[:, None] * S
    ratio = sd[None, :] / sd[:, None]  # sqrt(s_jj / s_ii)
    term = ratio * theta
    rho_off = r_bar * float(term.sum() - np.trace(term))
    rho_hat = float(np.trace(pi_mat)) + rho_off
    gamma_hat = float(((F - S) ** 2).sum())
    if gamma_hat <= 0.0 or not np.isfinite(gamma_hat):
        return S, 0.0, r_bar
    kappa = (pi_hat - rho_hat) / gamma_hat
    delta = float(max(0.0, min(1.0, kappa / T)))
    return delta * F + (1.0 - delta) * S, delta, r_bar


def ewma_covariance(X: np.ndarray, lam: float) -> tuple[np.ndarray, float]:
    """Zero-mean exponentially weighted covariance (RiskMetrics).

    RiskMetrics defines the recursion ``Σ_t = λ Σ_{t-1} + (1 - λ) x_t x_tᵀ`` around a zero
    mean. Unrolled over a finite sample ``t = 0, ..., T-1`` from ``Σ_{-1} = 0`` it gives
    ``Σ_t (1 - λ) λ^(T-1-t) x_t x_tᵀ``, whose weights sum to ``1 - λ^T`` rather than 1; this
    function divides by that sum, i.e.

    ``Σ̂ = Σ_t w_t x_t x_tᵀ``,  ``w_t = (1 - λ) λ^(T-1-t) / (1 - λ^T)``,

    so the estimate is not biased toward zero on short samples. Equivalently: run the recursion
    from a zero matrix and divide the final value by ``1 - λ^T``. Computed in one weighted
    matrix product. The data are *not* demeaned (the zero-mean convention of RiskMetrics).

    Parameters
    ----------
    X : numpy.ndarray
        ``(T, k)`` observations, oldest first.
    lam : float
        Decay factor ``λ`` in ``(0, 1)``; RiskMetrics uses 0.94 for daily data.

    Returns
    -------
    matrix : numpy.ndarray
        ``(k, k)`` covariance.
    effective_obs : float
        ``1 / Σ_t w_t²``, the effective number of observations.

    References
    ----------
    .. [1] J.P. Morgan/Reuters (1996). RiskMetrics Technical Document, 4th ed., ch. 5
       (exponentially weighted volatility and correlation, decay factor 0.94 for daily data).
    """
    T = X.shape[0]
    powers = lam ** np.arange(T - 1, -1, -1, dtype=np.float64)  # λ^(T-1-t)
    w = powers / powers.sum()
    cov = (X * w[:, None]).T @ X
    return cov, float(1.0 / np.sum(w * w))


def estimate_covariance(
    X: np.ndarray,
    method: str = "ledoit-wolf",
    *,
    ewma_lambda: float = 0.94,
    horizon_days: int | None = None,
    columns: Sequence[str] | None = None,
) -> CovarianceEstimate:
    """Estimate the covariance of the rows of ``X`` with a named method.

    Methods (see the module docstring for the formulas):

    * ``"sample"``: unbiased sample covariance (``ddof = 1``, ``numpy.cov``);
    * ``"ledoit-wolf"``: ``sklearn.covariance.LedoitWolf`` on the standardised changes
      (:func:`on_correlations`) — shrinks the maximum-likelihood (``ddof = 0``) correlations
      toward the identity, keeps each variance; reports ``shrinkage_``;
    * ``"oas"``: ``sklearn.covariance.OAS`` — the same with the OAS intensity;
    * ``"constant-correlation"``: :func:`constant_correlation_shrinkage` on the standardised
      changes (``ddof = 0``);
    * ``"ewma"``: :func:`ewma_covariance` (zero mean, normalised finite-sample weights).

    Parameters
    ----------
    X : array_like
        ``(T, k)`` finite observations (rows oldest first), ``T >= 2``.
    method : str, default "ledoit-wolf"
        One of ``ESTIMATORS``.
    ewma_lambda : float, default 0.94
        Decay factor for ``"ewma"``, in ``(0, 1)``.
    horizon_days : int, optional
        Horizon of each change row in trading days, if known. For ``"ewma"`` with
        ``horizon_days > 1`` the ``detail`` notes that the 0.94 recommendation is for daily data.
    columns : sequence of str, optional
        Series names, used in error messages.

    Returns
    -------
    CovarianceEstimate

    Raises
    ------
    data_adapters.errors.InputError
        Unknown method (key ``estimation.estimator``), ``ewma_lambda`` outside ``(0, 1)`` (key
        ``estimation.ewma_lambda``), ``X`` not a finite 2-D matrix with at least 2 rows, or a
        result that is not finite.

    References
    ----------
    .. [1] Ledoit, O. and Wolf, M. (2004). Journal of Multivariate Analysis 88(2), 365-411.
    .. [2] Chen, Y., Wiesel, A., Eldar, Y. C. and Hero, A. O. (2010). IEEE Transactions on
       Signal Processing 58(10), 5016-5029.
    .. [3] Ledoit, O. and Wolf, M. (2004). Journal of Portfolio Management 30(4), 110-119.
    .. [4] J.P. Morgan/Reuters (1996). RiskMetrics Technical Document, 4th ed., ch. 5.
    """
    if method not in ESTIMATORS:
        raise InputError(
            f"unknown estimator {method!r}; valid estimators are {', '.join(ESTIMATORS)}",
            key="estimation.estimator",
        )
    arr = _validate(X, columns)
    T, k = arr.shape
    shrinkage: float | None = None

    if method == "sample":
        matrix = sample_covariance(arr)
        detail = f"unbiased sample covariance (ddof=1) of {T} observations"
    elif method in ("ledoit-wolf", "oas"):
        cls = LedoitWolf if method == "ledoit-wolf" else OAS

        def fit(Z):
            est = cls(assume_centered=True).fit(Z)
            return np.asarray(est.covariance_, dtype=np.float64), est.shrinkage_

        matrix, shrinkage = on_correlations(arr, fit)
        label = "Ledoit-Wolf" if method == "ledoit-wolf" else "OAS"
        detail = (
            f"{label} shrinkage of the ddof=0 correlations toward the identity, each series' "
            f"own variance kept, intensity {shrinkage:.3f}, {T} observations"
        )
    elif method == "constant-correlation":
        r_bar = 1.0

        def fit(Z):
            nonlocal r_bar
            inner, delta, r_bar = constant_correlation_shrinkage(Z)
            return inner, delta

        matrix, shrinkage = on_correlations(arr, fit)
        detail = (
            f"Ledoit-Wolf shrinkage of the ddof=0 correlations toward constant correlation "
            f"{r_bar:.3f}, each series' own variance kept, intensity {shrinkage:.3f}, "
            f"{T} observations"
        )
    else:
        lam = ewma_lambda
        if isinstance(lam, bool) or not isinstance(lam, (int, float, np.floating)) or not (
            0.0 < float(lam) < 1.0
        ):
            raise InputError(
                f"ewma_lambda must be a number strictly between 0 and 1, got {lam!r}",
                key="estimation.ewma_lambda",
            )
        matrix, eff = ewma_covariance(arr, float(lam))
        detail = (
            f"EWMA covariance (zero mean), lambda {float(lam):g}, weights normalised over "
            f"{T} observations, effective {eff:.1f}"
        )
        if horizon_days is not None and horizon_days > 1:
            detail += (
                f"; applied to {horizon_days}-day changes, while lambda 0.94 is the "
                "RiskMetrics value for daily data"
            )

    matrix = (matrix + matrix.T) / 2.0
    if not np.isfinite(matrix).all():
        raise InputError(
            f"{method} covariance is not finite (changes too large to square?)",
            key="estimation.estimator",
        )
    if shrinkage is not None:
        shrinkage = float(min(1.0, max(0.0, shrinkage)))
    return CovarianceEstimate(
        matrix=np.ascontiguousarray(matrix),
        method=method,
        shrinkage=shrinkage,
        n_obs=int(T),
        detail=detail,
    )
