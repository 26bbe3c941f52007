"""Scenario files: parsing, grids, validation messages, applying overrides; stress P&L maths."""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest

from basiswise.data_adapters.book import load_book
from basiswise.data_adapters.errors import InputError
from basiswise.optimizer.sweeps.scenario_file import (
    Scenario,
    apply_scenario,
    load_scenarios,
    parse_scenarios,
)
from basiswise.optimizer.sweeps.stress import (
    historical_moves,
    shock_vector,
    stress_pnl,
    worst_window,
)
from basiswise.scenarios import demo_book_path

DEMO = demo_book_path().parent


@pytest.fixture(scope="module")
def book():
    return load_book(DEMO / "book.toml")


def test_shipped_file_parses_and_expands(book):
    ss = load_scenarios(DEMO / "limit_cuts.toml", book)
    names = ss.names()
    assert names[0] == "base"
    grid = [s for s in ss if s.name.startswith("limit-cut ")]
    assert [s.get("limit_scale") for s in grid] == [0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.7, 0.8,
                                                      0.9, 1.0]
    assert len(names) == len(set(names)) == 1 + 10 + 10
    # defaults reach every scenario unless it picks its own stress
    assert ss.scenarios[0].get("replay_worst") == "unhedged"
    squeeze = next(s for s in ss if s.name == "gas-squeeze")
    assert "replay_worst" not in squeeze.settings and "shock_pct" in squeeze.settings


def test_grid_is_the_product_of_its_axes(book):
    data = {"sweep": {"include_base": False},
            "grid": [{"name": "g", "estimator": "oas",
                      "vary": {"limit_scale": [0.5, 1.0],
                               "window": {"start": 100, "stop": 300, "step": 100}}}]}
    ss = parse_scenarios(data, book)
    assert len(ss) == 2 * 3
    assert ss.names()[0] == "g limit_scale=0.5 window=100"
    assert all(s.get("estimator") == "oas" for s in ss)
    assert {s.get("window") for s in ss} == {100, 200, 300}


BAD = [
    ({"scenario": [{"name": "a", "limit_scael": 0.5}]}, "scenario 'a'.limit_scael", "unknown"),
    ({"scenario": [{"name": "a", "instrument_limits": {"NOPE": 5}}]},
     "scenario 'a'.instrument_limits.NOPE", "not an instrument"),
    ({"scenario": [{"name": "a", "group_limits": {"nope": 5}}]},
     "scenario 'a'.group_limits.nope", "not a group"),
    ({"scenario": [{"name": "a", "shock_pct": {"jet_m1": 10}}]},
     "scenario 'a'.shock_pct.jet_m1", "not declared"),
    ({"scenario": [{"name": "a", "remove": ["CRUDE-F1"],
                    "instrument_limits": {"CRUDE-F1": 5}}]},
     "scenario 'a'.instrument_limits.CRUDE-F1", "conflicts with remove"),
    ({"scenario": [{"name": "a", "participation": 0.1, "participation_scale": 2}]},
     "scenario 'a'.participation_scale", "conflicts"),
    ({"scenario": [{"name": "a", "shock_pct": {"crude_m1": 5}, "replay_worst": "hedged"}]},
     "scenario 'a'.replay_worst", "conflicts"),
    ({"scenario": [{"name": "a"}, {"name": "a"}]}, "scenario 'a'.name", "twice"),
    ({"scenario": [{"name": "a", "margin_scale": -1}]}, "scenario 'a'.margin_scale", "above 0"),
    ({"scenario": [{"name": "a", "estimator": "magic"}]}, "scenario 'a'.estimator", "not valid"),
    ({"scenario": [{"limit_scale": 0.5}]}, "scenario[1].name", "missing"),
    ({"grid": [{"name": "g", "limit_scale": 1, "vary": {"limit_scale": [1, 2]}}]},
     "grid 'g'.vary.limit_scale", "both varied and fixed"),
    ({"grid": [{"name": "g", "vary": {"window": [100, 1]}}]}, "grid 'g'.vary.window[2]",
     "at least 2"),
    ({"defaults": {"shock_pct": {"nowhere": 1}}}, "defaults.shock_pct.nowhere", "not declared"),
    ({"scenarios": []}, "scenarios", "unknown top-level"),
]


@pytest.mark.parametrize(("data", "key", "words"), BAD)
def test_bad_scenarios_name_scenario_and_key(book, data, key, words):
    with pytest.raises(InputError) as info:
        parse_scenarios(data, book, "cuts.toml")
    assert info.value.key == key
    assert info.value.file == "cuts.toml"
    assert words in str(info.value) and key in str(info.value)


def test_removing_every_instrument_is_refused(book):
    data = {"scenario": [{"name": "none", "remove": [i.id for i in book.instruments]}]}
    with pytest.raises(InputError, match="removes every instrument"):
        parse_scenarios(data, book)


def test_syntax_error_names_file(tmp_path, book):
    p = tmp_path / "s.toml"
    p.write_text("[[scenario]\nname = 1\n", encoding="utf-8")
    with pytest.raises(InputError, match="TOML syntax"):
        load_scenarios(p, book)


def _apply(book, **settings):
    ss = parse_scenarios({"sweep": {"include_base": False},
                          "scenario": [{"name": "s", **settings}]}, book)
    return apply_scenario(book, ss.scenarios[0])


