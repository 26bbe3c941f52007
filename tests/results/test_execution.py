"""Execution side of a hedge: the schedule, the no-trade rule, the demo's cost output and files."""

from __future__ import annotations

import json
import math
import shutil

import numpy as np
import pandas as pd
import pytest
from typer.testing import CliRunner

from basiswise.cli.app import app
from basiswise.optimizer.pipeline import model_of, prepare, solve_book
from basiswise.optimizer.problem.cost_problem import no_trade_box
from basiswise.optimizer.results.schedule import daily_caps, execution_schedule
from basiswise.scenarios import demo_book_path

DEMO = demo_book_path().parent


@pytest.fixture(scope="module")
def demo_model():
    return model_of(prepare(DEMO / "book.toml"))


def test_schedule_never_exceeds_the_cap_and_sums_to_the_trade(demo_model):
    rng = np.random.default_rng(1)
    caps = daily_caps(demo_model.book)
    lo = np.where(np.isfinite(demo_model.qp.lo), demo_model.qp.lo, -60)
    hi = np.where(np.isfinite(demo_model.qp.hi), demo_model.qp.hi, 60)
    for _ in range(25):
        target = np.array([float(rng.integers(a, b + 1)) for a, b in zip(lo, hi, strict=True)])
        plan = execution_schedule(demo_model, target)
        trades = plan["trades"]
        assert np.all(np.abs(trades) <= caps + 1e-9)
        np.testing.assert_array_equal(trades.sum(axis=0), target - demo_model.current)
        # every day's trade moves towards the target (no round trips)
        assert np.all(trades * np.sign(target - demo_model.current) >= 0)
        need = np.max(np.ceil(np.abs(target - demo_model.current) / caps))
        assert plan["days"] == max(int(need), 1 if np.any(target != demo_model.current) else 0)
        assert len(plan["std_end_of_day"]) == plan["days"]
        if plan["days"]:
            assert plan["std_end_of_day"][-1] == pytest.approx(
                math.sqrt(demo_model.variance(target)))


def test_demo_has_a_line_that_needs_more_than_a_day():
    rep = solve_book(DEMO / "book.toml")
    assert rep.schedule["needed"] and rep.schedule["days"] >= 2
    tc = rep.trading_cost
    assert tc["total"] == pytest.approx(tc["fixed"] + tc["spread"] + tc["impact"])
    assert tc["total"] == pytest.approx(sum(ln["total"] for ln in tc["lines"]))
    assert tc["risk_removed_std"] > 0


def test_no_trade_rule_box_is_the_rule_itself(demo_model):
    qp0 = demo_model.qp
    theta = 60.0
    s0 = demo_model.unhedged_std
    lo, hi, frozen = no_trade_box(qp0, demo_model.costs, theta, demo_model.current, s0)
    x0 = demo_model.current
    sigma0 = s0 * math.sqrt(qp0.variance(x0))
    for j in range(qp0.n):
        for t in range(int(qp0.lo[j] - x0[j]), int(qp0.hi[j] - x0[j]) + 1):
            if t == 0:
                continue
            x = x0.copy()
            x[j] += t
            removed = sigma0 - s0 * math.sqrt(qp0.variance(x))
            cost = demo_model.costs.linear[j] * abs(t) + demo_model.costs.impact[j] * abs(t) ** 1.5
            inside = lo[j] <= x[j] <= hi[j]
            # the rule by its definition: trade allowed iff it removes ≥ θ × its cost
            assert inside == (removed >= theta * cost), (j, t)
    assert frozen.any() or np.all(hi > lo)


def test_solve_json_carries_costs_schedule_and_provenance(tmp_path):
    folder = tmp_path / "demo"
    shutil.copytree(DEMO, folder)
    trades = tmp_path / "trades.csv"
    res = CliRunner().invoke(app, ["solve", str(folder / "book.toml"), "--json", "--trades",
                                   str(trades), "--no-frontier"])
    assert res.exit_code == 0, res.output
    d = json.loads(res.stdout)
    assert d["trading_cost"]["total"] > 0 and d["schedule"]["needed"]
    assert d["provenance"]["book_sha256"] and d["provenance"]["as_of"] == "2025-12-19"
    frame = pd.read_csv(trades)
    assert frame["instrument"].is_unique  # one row per instrument
    for col in ("symbol", "exchange", "last_trade", "cost_total_USD", "book_sha256",
                "prices_sha256", "tool_version", "as_of"):
        assert col in frame.columns
    sched = pd.read_csv(tmp_path / "trades_schedule.csv")
    assert sched.groupby("instrument")["contracts"].sum().to_dict() == \
        frame.set_index("instrument")["contracts"].to_dict()


