"""Risk contributions and shadow prices checked against the definitions they come from."""

from __future__ import annotations

import copy

import pytest

from basiswise.data_adapters.book import Book
from basiswise.data_adapters.toml_file import read_toml
from basiswise.optimizer.pipeline import solve_book
from basiswise.scenarios import demo_book_path


def _demo(update=None) -> Book:
    path = demo_book_path()
    data = copy.deepcopy(read_toml(path, "book file"))
    if update is not None:
        update(data)
    return Book.from_dict(data, path.parent, str(path))


@pytest.mark.parametrize("method", ["continuous", "exact"])
def test_euler_contributions_add_up_to_the_book_std(method):
    report = solve_book(_demo(), method)
    # source: Euler's theorem for positively homogeneous functions of degree 1 (σ(t y) = t σ(y));
    # Tasche, D. (1999), "Risk contributions and performance measurement", TU München, sec. 2:
    # the Euler contributions y_i ∂σ/∂y_i add up to σ
    before = sum(e.risk_before for e in report.exposures)
    assert before == pytest.approx(report.unhedged_std, rel=1e-10)
    after = sum(e.risk_after for e in report.exposures)
    after += sum(i.risk_contribution for i in report.instruments)
    assert after == pytest.approx(report.hedged_std, rel=1e-10)


def _relax_instrument_max(instrument: str, by: float):
    def update(data):
        ins = next(i for i in data["instrument"] if i["id"] == instrument)
        if "position_limit" in ins:
            limit = ins.pop("position_limit")
            ins["min_position"], ins["max_position"] = -limit, limit
        ins["max_position"] += by
    return update


def _relax_group(group: str, by: float):
    def update(data):
        next(g for g in data["group_limit"] if g["id"] == group)["limit"] += by
    return update


def _relax_margin(by: float):
    def update(data):
        data["constraints"]["margin_budget"] += by * 100_000  # shadow unit: 100,000 USD
    return update


@pytest.mark.parametrize("name, relax", [
    ("NATGAS-F3 max", lambda d: _relax_instrument_max("NATGAS-F3", d)),
    ("group 'natgas-all-months' long", lambda d: _relax_group("natgas-all-months", d)),
    ("margin budget", _relax_margin),
])
def test_shadow_price_equals_a_finite_difference(name, relax):
    base = solve_book(_demo(), "continuous")
    line = next(lim for lim in base.limits if lim.name == name)
    assert line.binding and line.shadow > 0
    # source: Luenberger & Ye, Linear and Nonlinear Programming, sensitivity theorem: the
    # Lagrange multiplier is the derivative of the optimal value with respect to the constraint's
    # right-hand side (from memory); σ = sqrt(v) turns dv/dL into dσ/dL = (dv/dL) / (2σ)
    step = 0.02
    relaxed = solve_book(_demo(relax(step)), "continuous")
    finite_difference = (base.hedged_std - relaxed.hedged_std) / step
    assert line.shadow == pytest.approx(finite_difference, rel=2e-2)
    # relaxed by one whole contract (or 100,000 USD), the risk removed is of the same order
    one = solve_book(_demo(relax(1.0)), "continuous")
    assert 0 < base.hedged_std - one.hedged_std <= line.shadow * 1.0 + 1e-6
