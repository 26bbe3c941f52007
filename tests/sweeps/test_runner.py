"""Running scenario sweeps: results, infeasible scenarios, reuse, processes, Dask, the CLI."""

from __future__ import annotations

import json

import numpy as np
import pytest
from typer.testing import CliRunner

from basiswise.cli.app import app
from basiswise.data_adapters.book import load_book
from basiswise.optimizer.sweeps.runner import SweepRunner, run_sweep
from basiswise.optimizer.sweeps.scenario_file import parse_scenarios

from bw_testkit import DEMO_FILES, copy_demo

SCENARIOS = {
    "defaults": {"replay_worst": "unhedged"},
    "scenario": [
        {"name": "half", "limit_scale": 0.5},
        {"name": "gas-up", "shock_pct": {"natgas_m1": 40, "hub_gas_m1": 45}},
        {"name": "no-third-month", "remove": ["CRUDE-F3", "ULSD-F3", "NATGAS-F3"]},
        {"name": "margin-x2", "margin_scale": 2.0},
        {"name": "oas", "estimator": "oas", "window": 250},
        {"name": "gas-minimums",
         "instrument_limits": {"NATGAS-F1": [45, 50], "NATGAS-F2": [40, 50],
                               "NATGAS-F3": [0, 40]}},
        {"name": "margin-too-small", "instrument_limits": {"CRUDE-F1": [30, 40]},
         "margin_budget": 100_000},
        {"name": "no-liquidity", "instrument_limits": {"CRUDE-F2": [30, 40]}, "adv_scale": 1e-6},
    ],
    "grid": [{"name": "cut", "vary": {"limit_scale": [0.2, 0.6]}}],
}


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    path = copy_demo(tmp_path_factory.mktemp("sweep"), (*DEMO_FILES, "limit_cuts.toml"))
    return path, parse_scenarios(SCENARIOS, load_book(path), "test.toml")


@pytest.fixture(scope="module")
def serial(demo):
    path, ss = demo
    return run_sweep(path, ss, method="continuous")


def _by_name(res):
    return {r.name: r for r in res.results}


def test_infeasible_scenarios_name_their_conflict_while_others_run(serial):
    r = _by_name(serial)
    gas = r["gas-minimums"]
    assert not gas.feasible and gas.status == "infeasible"
    assert "natgas-all-months" in gas.conflicts[0] and "85" in gas.conflicts[0]
    assert "NATGAS-F1 minimum 45" in gas.conflicts[0]
    margin = r["margin-too-small"]
    assert not margin.feasible and "margin budget" in margin.conflicts[0]
    assert "CRUDE-F1 30" in margin.conflicts[0]
    liq = r["no-liquidity"]
    assert not liq.feasible and "CRUDE-F2" in liq.conflicts[0]
    assert "liquidity" in liq.conflicts[0]
    ok = [x for x in serial.results if x.feasible]
    assert len(ok) == len(serial.results) - 3
    assert all(0 < x.variance_reduction <= 1 for x in ok)


def test_results_are_consistent(serial):
    r = _by_name(serial)
    base = r["base"]
    # tighter limits cannot lower the optimum's residual risk
    assert r["cut limit_scale=0.2"].hedged_std > r["cut limit_scale=0.6"].hedged_std
    assert r["cut limit_scale=0.6"].hedged_std > base.hedged_std
    assert r["half"].hedged_std >= base.hedged_std
    assert set(r["no-third-month"].contracts) == set(base.contracts) - {
        "CRUDE-F3", "ULSD-F3", "NATGAS-F3"}
    assert base.margin_used <= base.margin_budget * (1 + 1e-6)
    assert any(b["name"] == "margin budget" and b["shadow"] > 0 for b in base.binding)
    json.dumps(serial.to_dict(), allow_nan=False)


def test_stress_pnl_equals_numpy_on_the_model(demo, serial):
    path, ss = demo
    runner = SweepRunner(path, method="continuous")
    sc = next(s for s in ss if s.name == "gas-up")
    model, _ = runner.model(sc)
    res = _by_name(serial)["gas-up"]
    n = np.array([res.contracts[i] for i in model.instrument_ids])
    dP = np.zeros(len(model.series))
    for s, p in {"natgas_m1": 40, "hub_gas_m1": 45}.items():
        k = model.series.index(s)
        dP[k] = p / 100 * model.prices[k]
    # common practice, no source: linear P&L = position per series · price move
    assert res.stress["unhedged"] == pytest.approx(float(model.E.sum(0) @ dP), rel=1e-10)
    assert res.stress["hedged"] == pytest.approx(
        float((model.E.sum(0) + model.C.T @ n) @ dP), rel=1e-10)


