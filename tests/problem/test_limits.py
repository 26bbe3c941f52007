"""Hedge-only, no-over-hedge, liquidity and conflicting limits on the demo book."""

from __future__ import annotations

import numpy as np
import pytest

from basiswise.data_adapters.book import load_book
from basiswise.data_adapters.errors import InputError
from basiswise.optimizer.pipeline import model_of, prepare, solve_model
from basiswise.scenarios import demo_book_path

from bw_testkit import copy_demo


def _book(**constraints):
    book = load_book(demo_book_path())
    data = book.model_dump(by_alias=True, exclude_none=True)
    data["constraints"].update(constraints)
    return type(book).from_dict(data, book.folder, "book.toml")


def test_hedge_only_positions_reduce_risk_on_their_own():
    model = model_of(prepare(_book(hedge_only=True)))
    rep = solve_model(model, "exact")
    b = model.qp.b
    x = np.array([i.target for i in rep.instruments])
    # each position on its own lowers the variance: sign opposite to the gradient at zero
    # common practice, no source (a hedge-only rule bars positions that add risk on their own)
    assert np.all(x * b <= 1e-12)


def test_no_over_hedge_caps_group_notional():
    model = model_of(prepare(_book(no_over_hedge=True)))
    rep = solve_model(model, "exact")
    assert rep.ok
    value = {i.id: i.target_notional for i in rep.instruments}
    exp_value = {e.id: e.value for e in rep.exposures}
    book = model.book
    for g in book.group_limits:
        cap = abs(sum(exp_value[e.id] for e in book.exposures if e.proxy in g.instruments))
        if cap == 0:
            continue  # groups no exposure points to are not capped
        assert abs(sum(value[i] for i in g.instruments)) <= cap * (1 + 1e-9)


def test_liquidity_limits_the_trade():
    book = load_book(demo_book_path())
    data = book.model_dump(by_alias=True, exclude_none=True)
    for ins in data["instrument"]:
        ins["adv"], ins["max_participation"], ins["execution_days"] = 10.0, 0.1, 2.0
    book = type(book).from_dict(data, book.folder, "book.toml")
    rep = solve_model(model_of(prepare(book)), "exact")
    # |target - current| <= participation × ADV × days = 2 contracts
    assert max(abs(i.trade) for i in rep.instruments) <= 2
    assert any("liquidity" in i.on_limit for i in rep.instruments)


def test_conflicting_limits_name_the_instrument():
    book = load_book(demo_book_path())
    data = book.model_dump(by_alias=True, exclude_none=True)
    ins = data["instrument"][0]
    ins.pop("position_limit", None)
    ins.update(min_position=-1.0, max_position=1.0, current=9, adv=5.0, max_participation=0.1,
               execution_days=1.0)
    book = type(book).from_dict(data, book.folder, "book.toml")
    with pytest.raises(InputError) as e:
        model_of(prepare(book))
    assert ins["id"] in str(e.value) and "liquidity" in str(e.value)


def test_infeasible_book_names_the_conflict_and_writes_nothing(tmp_path):
    from typer.testing import CliRunner

    from basiswise.cli.app import app

    book_path = copy_demo(tmp_path)
    text = book_path.read_text()
    start = text.index('id = "NATGAS-F1"')
    line = text.index("position_limit", start)
    end = text.index("\n", line)
    # the front gas month must be long 200 or more; even with the other gas months short at
    # their limits the gas group (at most 80 net) cannot hold
    book_path.write_text(text[:line] + "min_position = 200\nmax_position = 300" + text[end:])
    res = CliRunner().invoke(app, ["solve", str(book_path), "--trades", str(tmp_path / "t.csv")])
    assert res.exit_code == 3, res.output
    assert not (tmp_path / "t.csv").exists()
    assert "natgas-all-months" in res.output and "conflict" in res.output
