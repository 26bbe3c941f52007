"""Book files: parsing, defaults, and every validation error naming the key at fault."""

from __future__ import annotations

import copy
import math
import tomllib
from datetime import date
from pathlib import Path

import pytest

from basiswise.data_adapters.book import Book, load_book
from basiswise.data_adapters.errors import InputError


@pytest.fixture
def raw(adapters_book_text) -> dict:
    return tomllib.loads(adapters_book_text)


def build(raw: dict) -> Book:
    return Book.from_dict(raw, Path("/books"), "book.toml")


def test_load_book_reads_values_and_defaults(adapters_book_path):
    book = load_book(adapters_book_path)
    assert book.path == adapters_book_path
    assert book.folder == adapters_book_path.parent
    assert book.prices_path == adapters_book_path.parent / "prices.csv"
    assert book.book.name == "Test fleet"
    assert book.book.horizon_days == 5
    assert book.book.as_of is None
    assert book.data.format == "wide" and book.data.max_gap_days == 7
    assert book.estimation.window == 40
    assert book.estimation.estimator == "ledoit-wolf"
    assert book.estimation.changes == "relative"
    assert book.estimation.sampling == "overlapping"
    assert book.estimation.ewma_lambda == 0.94  # source: RiskMetrics Technical Document 1996,
    # daily decay factor 0.94 (from memory)
    assert [e.id for e in book.exposures] == ["fleet-diesel"]
    assert [i.id for i in book.instruments] == ["ULSD-M1", "CRD-M1"]
    assert book.instruments[0].max_participation == 0.1
    assert book.instruments[0].current == 0
    assert book.constraints.margin_budget == 1e6 and book.constraints.hedge_only is False
    assert book.series_ids() == ["rack_diesel", "ulsd_m1", "crude_m1"]


def test_bounds(raw):
    book = build(raw)
    assert book.instruments[0].bounds() == (-100.0, 100.0)
    assert book.instruments[1].bounds() == (-50.0, 50.0)
    del raw["instrument"][1]["min_position"]
    del raw["instrument"][1]["max_position"]
    lo, hi = build(raw).instruments[1].bounds()
    assert lo == -math.inf and hi == math.inf
    raw["instrument"][1]["min_position"] = 0
    assert build(raw).instruments[1].bounds() == (0.0, math.inf)


def test_as_of_date_and_current_outside_bounds_allowed(raw):
    raw["book"]["as_of"] = date(2025, 2, 14)
    raw["instrument"][1]["current"] = 80  # above max_position: the book today, allowed
    book = build(raw)
    assert book.book.as_of == date(2025, 2, 14)
    assert book.instruments[1].current == 80


def test_with_overrides_validates(raw):
    book = build(raw)
    other = book.with_overrides(estimator="ewma", window=30, horizon_days=10, sampling=None)
    assert other.estimation.estimator == "ewma"
    assert other.estimation.window == 30 and other.book.horizon_days == 10
    assert other.estimation.sampling == "overlapping"
    assert other.folder == book.folder
    assert book.estimation.estimator == "ledoit-wolf"  # original untouched
    with pytest.raises(InputError) as info:
        book.with_overrides(estimator="median")
    assert info.value.key == "estimation.estimator" and "ledoit-wolf" in str(info.value)
    with pytest.raises(InputError) as info:
        book.with_overrides(window=1)
    assert info.value.key == "estimation.window"
    with pytest.raises(InputError) as info:
        book.with_overrides(windw=30)
    assert info.value.key == "windw"


def _set(path, value):
    def mutate(d):
        node = d
        for k in path[:-1]:
            node = node[k]
        node[path[-1]] = value

    return mutate


def _del(path):
    def mutate(d):
        node = d
        for k in path[:-1]:
            node = node[k]
        del node[path[-1]]

    return mutate


def _append(table, entry):
    def mutate(d):
        d[table].append(entry)

    return mutate