def test_bad_cost_key_writes_nothing(tmp_path):
    folder = tmp_path / "demo"
    shutil.copytree(DEMO, folder)
    book = folder / "book.toml"
    book.write_text(book.read_text().replace("spread_ticks = 2.00", "spread_ticks = -2.00", 1))
    trades = tmp_path / "trades.csv"
    res = CliRunner().invoke(app, ["solve", str(book), "--trades", str(trades)])
    assert res.exit_code == 2
    assert "spread_ticks" in res.output
    assert not trades.exists() and not (tmp_path / "trades_schedule.csv").exists()


def test_backtest_charges_every_run_the_cost_model_and_runs_the_cost_aware_hedge():
    from basiswise.optimizer.backtest.engine import run_backtest

    res = run_backtest(DEMO / "book.toml", step=120, window=300, method="exact",
                       strategies=["joint-whole", "joint-whole-cost"])
    plain, aware = res.run("joint-whole", "ledoit-wolf"), res.run("joint-whole-cost",
                                                                  "ledoit-wolf")
    for run in (plain, aware):
        assert run.costs.shape == (len(res.dates),) and np.all(run.costs >= 0)
        assert np.all((run.costs > 0) == np.any(run.trades != 0, axis=1))
    # pricing the trades in makes the hedge trade less than the variance-only one on the demo
    assert np.abs(aware.trades).sum() <= np.abs(plain.trades).sum()
    m = {x.strategy: x for x in res.metrics("net")}
    assert m["joint-whole-cost"].trading_cost == pytest.approx(float(aware.costs.sum()))


def test_cost_aware_strategy_needs_a_cost_setting(tmp_path):
    from basiswise.data_adapters.errors import InputError
    from basiswise.optimizer.backtest.engine import run_backtest

    folder = tmp_path / "demo"
    shutil.copytree(DEMO, folder)
    book = folder / "book.toml"
    book.write_text(book.read_text().split("\n[costs]")[0] + "\n")
    with pytest.raises(InputError, match="costs.price_of_risk"):
        run_backtest(book, step=120, window=300, strategies=["joint-whole-cost"])


def test_held_contract_and_its_last_trading_day_follow_the_roll(tmp_path):
    from basiswise.data_adapters.book import load_book
    from basiswise.data_adapters.held_contracts import held_contracts
    from basiswise.data_adapters.prices import load_prices

    from bw_testkit import EXPIRIES, write_rolled_book

    book = load_book(write_rolled_book(tmp_path))
    panel = load_prices(book)
    held = held_contracts(book, panel.last_date)
    lines = (tmp_path / "contracts.csv").read_text().splitlines()
    for series in ("ulsd_m1", "ulsd_m2"):
        # the roll engine's own choice: the file line of the last date's price
        line = lines[int(panel.file_rows[series].iloc[-1]) - 1]
        contract = line.split(",")[1]
        assert held[series][0] == contract
        want = pd.Timestamp(EXPIRIES.set_index("contract").loc[contract, "last_trade"])
        assert held[series][1] == str(want.date())


def test_sweep_base_prices_trades_like_solve():
    from basiswise.optimizer.sweeps.runner import run_sweep
    from basiswise.optimizer.sweeps.scenario_file import parse_scenarios

    book = prepare(DEMO / "book.toml").book
    ss = parse_scenarios({"sweep": {"include_base": True}, "scenario": []}, book)
    res = run_sweep(DEMO / "book.toml", ss, method="exact")
    base = next(r for r in res.results if r.name == "base")
    assert base.hedged_std == pytest.approx(solve_book(DEMO / "book.toml").hedged_std, rel=1e-9)
