"""Trading cost: the cost model by hand, the exact solver with costs against brute force, SCIP and
its compiled twin, the no-trade rule, the execution schedule and the bad-input messages."""

from __future__ import annotations

import itertools
import math
import time
from dataclasses import replace

import numpy as np
import pandas as pd
import pytest

from basiswise.data_adapters.book import Book
from basiswise.data_adapters.errors import InputError
from basiswise.optimizer.problem.cost_formulation import solve_scip_costs
from basiswise.optimizer.problem.cost_terms import CostTerms
from basiswise.optimizer.problem.costs import cost_model, daily_volatility
from basiswise.optimizer.problem.formulation import solve_relaxed
from basiswise.optimizer.problem.qp import HedgeQP
from basiswise.optimizer.solvers.bounds import prepare_root
from basiswise.optimizer.solvers.exact import solve_exact
from basiswise.optimizer.solvers.native_search import native_search
from basiswise.optimizer.solvers.rounding import integer_box
from basiswise.optimizer.solvers.search import enumerate_levels

from bw_testkit import book_dict

needs_native = pytest.mark.skipif(not native_search(), reason="no compiled search here")


def _book(tmp_path, **inst) -> Book:
    ins = {"id": "CL", "series": "crude", "contract_size": 1000, "unit": "bbl", "adv": 400.0,
           **inst}
    data = book_dict("p.csv", {"crude": "USD/bbl"},
                     [{"id": "e", "series": "crude", "quantity": -50_000, "unit": "bbl"}], [ins])
    return Book.from_dict(data, tmp_path, "book.toml")


def test_cost_model_matches_a_hand_computation(tmp_path):
    book = _book(tmp_path, cost_per_contract=2.5, spread=0.02, impact_coefficient=0.5)
    C = np.array([[1000.0]])
    cm = cost_model(book, C, np.array([80.0]), ["crude"], pd.Series({"crude": 0.02}))
    parts = cm.parts(np.array([-25.0]))
    # by hand, a trade of 25 contracts (either side):
    #   fixed  = 25 × 2.50 USD                                = 62.50 USD
    #   spread = 25 × (0.02 / 2 USD/bbl × 1000 bbl)           = 25 × 10 = 250.00 USD
    #   impact = Y σ × notional × √(Q/ADV)
    #          = 0.5 × 0.02 × (25 × 1000 bbl × 80 USD/bbl) × √(25/400)
    #          = 0.01 × 2,000,000 × 0.25                      = 5,000.00 USD
    # source: Tóth et al. (2011), Phys. Rev. X 1, 021006, eq. for the square-root impact
    # I(Q) = Y σ √(Q/V) (from memory); half-spread cost of a marketable order: common practice
    assert parts["fixed"][0] == pytest.approx(62.5)
    assert parts["spread"][0] == pytest.approx(250.0)
    assert parts["impact"][0] == pytest.approx(5000.0)
    assert cm.total(np.array([-25.0])) == pytest.approx(5312.5)
    assert cm.total(np.array([0.0])) == 0.0


def test_spread_in_ticks_is_half_the_ticks_times_the_tick_value(tmp_path):
    book = _book(tmp_path, spread_ticks=3.0, tick_value=10.0)
    cm = cost_model(book, np.array([[1000.0]]), np.array([80.0]), ["crude"], None)
    # by hand: 3 ticks × 10 USD / 2 = 15 USD per contract; 4 contracts = 60 USD
    # common practice, no source
    assert cm.total(np.array([4.0])) == pytest.approx(60.0)
    assert cm.impact[0] == 0.0


def test_daily_volatility_is_numpys_std_of_daily_relative_changes():
    rng = np.random.default_rng(3)
    p = pd.DataFrame({"a": 50 * np.exp(np.cumsum(rng.normal(0, 0.02, 300)))})
    r = p["a"].to_numpy()[-101:]
    # source: numpy.std (ddof=1) of P_t / P_{t-1} − 1 over the last 100 changes
    want = np.std(r[1:] / r[:-1] - 1, ddof=1)
    assert daily_volatility(p, 100)["a"] == pytest.approx(want, rel=1e-12)