def test_wide_limits_reach_the_unconstrained_optimum(demo):
    path, _ = demo
    book = load_book(path)
    ss = parse_scenarios({"sweep": {"include_base": False}, "scenario": [
        {"name": "free", "limit_scale": 1e4, "adv_scale": 1e6, "margin_budget": 1e12}]}, book)
    runner = SweepRunner(path, method="continuous")
    res = run_sweep(path, ss, method="continuous", runner=runner)
    model, _ = runner.model(ss.scenarios[0])
    # source: Anderson & Danthine (1981), J. Political Economy 89(6): the joint minimum-variance
    # hedge solves the normal equations Σ_FF (c∘n) = −Σ_FS q, i.e. least squares of M n ≈ −u
    ref = np.linalg.lstsq(model.qp.M, -model.qp.u, rcond=None)[0]
    got = np.array([res.results[0].contracts[i] for i in model.instrument_ids])
    assert np.allclose(got, ref, rtol=1e-4, atol=1e-3)


def test_parameter_reuse_equals_rebuild(demo, serial):
    path, ss = demo
    rebuilt = run_sweep(path, ss, method="continuous", reuse=False)
    for a, b in zip(serial.results, rebuilt.results, strict=True):
        assert a.status == b.status
        if a.feasible:
            fa = (a.relaxed_std / a.unhedged_std) ** 2
            fb = (b.relaxed_std / b.unhedged_std) ** 2
            assert abs(fa - fb) < 1e-8


def test_exact_method_gives_whole_contracts_above_the_bound(demo):
    path, ss = demo
    some = [s for s in ss if s.name in ("base", "half", "gas-minimums")]
    res = run_sweep(path, some, method="exact")
    for r in res.results:
        if r.feasible:
            assert all(float(v).is_integer() for v in r.contracts.values())
            assert r.hedged_std >= r.relaxed_std * (1 - 1e-9)
    assert [r.feasible for r in res.results] == [True, True, False]


def _same(a, b):
    assert [r.name for r in a.results] == [r.name for r in b.results]
    for x, y in zip(a.results, b.results, strict=True):
        assert x.status == y.status and x.conflicts == y.conflicts
        if x.feasible:
            assert x.hedged_std == pytest.approx(y.hedged_std, rel=1e-9)
            for k in x.contracts:
                assert x.contracts[k] == pytest.approx(y.contracts[k], rel=1e-7, abs=1e-7)


def test_local_processes_equal_serial(demo, serial):
    path, ss = demo
    seen = []
    res = run_sweep(path, ss, method="continuous", workers=2,
                    progress=lambda d, t: seen.append((d, t)))
    _same(serial, res)
    assert seen[-1] == (len(ss), len(ss))


def test_dask_local_cluster_equals_serial(demo, serial):
    distributed = pytest.importorskip("distributed")
    path, ss = demo
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                  dashboard_address=":0", silence_logs=40) as cluster:
        res = run_sweep(path, ss, method="continuous", scheduler=cluster.scheduler_address)
    assert res.mode.startswith("dask (2 workers")
    _same(serial, res)


runner = CliRunner()


def test_cli_json_csv_and_png(demo, tmp_path):
    path, _ = demo
    scen = path.parent / "limit_cuts.toml"
    png, csv = tmp_path / "frontier.png", tmp_path / "rows.csv"
    res = runner.invoke(app, ["sweep", str(path), str(scen), "--method", "continuous", "--json",
                              "--png", str(png), "--csv", str(csv), "--workers", "1"])
    assert res.exit_code == 0, res.output
    data = json.loads(res.stdout)
    assert data["scenarios"][0]["name"] == "base" and data["frontier"]
    assert any(s["status"] == "infeasible" for s in data["scenarios"])
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert len(csv.read_text().strip().splitlines()) == 1 + len(data["scenarios"])


def test_cli_table(demo):
    path, _ = demo
    res = runner.invoke(app, ["sweep", str(path), str(path.parent / "limit_cuts.toml"),
                              "--method", "continuous", "--workers", "1"])
    assert res.exit_code == 0, res.output
    for words in ("Scenarios", "Contracts per instrument", "Limit frontier", "Cautions",
                  "infeasible"):
        assert words in res.output


def test_cli_bad_scenario_writes_nothing(demo, tmp_path):
    path, _ = demo
    bad = tmp_path / "bad.toml"
    bad.write_text('[[scenario]]\nname = "x"\nremove = ["NOPE-F9"]\n', encoding="utf-8")
    png = tmp_path / "f.png"
    res = runner.invoke(app, ["sweep", str(path), str(bad), "--png", str(png), "--method",
                              "continuous"])
    assert res.exit_code == 2
    assert "scenario 'x'.remove[1]" in res.output and "NOPE-F9" in res.output
    assert not png.exists()
    res = runner.invoke(app, ["sweep", str(path), str(bad), "--method", "nope"])
    assert res.exit_code == 2
