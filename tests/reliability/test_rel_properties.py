"""Property-based checks (Hypothesis): loaders raise only InputError; random valid books solve.

Bounded for CI: each property runs a fixed number of examples (``max_examples``), with no
deadline (no test here depends on wall time), derandomised so a failure reproduces. For a deeper
local search: ``BASISWISE_HYPOTHESIS_EXAMPLES=2000 BASISWISE_HYPOTHESIS_RANDOM=1 pytest ...``.
"""

from __future__ import annotations

import math
import os
import tomllib
from pathlib import Path

import numpy as np
import pandas as pd
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from rel_kit import BOOK_TEXT, SCENARIO_TEXT, toml_document, toml_value, write_book

from basiswise.data_adapters.book import Book, load_book
from basiswise.data_adapters.errors import InputError
from basiswise.data_adapters.prices import read_prices

_N = int(os.environ.get("BASISWISE_HYPOTHESIS_EXAMPLES", "45"))
BOUNDED = settings(max_examples=_N, deadline=None,
                   derandomize=not os.environ.get("BASISWISE_HYPOTHESIS_RANDOM"),
                   suppress_health_check=[HealthCheck.function_scoped_fixture,
                                          HealthCheck.too_slow])
FEW = settings(BOUNDED, max_examples=max(_N // 3, 1))

WORDS = ["book", "data", "estimation", "series", "exposure", "instrument", "group_limit",
         "constraints", "name", "id", "prices", "unit", "quantity", "contract_size", "limit",
         "window", "format", "USD/gal", "gal", "CRD-M1", "ULSD-M1", "rack_diesel", "x"]
scalars = st.one_of(
    st.booleans(), st.integers(-(2**63), 2**63 - 1),
    st.floats(allow_nan=True, allow_infinity=True),
    st.sampled_from(WORDS), st.text(max_size=12))
keys = st.one_of(st.sampled_from(WORDS), st.text(min_size=1, max_size=8))
values = st.recursive(scalars, lambda inner: st.one_of(
    st.lists(inner, max_size=4), st.dictionaries(keys, inner, max_size=4)), max_leaves=20)
documents = st.dictionaries(keys, values, max_size=8)


def _loads_or_input_error(path: Path) -> Book | None:
    try:
        return load_book(path)
    except InputError as err:
        assert len(str(err)) <= 300
        assert "\n" not in str(err)
        return None


@BOUNDED
@given(doc=documents)
def test_random_toml_documents_raise_only_input_error(tmp_path, doc):
    path = tmp_path / "book.toml"
    path.write_text(toml_document(doc), encoding="utf-8")
    _loads_or_input_error(path)


@BOUNDED
@given(text=st.text(max_size=300))
def test_random_text_as_a_book_raises_only_input_error(tmp_path, text):
    path = tmp_path / "book.toml"
    path.write_text(text, encoding="utf-8", errors="surrogatepass")
    _loads_or_input_error(path)


_BASE = tomllib.loads(BOOK_TEXT)
_PATHS = [("book", "horizon_days"), ("estimation", "window"), ("estimation", "estimator"),
          ("exposure", 0, "quantity"), ("exposure", 0, "series"), ("instrument", 0, "adv"),
          ("instrument", 0, "contract_size"), ("instrument", 1, "min_position"),
          ("instrument", 0, "id"), ("group_limit", 0, "instruments"), ("group_limit", 0, "limit"),
          ("constraints", "margin_budget"), ("data", "prices"), ("series", "ulsd_m1", "unit"),
          ("instrument", 0, "execution_days"), ("instrument", 0, "current")]


@BOUNDED
@given(where=st.sampled_from(_PATHS), value=values)
def test_one_mutated_key_of_a_valid_book_gives_a_book_or_input_error(tmp_path, where, value):
    import copy

    doc = copy.deepcopy(_BASE)
    node = doc
    for step in where[:-1]:
        node = node[step]
    node[where[-1]] = value
    lines = []
    for section, body in doc.items():
        if isinstance(body, list):
            lines += [f"[[{section}]]\n" + "".join(f"{k} = {toml_value(v)}\n"
                                                   for k, v in item.items()) for item in body]
        else:
            lines.append(f"{section} = {toml_value(body)}\n")
    path = write_book(tmp_path, "".join(lines))
    book = _loads_or_input_error(path)
    if book is not None:  # it loads: then every number in it is finite and in range
        for inst in book.instruments:
            assert math.isfinite(inst.contract_size) and 0 < inst.contract_size <= 1e9


csv_alphabet = st.sampled_from(list("0123456789,.-+eE: \n\"") + ["2025-01-0", "nan", "inf",
                                                                 "1e308", "date", "a", "b",
                                                                 "\r\n", "T00:00Z", "+05:00"])


@BOUNDED
@given(body=st.lists(csv_alphabet, max_size=80).map("".join),
       header=st.sampled_from(["date,a,b\n", "date,a,a\n", "a,b\n", "", "date,b,a,c\n"]))
def test_random_csv_text_gives_a_clean_panel_or_input_error(tmp_path, body, header):
    path = tmp_path / "prices.csv"
    path.write_text(header + body, encoding="utf-8")
    try:
        panel = read_prices(path, series=["a", "b"], max_gap_days=3660)
    except InputError as err:
        assert len(str(err)) <= 300 and "\n" not in str(err)
        return
    p = panel.prices
    assert list(p.columns) == ["a", "b"]
    assert np.isfinite(p.to_numpy()).all() and (np.abs(p.to_numpy()) <= 1e9).all()
    assert p.index.is_monotonic_increasing and p.index.is_unique


@FEW
@given(where=st.sampled_from(["limit_scale", "adv_scale", "margin_scale", "margin_budget",
                              "window", "horizon_days", "participation", "shock_pct",
                              "instrument_limits", "remove", "name", "estimator"]),
       value=values)
def test_random_scenario_values_raise_only_input_error(tmp_path, where, value):
    from basiswise.optimizer.sweeps.scenario_file import load_scenarios

    book = load_book(write_book(tmp_path))
    scen = tmp_path / "scenarios.toml"
    scen.write_text(SCENARIO_TEXT + f"\n[[scenario]]\nname = \"z\"\n{where} = "
                    f"{toml_value(value)}\n", encoding="utf-8")
    try:
        load_scenarios(scen, book)
    except InputError as err:
        assert len(str(err)) <= 300 and "\n" not in str(err)


# ----------------------------------------------------------------------- random valid books


@st.composite
def valid_books(draw):
    """A random but valid book: 2–4 series, 1–3 exposures, 1–4 instruments, random limits."""
    k = draw(st.integers(2, 4))
    series = [f"s{i}" for i in range(k)]
    n_exp = draw(st.integers(1, 3))
    n_inst = draw(st.integers(1, 4))
    estimator = draw(st.sampled_from(["sample", "ledoit-wolf", "oas", "constant-correlation",
                                      "ewma"]))
    changes = draw(st.sampled_from(["relative", "log", "absolute"]))
    lines = [f'[book]\nname = "random"\nhorizon_days = {draw(st.integers(1, 5))}\n',
             '[data]\nprices = "prices.csv"\n',
             f'[estimation]\nwindow = 60\nestimator = "{estimator}"\nchanges = "{changes}"\n']
    lines += [f'[series.{s}]\nunit = "USD/gal"\n' for s in series]
    size = draw(st.floats(1e4, 1e6))
    for i in range(n_exp):  # magnitudes 1, 2.5, 7 × size: signed sums never cancel to zero
        q = size * (1.0, 2.5, 7.0)[i] * draw(st.sampled_from([-1, 1]))
        lines.append(f'[[exposure]]\nid = "e{i}"\nseries = "{draw(st.sampled_from(series))}"\n'
                     f'quantity = {q!r}\nunit = "gal"\n')
    ids = [f"F{j}" for j in range(n_inst)]
    margins = False
    for j in ids:
        text = (f'[[instrument]]\nid = "{j}"\nseries = "{draw(st.sampled_from(series))}"\n'
                f'contract_size = {draw(st.sampled_from([1000, 42000]))}\nunit = "gal"\n')
        kind = draw(st.sampled_from(["none", "symmetric", "minmax"]))
        if kind == "symmetric":
            text += f"position_limit = {draw(st.integers(0, 40))}\n"
        elif kind == "minmax":
            text += (f"min_position = {-draw(st.integers(0, 40))}\n"
                     f"max_position = {draw(st.integers(0, 40))}\n")
        if draw(st.booleans()):
            text += f"adv = {draw(st.integers(1, 500))}\nmax_participation = 0.1\n"
        if draw(st.booleans()):
            margins = True
            text += f"margin = {draw(st.integers(100, 10_000))}\n"
        lines.append(text)
    if n_inst > 1 and draw(st.booleans()):
        lines.append(f'[[group_limit]]\nid = "g"\ninstruments = ["{ids[0]}", "{ids[1]}"]\n'
                     f"limit = {draw(st.integers(1, 60))}\n")
    if margins and draw(st.booleans()):
        lines.append(f"[constraints]\nmargin_budget = {draw(st.integers(1, 10)) * 50_000}.0\n")
    seed = draw(st.integers(0, 10_000))
    return "\n".join(lines), series, seed


def _prices(series: list[str], seed: int) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    rows = 90
    common = rng.normal(0, 0.01, (rows, 1))
    steps = (0.7 * common + 0.7 * rng.normal(0, 0.01, (rows, len(series)))).cumsum(axis=0)
    frame = pd.DataFrame(2.0 * np.exp(steps), columns=series,
                         index=pd.Index(pd.bdate_range("2024-01-01", periods=rows), name="date"))
    return frame.round(5)


@FEW
@given(spec=valid_books())
def test_random_valid_books_solve_to_feasible_answers_that_recompute(tmp_path, spec):
    from basiswise.optimizer.pipeline import model_of, prepare, solve_model

    text, series, seed = spec
    path = write_book(tmp_path, text, _prices(series, seed))
    prep = prepare(path)
    model = model_of(prep)
    rep = solve_model(model, "exact", time_limit=10.0)
    assert rep.ok and rep.status in ("certified", "time-limited")
    book = prep.book
    x = np.array([i.target for i in rep.instruments])
    # whole contracts inside every limit of the book
    assert np.array_equal(x, np.round(x))
    for inst, t in zip(book.instruments, x, strict=True):
        lo, hi = inst.bounds()
        assert lo - 1e-9 <= t <= hi + 1e-9
        if inst.adv is not None:
            cap = math.floor(inst.max_participation * inst.adv * inst.execution_days + 1e-9)
            assert abs(t - inst.current) <= cap
    for g in book.group_limits:
        assert abs(sum(x[[i.id for i in book.instruments].index(m)] for m in g.instruments)) \
            <= g.limit + 1e-9
    if book.constraints.margin_budget is not None:
        assert sum(abs(t) * i.margin for i, t in zip(book.instruments, x, strict=True)) \
            <= book.constraints.margin_budget * (1 + 1e-9)
    # the reported figures recompute from the positions
    y = model.E.sum(axis=0) + x @ model.C
    hedged = math.sqrt(max(float(y @ model.cov @ y), 0.0))
    assert math.isclose(rep.hedged_std, hedged, rel_tol=1e-7, abs_tol=1e-6 * rep.unhedged_std)
    euler = sum(e.risk_after for e in rep.exposures) + sum(i.risk_contribution
                                                           for i in rep.instruments)
    assert math.isclose(euler, rep.hedged_std, rel_tol=1e-6, abs_tol=1e-6 * rep.unhedged_std)
    # the relaxation bounds the whole-contract answer (up to the solver's round-off)
    assert rep.relaxed_hedged_std <= rep.hedged_std + 1e-6 * rep.unhedged_std