# ------------------------------------------------------------------ exact solver with costs


def cost_book(rng: np.random.Generator, form: str, min_trade: int = 1) -> HedgeQP:
    """Small book with a meaningful hedge, positions held now and cost terms."""
    n = int(rng.integers(2, 5))
    k = n + 2
    base = rng.normal(size=(k, 1))
    M = (0.8 * base + rng.normal(size=(k, n))) * rng.uniform(0.3, 1.0)
    u = -M @ rng.uniform(-3, 3, n) + 0.1 * rng.normal(size=k)
    width = rng.integers(2, 5, n).astype(float)
    cur = np.array([float(rng.integers(-w, w + 1)) for w in width])
    lin = rng.uniform(0.0, 0.3, n)
    imp = rng.uniform(0.0, 0.2, n)
    G, h = np.zeros((0, n)), np.zeros(0)
    if rng.random() < 0.4:
        G, h = np.vstack([np.ones(n), -np.ones(n)]), np.array([3.0, 3.0])
        cur = np.zeros(n)
    budget = None
    if form == "budget":
        budget = float(rng.uniform(0.5, 2.0))
    ct = CostTerms(current=cur, lin=lin, imp=imp, in_objective=form == "price", budget=budget,
                   min_trade=np.full(n, min_trade, dtype=np.int64), to_currency=1.0)
    return HedgeQP(M=M, u=u, lo=-width, hi=width, G=G, h=h, cost=ct)


def brute_force_costs(qp: HedgeQP) -> float:
    """Best objective over every whole point of the box (exact by construction)."""
    best = math.inf
    for x in itertools.product(*[range(int(a), int(b) + 1) for a, b in zip(qp.lo, qp.hi,
                                                                            strict=True)]):
        x = np.array(x, dtype=float)
        if qp.is_feasible(x):
            best = min(best, qp.value(x))
    return best


@pytest.mark.parametrize("engine", ["python", "native"])
@pytest.mark.parametrize("form,min_trade", [("price", 1), ("price", 2), ("budget", 1),
                                            ("budget", 3)])
def test_exact_with_costs_equals_brute_force(monkeypatch, engine, form, min_trade):
    if engine == "native" and not native_search():
        pytest.skip("no compiled search here")
    if engine == "python":
        monkeypatch.setenv("BASISWISE_SEARCH", "python")
    rng = np.random.default_rng(100 + min_trade + (form == "budget"))
    for _ in range(12):
        qp = cost_book(rng, form, min_trade)
        res = solve_exact(qp, start=qp.cost.current)
        # source: exhaustive enumeration of every integer point, exact by construction
        best = brute_force_costs(qp)
        assert res.status == "certified"
        assert res.objective == pytest.approx(best, abs=1e-9)
        assert res.bound <= best + 1e-9
        assert qp.is_feasible(res.x)


def test_exact_with_costs_equals_scip():
    rng = np.random.default_rng(7)
    for form, mt in [("price", 1), ("price", 2), ("budget", 1), ("budget", 2)]:
        for _ in range(3):
            qp = cost_book(rng, form, mt)
            res = solve_exact(qp, start=qp.cost.current)
            # source: SCIP through cvxpy on the same mixed-integer program (power cone for
            # |t|^1.5, binaries for the minimum trade)
            ref = solve_scip_costs(qp)
            assert ref.x is not None
            assert res.objective <= qp.value(ref.x) + 1e-6
            assert res.objective == pytest.approx(qp.value(ref.x), abs=1e-5)


def test_the_root_bound_with_costs_stays_below_every_point():
    rng = np.random.default_rng(11)
    for form in ("price", "budget"):
        for _ in range(10):
            qp = cost_book(rng, form)
            rel = solve_relaxed(qp)
            lo, hi = integer_box(qp)
            root = prepare_root(qp, rel.x, rel.dual_rows, rel.dual_margin, lo, hi, math.inf,
                                rel.dual_cost)
            if root is None:
                continue
            # source: exhaustive enumeration of every integer point, exact by construction
            assert root.K <= brute_force_costs(qp) + 1e-9


