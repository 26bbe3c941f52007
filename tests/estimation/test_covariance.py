"""Tests for optimizer.covariance against reference libraries and the published formulas."""

from __future__ import annotations

import math

import numpy as np
import pytest
from sklearn.covariance import OAS, LedoitWolf

from basiswise.data_adapters.errors import InputError
from basiswise.optimizer.estimation.covariance import (
    ESTIMATORS,
    constant_correlation_shrinkage,
    estimate_covariance,
)


def _sample(T: int, k: int, seed: int) -> np.ndarray:
    rng = np.random.default_rng(seed)
    # one common factor with unequal loadings (unequal correlations), fat-tailed noise and
    # unequal scales, like commodity changes
    common = rng.normal(size=(T, 1)) * rng.uniform(-0.3, 1.2, size=k)
    X = common + 0.5 * rng.standard_t(df=5, size=(T, k))
    return X * rng.uniform(0.5, 3.0, size=k) + rng.normal(size=k)


def _constant_correlation_loop(X: np.ndarray) -> tuple[np.ndarray, float, float]:
    """Plain transcription of the appendix formulas, one pair at a time."""
    # source: Ledoit & Wolf (2004), "Honey, I shrunk the sample covariance matrix", Journal of
    # Portfolio Management 30(4), appendix (formulas for pi, rho, gamma, kappa; from memory)
    T, k = X.shape
    xbar = [sum(X[t, i] for t in range(T)) / T for i in range(k)]
    y = [[X[t, i] - xbar[i] for i in range(k)] for t in range(T)]
    s = [[sum(y[t][i] * y[t][j] for t in range(T)) / T for j in range(k)] for i in range(k)]
    r_sum = 0.0
    for i in range(k):
        for j in range(k):
            if i != j:
                r_sum += s[i][j] / math.sqrt(s[i][i] * s[j][j])
    r_bar = r_sum / (k * (k - 1))
    F = [
        [s[i][i] if i == j else r_bar * math.sqrt(s[i][i] * s[j][j]) for j in range(k)]
        for i in range(k)
    ]

    def pi_ij(i: int, j: int) -> float:
        return sum((y[t][i] * y[t][j] - s[i][j]) ** 2 for t in range(T)) / T

    def theta(kk: int, i: int, j: int) -> float:
        return (
            sum((y[t][kk] ** 2 - s[kk][kk]) * (y[t][i] * y[t][j] - s[i][j]) for t in range(T))
            / T
        )

    pi_hat = sum(pi_ij(i, j) for i in range(k) for j in range(k))
    rho_hat = sum(pi_ij(i, i) for i in range(k))
    for i in range(k):
        for j in range(k):
            if i != j:
                rho_hat += (r_bar / 2.0) * (
                    math.sqrt(s[j][j] / s[i][i]) * theta(i, i, j)
                    + math.sqrt(s[i][i] / s[j][j]) * theta(j, i, j)
                )
    gamma_hat = sum((F[i][j] - s[i][j]) ** 2 for i in range(k) for j in range(k))
    kappa = (pi_hat - rho_hat) / gamma_hat
    delta = max(0.0, min(1.0, kappa / T))
    out = np.array(
        [[delta * F[i][j] + (1.0 - delta) * s[i][j] for j in range(k)] for i in range(k)]
    )
    return out, delta, r_bar


