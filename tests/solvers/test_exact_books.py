"""Whole-contract answers on random small books equal exhaustive enumeration."""

from __future__ import annotations

import numpy as np
import pytest

from basiswise.optimizer.pipeline import model_of, prepare, solve_model

from bw_testkit import book_dict, brute_force, make_book, write_wide


def _random_book(tmp_path, seed: int):
    rng = np.random.default_rng(seed)
    n_exp, n_ins = int(rng.integers(1, 3)), int(rng.integers(2, 4))
    k = n_exp + n_ins
    a = rng.normal(size=(k, k)) * 0.3 + np.eye(k) * 0.2
    common = rng.normal(size=(200, 1))
    dx = (common @ np.ones((1, k)) + rng.normal(size=(200, k)) @ a) * 0.05
    cols = [f"s{i}" for i in range(k)]
    write_wide(tmp_path / "prices.csv", dx, cols, [50.0] * k)
    exposures = [{"id": f"e{i}", "series": cols[i], "unit": "bbl",
                  "quantity": float(rng.choice([-1, 1]) * rng.integers(2_000, 9_000))}
                 for i in range(n_exp)]
    instruments = []
    for j in range(n_ins):
        ins = {"id": f"F{j}", "series": cols[n_exp + j], "unit": "bbl", "contract_size": 1000.0,
               "margin": float(rng.integers(1, 5)) * 1000.0}
        if rng.random() < 0.5:
            ins["position_limit"] = float(rng.integers(1, 4))
        else:
            ins["min_position"] = float(-rng.integers(0, 5))
            ins["max_position"] = float(rng.integers(0, 5))
        instruments.append(ins)
    extra = {}
    if rng.random() < 0.6:
        extra["group_limit"] = [{"id": "g", "instruments": ["F0", "F1"],
                                 "limit": float(rng.integers(1, 4))}]
    if rng.random() < 0.6:
        extra["constraints"] = {"margin_budget": float(rng.integers(2, 10)) * 1000.0}
    data = book_dict("prices.csv", {c: "USD/bbl" for c in cols}, exposures, instruments,
                     estimation={"window": 201, "changes": "absolute", "estimator": "sample",
                                 "sampling": "overlapping"}, **extra)
    return make_book(tmp_path, data)


@pytest.mark.parametrize("seed", range(60))
def test_exact_equals_enumeration_on_random_books(tmp_path, seed):
    book = _random_book(tmp_path, seed)
    model = model_of(prepare(book))
    report = solve_model(model, "exact")
    # reference: exhaustive enumeration of every whole-contract position in the box, scored by the
    # model's variance in currency², exact by construction
    best, minimisers = brute_force(model.qp, model.variance)
    if not minimisers:
        assert not report.ok
        return
    assert report.status == "certified"
    assert report.hedged_std**2 == pytest.approx(best, rel=1e-7, abs=1e-6)
    assert report.relaxed_hedged_std <= report.hedged_std * (1 + 1e-9)