@needs_native
def test_compiled_search_with_costs_equals_python_node_for_node():
    rng = np.random.default_rng(99)
    compared = 0
    for k in range(30):
        qp = cost_book(rng, "price" if k % 2 else "budget", 1 + k % 3)
        rel = solve_relaxed(qp)
        lo, hi = integer_box(qp)
        cur = qp.cost.current
        f0 = qp.value(cur)
        root = prepare_root(qp, rel.x, rel.dual_rows, rel.dual_margin, lo, hi, f0, rel.dual_cost)
        if root is None or root.K >= f0:
            continue
        py = enumerate_levels(qp, root, f0, cur, time.perf_counter() + 60, engine="python")
        nat = enumerate_levels(qp, root, f0, cur, time.perf_counter() + 60, engine="native")
        assert py[3] is None and nat[3] is None
        assert nat[2] == py[2]
        assert nat[0] == pytest.approx(py[0], abs=1e-12)
        compared += 1
    assert compared >= 15


def test_minimum_trade_is_met_exactly():
    rng = np.random.default_rng(5)
    for _ in range(10):
        qp = cost_book(rng, "price", 3)
        res = solve_exact(qp, start=qp.cost.current)
        t = np.abs(res.x - qp.cost.current)
        assert np.all((t == 0) | (t >= 3))


def test_no_cost_problem_is_unchanged_by_a_zero_cost_term():
    rng = np.random.default_rng(8)
    for _ in range(5):
        qp = cost_book(rng, "price")
        bare = replace(qp, cost=None)
        zero = replace(qp.cost, lin=np.zeros(qp.n), imp=np.zeros(qp.n))
        a = solve_exact(bare)
        b = solve_exact(replace(qp, cost=zero), start=qp.cost.current)
        assert b.objective == pytest.approx(a.objective, abs=1e-9)


# ------------------------------------------------------------------ bad input


@pytest.mark.parametrize("inst,costs,key,words", [
    ({"spread": -0.01}, {}, "instrument 'CL'.spread", "greater than or equal"),
    ({"cost_per_contract": -1.0}, {}, "instrument 'CL'.cost_per_contract", "greater"),
    ({"impact_coefficient": 0.5, "adv": None}, {}, "instrument 'CL'.impact_coefficient", "adv"),
    ({}, {"budget": 1000.0}, "costs.budget", "cost model"),
    ({}, {"no_trade_ratio": 2.0}, "costs.no_trade_ratio", "costs are zero"),
    ({"spread_ticks": 2.0}, {}, "instrument 'CL'.tick_value", "tick_value"),
    ({"spread": 0.01}, {"budget": 10.0, "price_of_risk": 5.0}, "costs.budget", "not both"),
])
def test_bad_cost_keys_give_one_message_naming_the_key(tmp_path, inst, costs, key, words):
    ins = {"id": "CL", "series": "crude", "contract_size": 1000, "unit": "bbl", "adv": 400.0,
           **inst}
    ins = {k: v for k, v in ins.items() if v is not None}
    data = book_dict("p.csv", {"crude": "USD/bbl"},
                     [{"id": "e", "series": "crude", "quantity": -50_000, "unit": "bbl"}], [ins])
    if costs:
        data["costs"] = costs
    with pytest.raises(InputError) as err:
        Book.from_dict(data, tmp_path, "book.toml")
    assert key in str(err.value)
    assert words in str(err.value)


def test_exact_with_costs_and_a_margin_budget_equals_brute_force():
    rng = np.random.default_rng(31)
    for k in range(12):
        qp = cost_book(rng, "price" if k % 2 else "budget", 1 + k % 3)
        m = rng.uniform(0.5, 1.5, qp.n)
        qp = replace(qp, margin=m, margin_budget=float(m.sum() * 1.5))
        start = qp.cost.current if qp.is_feasible(qp.cost.current) else None
        res = solve_exact(qp, start=start)
        # source: exhaustive enumeration of every integer point, exact by construction
        best = brute_force_costs(qp)
        if math.isinf(best):
            assert res.status == "infeasible"
            continue
        assert res.status == "certified"
        assert res.objective == pytest.approx(best, abs=1e-9)