def test_limit_scale_scales_instrument_and_group_limits(book):
    b = _apply(book, limit_scale=0.5)
    assert b.instrument("CRUDE-F1").bounds() == (-20.0, 20.0)       # position_limit 40
    assert b.instrument("ULSD-F3").bounds() == (-5.0, 10.0)         # min -10, max 20
    assert [g.limit for g in b.group_limits] == [g.limit / 2 for g in book.group_limits]
    assert book.instrument("CRUDE-F1").bounds() == (-40.0, 40.0)    # original untouched


def test_explicit_limits_win_over_the_scale(book):
    b = _apply(book, limit_scale=0.5, instrument_limits={"CRUDE-F1": [-3, 7], "CRUDE-F2": 4,
                                                          "CRUDE-F3": {"max": 2}},
               group_limits={"crude-all-months": 9})
    assert b.instrument("CRUDE-F1").bounds() == (-3.0, 7.0)
    assert b.instrument("CRUDE-F2").bounds() == (-4.0, 4.0)
    assert b.instrument("CRUDE-F3").bounds() == (-math.inf, 2.0)
    assert next(g for g in b.group_limits if g.id == "crude-all-months").limit == 9
    assert next(g for g in b.group_limits if g.id == "ulsd-all-months").limit == 20


def test_remove_drops_instruments_groups_and_proxies(book):
    b = _apply(book, remove=["GASOLINE-F1", "GASOLINE-F2", "CRUDE-F1"])
    ids = [i.id for i in b.instruments]
    assert "CRUDE-F1" not in ids and "GASOLINE-F1" not in ids and len(ids) == 8
    assert "gasoline-all-months" not in [g.id for g in b.group_limits]
    crude = next(g for g in b.group_limits if g.id == "crude-all-months")
    assert crude.instruments == ["CRUDE-F2", "CRUDE-F3"]
    assert all(e.proxy != "CRUDE-F1" for e in b.exposures)


def test_liquidity_and_margin_overrides(book):
    b = _apply(book, adv_scale=0.5, participation_scale=20, margin_scale=2,
               margin_budget=123_000)
    for new, old in zip(b.instruments, book.instruments, strict=True):
        assert new.adv == old.adv * 0.5
        assert new.max_participation == min(1.0, old.max_participation * 20)
        assert new.margin == old.margin * 2
    assert b.constraints.margin_budget == 123_000
    b2 = _apply(book, participation=0.05)
    assert {i.max_participation for i in b2.instruments} == {0.05}


def test_estimation_keys_are_left_to_the_caller(book):
    s = Scenario("x", {"window": 250, "estimator": "oas", "limit_scale": 1.0})
    assert s.estimation == {"window": 250, "estimator": "oas"}
    assert apply_scenario(book, s).estimation == book.estimation


# --------------------------------------------------------------------------- stress maths


def test_stress_pnl_matches_a_hand_computation():
    rng = np.random.default_rng(3)
    E = np.array([[-1000.0, 0, 0], [0, -500.0, 0], [0, 0, 200.0]])
    C = np.array([[100.0, 0, 0], [0, 0, 50.0]])
    n = np.array([7.0, -2.0])
    prices = np.array([80.0, 2.5, 3.1])
    pct = {"a": -10.0, "c": 25.0}
    dP = shock_vector(["a", "b", "c"], prices, pct)
    # source: Jorion (2007), Value at Risk, 3rd ed., ch. 14 (from memory): a linear book's
    # stress P&L is the sum over positions of quantity × price move
    assert np.allclose(dP, [-8.0, 0.0, 0.775])
    hand_unhedged = sum(E[i, s] * dP[s] for i in range(3) for s in range(3))
    hand_hedged = hand_unhedged + sum(n[j] * C[j, s] * dP[s] for j in range(2) for s in range(3))
    res = stress_pnl(E, C, n, dP)
    assert res.unhedged == pytest.approx(hand_unhedged, rel=1e-12)
    assert res.hedged == pytest.approx(hand_hedged, rel=1e-12)
    assert res.unhedged == pytest.approx(8000.0 + 200 * 0.775)
    x = rng.normal(size=2)
    assert stress_pnl(E, C, x, dP).hedge_pnl == pytest.approx(float((C.T @ x) @ dP))


def test_worst_window_is_the_brute_force_minimum():
    rng = np.random.default_rng(11)
    idx = pd.bdate_range("2024-01-01", periods=60)
    prices = pd.DataFrame(50 * np.exp(np.cumsum(rng.normal(0, 0.02, (60, 2)), axis=0)),
                          index=idx, columns=["x", "y"])
    hist = historical_moves(prices, horizon_days=5, kind="relative")
    now = prices.iloc[-1].to_numpy()
    y = np.array([-300.0, 120.0])
    best, best_t = np.inf, None
    for t in range(60 - 5):   # common practice, no source: historical simulation by brute force
        move = (prices.iloc[t + 5].to_numpy() / prices.iloc[t].to_numpy() - 1) * now
        if move @ y < best:
            best, best_t = float(move @ y), t
    t, move, label = worst_window(hist, y)
    assert t == best_t and float(move @ y) == pytest.approx(best, rel=1e-12)
    assert str(idx[best_t + 5].date()) in label
    absolute = historical_moves(prices, horizon_days=5, kind="absolute")
    assert np.allclose(absolute.moves[0], prices.iloc[5] - prices.iloc[0])