CASES = {
    "unknown top-level key": (_set(["exposures"], []), "exposures", "unknown key"),
    "typo in instrument": (
        _set(["instrument", 0, "contract_sise"], 1), "instrument 'ULSD-M1'.contract_sise",
        "allowed here: id, series, contract_size",
    ),
    "typo in estimation": (_set(["estimation", "windw"], 3), "estimation.windw", "unknown key"),
    "typo in constraints": (
        _set(["constraints", "margin"], 3), "constraints.margin", "margin_budget"
    ),
    "missing book name": (_del(["book", "name"]), "book.name", "required key is missing"),
    "missing data table": (_del(["data"]), "data", "required key is missing"),
    "missing prices": (_del(["data", "prices"]), "data.prices", "required key is missing"),
    "missing exposure series (no id)": (
        _append("exposure", {"quantity": 1.0, "unit": "gal", "series": "rack_diesel"}),
        "exposure[2].id", "required key is missing",
    ),
    "unknown estimator": (
        _set(["estimation", "estimator"], "shrunk"), "estimation.estimator",
        "'sample', 'ledoit-wolf', 'oas', 'constant-correlation' or 'ewma'",
    ),
    "unknown changes": (_set(["estimation", "changes"], "pct"), "estimation.changes", "'log'"),
    "unknown sampling": (
        _set(["estimation", "sampling"], "rolling"), "estimation.sampling", "'non-overlapping'"
    ),
    "unknown format": (_set(["data", "format"], "tall"), "data.format", "'wide' or 'long'"),
    "window too small": (_set(["estimation", "window"], 1), "estimation.window", "2"),
    "horizon zero": (_set(["book", "horizon_days"], 0), "book.horizon_days", "1"),
    "horizon not int": (_set(["book", "horizon_days"], 2.5), "book.horizon_days", "integer"),
    "lambda one": (_set(["estimation", "ewma_lambda"], 1.0), "estimation.ewma_lambda", "less"),
    "lowercase currency": (
        _set(["book", "currency"], "usd"), "book.currency", "3-letter upper-case"
    ),
    "duplicate exposure id": (
        _append("exposure", {"id": "fleet-diesel", "series": "rack_diesel", "quantity": 5.0,
                             "unit": "gal"}),
        "exposure[2].id", "duplicate id 'fleet-diesel'",
    ),
    "duplicate instrument id": (
        _set(["instrument", 1, "id"], "ULSD-M1"), "instrument[2].id", "duplicate id 'ULSD-M1'"
    ),
    "undeclared exposure series": (
        _set(["exposure", 0, "series"], "jet"), "exposure 'fleet-diesel'.series",
        "'jet' is not declared",
    ),
    "undeclared instrument series": (
        _set(["instrument", 1, "series"], "brent"), "instrument 'CRD-M1'.series", "not declared"
    ),
    "unknown proxy": (
        _set(["exposure", 0, "proxy"], "HO-M1"), "exposure 'fleet-diesel'.proxy",
        "'HO-M1' is not an instrument id",
    ),
    "group names unknown instrument": (
        _set(["group_limit", 0, "instruments"], ["ULSD-M1", "XX"]),
        "group_limit 'all-energy'.instruments[2]", "'XX' is not an instrument id",
    ),
    "group lists instrument twice": (
        _set(["group_limit", 0, "instruments"], ["ULSD-M1", "ULSD-M1"]),
        "group_limit 'all-energy'.instruments[2]", "listed twice",
    ),
    "group limit zero": (_set(["group_limit", 0, "limit"], 0), "group_limit 'all-energy'.limit",
                         "greater than 0"),
    "contract size zero": (
        _set(["instrument", 1, "contract_size"], 0), "instrument 'CRD-M1'.contract_size",
        "greater than 0",
    ),
    "contract size negative": (
        _set(["instrument", 0, "contract_size"], -42000), "instrument 'ULSD-M1'.contract_size",
        "greater than 0",
    ),
    "min above max": (
        _set(["instrument", 1, "min_position"], 60), "instrument 'CRD-M1'.min_position",
        "above max_position",
    ),
    "limit and min/max": (
        _set(["instrument", 1, "position_limit"], 10), "instrument 'CRD-M1'.position_limit",
        "not both",
    ),
    "current not int": (
        _set(["instrument", 1, "current"], float("nan")), "instrument 'CRD-M1'.current",
        "integer",
    ),
    "quantity nan": (
        _set(["exposure", 0, "quantity"], float("nan")), "exposure 'fleet-diesel'.quantity",
        "finite",
    ),
    "quantity zero": (
        _set(["exposure", 0, "quantity"], 0.0), "exposure 'fleet-diesel'.quantity", "nonzero"
    ),
    "participation above one": (
        _set(["instrument", 0, "max_participation"], 1.5),
        "instrument 'ULSD-M1'.max_participation", "less than or equal to 1",
    ),
    "negative margin": (_set(["instrument", 0, "margin"], -1), "instrument 'ULSD-M1'.margin",
                        "greater than or equal to 0"),
    "bad contract month": (
        _set(["instrument", 0, "contract_month"], "2027-13"),
        "instrument 'ULSD-M1'.contract_month", "YYYY-MM",
    ),
    "margin budget zero": (
        _set(["constraints", "margin_budget"], 0.0), "constraints.margin_budget", "greater"
    ),
    "currency mismatch": (
        _set(["series", "crude_m1", "unit"], "EUR/bbl"), "series.crude_m1.unit",
        "in EUR but the book currency is USD",
    ),
    "bad price unit": (_set(["series", "crude_m1", "unit"], "USD"), "series.crude_m1.unit",
                       "must look like"),
    "mass vs volume": (
        _set(["instrument", 1, "unit"], "t"), "instrument 'CRD-M1'.unit", "incompatible"
    ),
    "unknown exposure unit": (
        _set(["exposure", 0, "unit"], "litres"), "exposure 'fleet-diesel'.unit",
        "unknown unit 'litres'",
    ),
    "no exposures": (_set(["exposure"], []), "exposure", "no [[exposure]]"),
    "table instead of array": (_set(["instrument"], {"id": "x"}), "instrument", "list"),
}