def _standardise(X: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Centred columns over their ddof=0 standard deviations, and those deviations."""
    Y = X - X.mean(axis=0)
    sd = np.sqrt((Y**2).mean(axis=0))
    return Y / sd, sd


def test_sample_equals_numpy_cov():
    X = _sample(60, 5, 1)
    est = estimate_covariance(X, "sample")
    # source: numpy reference library, numpy.cov(rowvar=False, ddof=1)
    np.testing.assert_allclose(est.matrix, np.cov(X, rowvar=False, ddof=1), rtol=1e-12)
    assert est.shrinkage is None and est.n_obs == 60


@pytest.mark.parametrize("method, cls", [("ledoit-wolf", LedoitWolf), ("oas", OAS)])
def test_shrinkage_equals_sklearn_on_standardised_changes(method, cls):
    X = _sample(80, 7, 2)
    est = estimate_covariance(X, method)
    Z, sd = _standardise(X)
    ref = cls().fit(Z)
    # source: scikit-learn reference library, sklearn.covariance.LedoitWolf / OAS, fitted to the
    # standardised changes and scaled back with each series' standard deviation (correlation
    # shrinkage as in Schäfer & Strimmer 2005, Stat. Appl. Genet. Mol. Biol. 4(1), art. 32)
    np.testing.assert_allclose(est.matrix, ref.covariance_ * np.outer(sd, sd), rtol=1e-12)
    assert est.shrinkage == pytest.approx(ref.shrinkage_, rel=1e-12)
    assert 0.0 <= est.shrinkage <= 1.0
    assert "ddof=0" in est.detail
    # the target keeps every variance: only correlations shrink
    np.testing.assert_allclose(np.diag(est.matrix), np.var(X, axis=0), rtol=1e-12)


@pytest.mark.parametrize("T, k, seed", [(40, 6, 3), (300, 12, 4)])
def test_constant_correlation_formula_matches_loop(T, k, seed):
    X = _sample(T, k, seed)
    fast, delta_fast, _ = constant_correlation_shrinkage(X)
    ref, delta, _ = _constant_correlation_loop(X)
    np.testing.assert_allclose(fast, ref, rtol=1e-10, atol=1e-12)
    assert delta_fast == pytest.approx(delta, rel=1e-10, abs=1e-12)


@pytest.mark.parametrize("T, k, seed", [(40, 6, 3), (300, 12, 4)])
def test_constant_correlation_matches_loop(T, k, seed):
    X = _sample(T, k, seed)
    est = estimate_covariance(X, "constant-correlation")
    Z, sd = _standardise(X)
    ref, delta, _ = _constant_correlation_loop(Z)
    np.testing.assert_allclose(est.matrix, ref * np.outer(sd, sd), rtol=1e-10, atol=1e-12)
    assert est.shrinkage == pytest.approx(delta, rel=1e-10, abs=1e-12)
    assert 0.0 <= est.shrinkage <= 1.0
    np.testing.assert_allclose(est.matrix, est.matrix.T)
    assert np.linalg.eigvalsh(est.matrix).min() > -1e-12


@pytest.mark.parametrize("method", ESTIMATORS)
def test_every_estimator_is_unit_equivariant(method):
    # re-quoting a series (USD/bbl -> USD/gal divides by 42, MMBtu -> GJ by 1.055056) scales
    # its changes; the covariance must scale with them: Σ(X A) = A Σ(X) A for diagonal A > 0
    X = _sample(120, 5, 11)
    a = np.array([1.0, 1.0 / 42.0, 1.0 / 1.055056, 1e3, 1.0])
    base = estimate_covariance(X, method)
    scaled = estimate_covariance(X * a, method)
    np.testing.assert_allclose(scaled.matrix, base.matrix * np.outer(a, a), rtol=1e-10)
    if base.shrinkage is not None:
        assert scaled.shrinkage == pytest.approx(base.shrinkage, rel=1e-10, abs=1e-14)


@pytest.mark.parametrize("method", ["ledoit-wolf", "oas", "constant-correlation"])
def test_series_that_does_not_move_is_left_out_of_shrinkage(method):
    X = _sample(60, 4, 12)
    X[:, 2] = 3.0
    est = estimate_covariance(X, method)
    np.testing.assert_array_equal(est.matrix[2], 0.0)
    np.testing.assert_array_equal(est.matrix[:, 2], 0.0)
    rest = estimate_covariance(np.delete(X, 2, axis=1), method)
    keep = [0, 1, 3]
    np.testing.assert_allclose(est.matrix[np.ix_(keep, keep)], rest.matrix, rtol=1e-12)


def test_constant_correlation_clips_at_one():
    # equal loadings and scales: correlations are nearly constant, kappa / T exceeds 1
    rng = np.random.default_rng(10)
    X = 0.7 * rng.normal(size=(40, 1)) + 0.5 * rng.normal(size=(40, 4))
    est = estimate_covariance(X, "constant-correlation")
    Z, sd = _standardise(X)
    ref, delta, _ = _constant_correlation_loop(Z)
    assert delta == 1.0 and est.shrinkage == 1.0
    np.testing.assert_allclose(est.matrix, ref * np.outer(sd, sd), rtol=1e-10)


def test_constant_correlation_hand_sized_example():
    X = np.array(
        [
            [0.010, 0.012, -0.004],
            [-0.020, -0.015, 0.006],
            [0.005, 0.009, 0.001],
            [0.030, 0.018, -0.010],
            [-0.012, -0.020, 0.008],
            [0.000, 0.004, 0.002],
            [0.018, 0.011, -0.007],
            [-0.025, -0.019, 0.012],
        ]
    )
    est = estimate_covariance(X, "constant-correlation")
    Z, sd = _standardise(X)
    ref, delta, r_bar = _constant_correlation_loop(Z)
    np.testing.assert_allclose(est.matrix, ref * np.outer(sd, sd), rtol=1e-10)
    assert est.shrinkage == pytest.approx(delta, abs=1e-12)
    # source: numpy.corrcoef (reference library): r̄ is the mean off-diagonal correlation
    corr = np.corrcoef(X, rowvar=False)
    assert r_bar == pytest.approx(corr[np.triu_indices(3, 1)].mean(), rel=1e-12)
    assert f"{r_bar:.3f}" in est.detail


def test_constant_correlation_target_structure():
    X = _sample(200, 5, 5)
    est = estimate_covariance(X, "constant-correlation")
    S = np.cov(X, rowvar=False, ddof=0)
    delta = est.shrinkage
    assert 0.0 < delta < 1.0
    # recover the target F from Σ̂ = δF + (1-δ)S
    F = (est.matrix - (1.0 - delta) * S) / delta
    sd = np.sqrt(np.diag(F))
    corr_F = F / np.outer(sd, sd)
    off = ~np.eye(5, dtype=bool)
    # source: Ledoit & Wolf (2004), JPM 30(4), section on the target: F keeps the sample
    # variances and puts the average sample correlation off the diagonal (from memory)
    np.testing.assert_allclose(np.diag(F), np.diag(S), rtol=1e-10)
    np.testing.assert_allclose(np.diag(corr_F), 1.0, rtol=1e-12)
    r_bar = np.corrcoef(X, rowvar=False)[off].mean()
    np.testing.assert_allclose(corr_F[off], r_bar, rtol=1e-9)


def test_constant_correlation_formula_zero_variance_names_column():
    X = _sample(30, 3, 6)
    X[:, 1] = 2.0
    with pytest.raises(InputError) as err:
        constant_correlation_shrinkage(X, columns=["a", "b", "c"])
    assert err.value.column == "b"


def test_ewma_equals_recursion():
    X = _sample(50, 4, 7)
    lam = 0.94  # source: RiskMetrics Technical Document 1996, ch. 5, daily decay (from memory)
    est = estimate_covariance(X, "ewma", ewma_lambda=lam)
    # source: RiskMetrics Technical Document 1996, ch. 5: Σ_t = λ Σ_{t-1} + (1-λ) x_t x_tᵀ,
    # zero mean (from memory). Started from a zero matrix, the weights after T steps sum to
    # 1 - λ^T; dividing by that sum gives the normalised finite-sample form.
    sigma = np.zeros((4, 4))
    for t in range(X.shape[0]):
        sigma = lam * sigma + (1.0 - lam) * np.outer(X[t], X[t])
    sigma /= 1.0 - lam ** X.shape[0]
    np.testing.assert_allclose(est.matrix, sigma, rtol=1e-12)
    assert est.shrinkage is None
    assert "daily" not in est.detail
    horizon = estimate_covariance(X, "ewma", ewma_lambda=lam, horizon_days=20)
    assert "daily" in horizon.detail


def test_ewma_zero_mean_and_long_sample():
    # a constant non-zero change: zero-mean EWMA gives c², not 0 (no demeaning)
    X = np.full((400, 2), 0.5)
    est = estimate_covariance(X, "ewma")
    np.testing.assert_allclose(est.matrix, 0.25, rtol=1e-12)


@pytest.mark.parametrize("method", ESTIMATORS)
def test_every_method_symmetric_finite(method):
    X = _sample(25, 4, 8)
    est = estimate_covariance(X, method)
    assert est.method == method
    assert np.isfinite(est.matrix).all()
    np.testing.assert_array_equal(est.matrix, est.matrix.T)
    assert np.linalg.eigvalsh(est.matrix).min() > -1e-12
    one = estimate_covariance(X[:, :1], method)
    assert one.matrix.shape == (1, 1) and one.matrix[0, 0] > 0


def test_validation():
    X = _sample(10, 3, 9)
    with pytest.raises(InputError) as err:
        estimate_covariance(X, "shrunk")
    assert err.value.key == "estimation.estimator"
    for name in ESTIMATORS:
        assert name in str(err.value)
    with pytest.raises(InputError):
        estimate_covariance(X[:1], "sample")
    with pytest.raises(InputError):
        estimate_covariance(X[:, 0], "sample")
    bad = X.copy()
    bad[4, 2] = np.nan
    with pytest.raises(InputError) as err:
        estimate_covariance(bad, "sample", columns=["a", "b", "c"])
    assert err.value.column == "c"
    with pytest.raises(InputError) as err:
        estimate_covariance(X, "ewma", ewma_lambda=1.0)
    assert err.value.key == "estimation.ewma_lambda"