@pytest.mark.parametrize("name", list(CASES))
def test_book_errors_name_file_and_key(raw, name):
    mutate, key, words = CASES[name]
    data = copy.deepcopy(raw)
    mutate(data)
    with pytest.raises(InputError) as info:
        build(data)
    err = info.value
    assert err.file == "book.toml"
    assert err.key == key, str(err)
    assert str(err).startswith(f"book.toml, key {key!r}: "), str(err)
    assert words in str(err), str(err)
    assert "\n" not in str(err)


def test_missing_book_file(tmp_path):
    with pytest.raises(InputError) as info:
        load_book(tmp_path / "nope.toml")
    assert "nope.toml" in str(info.value) and "not found" in str(info.value)


def test_toml_syntax_error_gives_line(tmp_path, adapters_book_text):
    path = tmp_path / "book.toml"
    path.write_text(adapters_book_text.replace("horizon_days = 5", "horizon_days = = 5"))
    with pytest.raises(InputError) as info:
        load_book(path)
    assert str(path) in str(info.value)
    assert "line 4" in str(info.value)


def test_typo_in_file_is_caught(tmp_path, adapters_book_text):
    path = tmp_path / "book.toml"
    path.write_text(adapters_book_text.replace("position_limit = 100", "postion_limit = 100"))
    with pytest.raises(InputError) as info:
        load_book(path)
    assert info.value.key == "instrument 'ULSD-M1'.postion_limit"
    assert info.value.file == str(path)


def test_long_format_and_paths_relative_to_book(tmp_path, adapters_book_text):
    sub = tmp_path / "books"
    sub.mkdir()
    text = adapters_book_text.replace(
        'prices = "prices.csv"', 'prices = "../data/p.parquet"\nformat = "long"'
    )
    (sub / "b.toml").write_text(text)
    book = load_book(sub / "b.toml")
    assert book.data.format == "long"
    assert book.prices_path.resolve() == (tmp_path / "data" / "p.parquet").resolve()
