"""What a desk reads: whole counts, one JSON schema, a report that adds up to solve, the
decision date, short-history warnings, checks at the door."""

from __future__ import annotations

import json
import shutil
from pathlib import Path

import pandas as pd
import pytest
from typer.testing import CliRunner

from basiswise.cli.app import app
from basiswise.optimizer.results.output_schema import markdown_table, validate
from basiswise.scenarios import demo_book_path

runner = CliRunner()
ROOT = Path(__file__).resolve().parents[1]


@pytest.fixture(scope="module")
def demo_folder(tmp_path_factory) -> Path:
    folder = tmp_path_factory.mktemp("demo_out")
    src = demo_book_path().parent
    for name in ("book.toml", "prices.csv", "limit_cuts.toml"):
        shutil.copyfile(src / name, folder / name)
    return folder


def _copy(demo_folder: Path, tmp_path: Path) -> Path:
    for name in ("book.toml", "prices.csv", "limit_cuts.toml"):
        shutil.copyfile(demo_folder / name, tmp_path / name)
    return tmp_path / "book.toml"


def _edit(path: Path, old: str, new: str) -> None:
    text = path.read_text()
    assert old in text, old
    path.write_text(text.replace(old, new, 1))


def _json(args: list[str]) -> dict:
    res = runner.invoke(app, args)
    assert res.exit_code == 0, res.output
    return json.loads(res.stdout)


BACKTEST_QUICK = ["--every", "120", "--strategies", "unhedged,joint-continuous,joint-whole",
                  "--method", "round"]


@pytest.fixture(scope="module")
def outputs(demo_folder):
    book = str(demo_folder / "book.toml")
    scen = str(demo_folder / "limit_cuts.toml")
    return {
        "solve": _json(["solve", book, "--json"]),
        "solve-continuous": _json(["solve", book, "--json", "-m", "continuous"]),
        "sweep": _json(["sweep", book, scen, "--json", "-w", "1"]),
        "backtest": _json(["backtest", book, "--json", *BACKTEST_QUICK]),
    }


# --------------------------------------------------------------------------- JSON schema

@pytest.mark.parametrize("name", ["solve", "solve-continuous", "sweep", "backtest"])
def test_every_command_json_matches_the_schema(outputs, name):
    command = name.split("-")[0]
    problems = validate(command, outputs[name], fractional=name.endswith("continuous"))
    assert problems == []


def test_whole_counts_are_integers_everywhere(outputs, demo_folder, tmp_path):
    for i in outputs["solve"]["instruments"]:
        assert all(type(i[k]) is int for k in ("current", "target", "trade"))
    for sc in outputs["sweep"]["scenarios"]:
        assert all(type(v) is int for v in sc["contracts"].values())
    for run in outputs["backtest"]["ranking"]:
        assert (type(run["contracts_traded"]) is int) == run["whole_contracts"]
    book = demo_folder / "book.toml"
    csv = tmp_path / "sweep.csv"
    res = runner.invoke(app, ["sweep", str(book), str(demo_folder / "limit_cuts.toml"),
                              "--csv", str(csv), "-w", "1"])
    assert res.exit_code == 0, res.output
    frame = pd.read_csv(csv, dtype=str)
    cols = [c for c in frame.columns if c.startswith("contracts_")]
    assert cols and len(frame) > 0
    for c in cols:
        assert not frame[c].dropna().str.contains(r"\.").any(), c
    trades = tmp_path / "trades.csv"
    res = runner.invoke(app, ["solve", str(book), "--trades", str(trades)])
    assert res.exit_code == 0, res.output
    tl = pd.read_csv(trades, dtype=str)
    for c in ("contracts", "current", "target"):
        assert tl[c].str.fullmatch(r"-?\d+").all(), c
    assert {"trade_notional_USD", "target_margin_USD", "margin_change_USD"} <= set(tl.columns)


def test_continuous_says_it_is_fractional(outputs, demo_folder):
    d = outputs["solve-continuous"]
    assert any(not float(i["target"]).is_integer() for i in d["instruments"])
    for i in d["instruments"]:  # the side follows the trade as shown (two decimals)
        shown = round(i["trade"], 2)
        assert i["side"] == ("BUY" if shown > 0 else "SELL" if shown < 0 else "HOLD")
    res = runner.invoke(app, ["solve", str(demo_folder / "book.toml"), "-m", "continuous"],
                        env={"COLUMNS": "100"})
    assert "fractional" in res.output


def test_readme_carries_the_schema_table():
    assert markdown_table() in (ROOT / "README.md").read_text()


def test_one_name_per_meaning(outputs):
    solve, sweep = outputs["solve"], outputs["sweep"]
    assert all(isinstance(x["binding"], bool) for x in solve["limits"])
    assert all("binding" not in i for i in solve["instruments"])
    names = {x["name"] for x in solve["limits"]}
    assert all(set(b) == {"name", "kind", "shadow", "unit"}
               for sc in sweep["scenarios"] for b in sc["binding"])
    assert any(b["name"] in names for sc in sweep["scenarios"] for b in sc["binding"])
    # margin: the target's, and the change the trade makes
    per = {"CRUDE": 6200, "ULSD": 7600, "GASOLINE": 7100, "NATGAS": 4600}  # the demo book
    for i in solve["instruments"]:
        m = per[i["id"].split("-")[0]]
        assert i["target_margin"] == abs(i["target"]) * m
        assert i["margin_change"] == (abs(i["target"]) - abs(i["current"])) * m
    # non-binding rows have shadow 0, never a round-off like 5e-09
    assert all(x["shadow"] == 0 or x["shadow"] >= 0.005 for x in solve["limits"])
    assert all(x["shadow"] == 0 for x in solve["limits"] if not x["binding"])


# --------------------------------------------------------------------------- report

def _md_rows(text: str, heading: str) -> list[list[str]]:
    part = text.split(f"## {heading}", 1)[1].split("\n## ", 1)[0]
    rows = [ln.strip("|").split("|") for ln in part.splitlines() if ln.startswith("| ")]
    return [[c.strip() for c in r] for r in rows[1:]]


def test_report_reconciles_with_solve(demo_folder, tmp_path):
    book = str(demo_folder / "book.toml")
    d = _json(["solve", book, "--json", "--window", "400"])
    md = tmp_path / "r.md"
    res = runner.invoke(app, ["report", book, "--out", str(md), "--window", "400"])
    assert res.exit_code == 0, res.output
    text = md.read_text()
    expo = _md_rows(text, "Exposures")
    book_row = next(r for r in expo if r[0] == "**book**")
    assert book_row[-1] == f"{d['hedged_std']:,.0f}" and book_row[-2] == f"{d['unhedged_std']:,.0f}"
    futures = next(r for r in expo if r[0] == "futures, all lines")
    legs = sum(i["risk_contribution"] for i in d["instruments"])
    assert futures[-1] == f"{legs:,.0f}"
    after = sum(e["risk_after"] for e in d["exposures"]) + legs
    assert after == pytest.approx(d["hedged_std"], rel=1e-9)
    pos = _md_rows(text, "Futures positions")
    assert [r[0] for r in pos] == [i["id"] for i in d["instruments"]]
    assert [int(r[2]) for r in pos] == [i["target"] for i in d["instruments"]]
    assert "window = 400" in text and d["price_date"] in text
    assert "750,000 USD" in text  # the margin budget
    assert d["estimator"] in text


# --------------------------------------------------------------------------- as_of

def test_as_of_cuts_prices_and_says_so(demo_folder, tmp_path):
    book = _copy(demo_folder, tmp_path)
    _edit(book, "as_of = 2025-12-19", "as_of = 2025-06-30")
    d = _json(["solve", str(book), "--json"])
    assert d["as_of"] == "2025-06-30" and d["price_date"] <= "2025-06-30"
    assert d["price_date"] >= "2025-06-26"
    assert any("after as_of 2025-06-30 ignored" in n for n in d["notes"])
    full = _json(["solve", str(demo_folder / "book.toml"), "--json"])
    assert full["price_date"] == "2025-12-19"
    # the current prices are those of the decision date, not of the file's last row
    prices = pd.read_csv(tmp_path / "prices.csv", index_col=0, parse_dates=True)
    last = prices.loc[:"2025-06-30"].iloc[-1]
    crude = next(i for i in d["instruments"] if i["id"] == "CRUDE-F1")
    assert crude["price"] == pytest.approx(last["crude_m1"])


def test_as_of_after_the_last_price_says_how_old_the_prices_are(demo_folder, tmp_path):
    book = _copy(demo_folder, tmp_path)
    _edit(book, "as_of = 2025-12-19", "as_of = 2026-01-09")
    d = _json(["solve", str(book), "--json"])
    assert d["price_date"] == "2025-12-19"
    assert any("21 days before as_of 2026-01-09" in n for n in d["notes"])


def test_as_of_refuses_an_expired_contract_month(demo_folder, tmp_path):
    book = _copy(demo_folder, tmp_path)
    _edit(book, 'contract_month = "2026-04"', 'contract_month = "2025-11"')
    out = tmp_path / "t.csv"
    res = runner.invoke(app, ["solve", str(book), "--trades", str(out)])
    assert res.exit_code == 2 and not out.exists()
    assert "CRUDE-F3" in res.stderr and "2025-11" in res.stderr and "expired" in res.stderr


# --------------------------------------------------------------------------- short history

def test_short_window_warns_in_solve_and_check(demo_folder):
    book = str(demo_folder / "book.toml")
    d = _json(["solve", book, "--json", "--window", "120"])
    assert any(n.startswith("short history") for n in d["warnings"])
    res = runner.invoke(app, ["check", book], env={"COLUMNS": "200"})
    assert res.exit_code == 0 and "warning: short history" in res.output
    res = runner.invoke(app, ["solve", book, "--window", "120"], env={"COLUMNS": "200"})
    assert res.exit_code == 0 and "warning: short history" in res.output


def test_singular_covariance_floor_is_explained(demo_folder, tmp_path):
    book = _copy(demo_folder, tmp_path)
    # 20 series, 12 overlapping-free rows: the sample covariance is singular
    d = _json(["solve", str(book), "--json", "--window", "200", "--sampling",
               "non-overlapping", "--estimator", "sample"])
    assert any("basis-risk floor is 0" in n for n in d["warnings"])


def test_window_too_short_for_horizon_names_file_and_both_keys(demo_folder, tmp_path):
    book = _copy(demo_folder, tmp_path)
    res = runner.invoke(app, ["solve", str(book), "--window", "30", "--horizon", "20",
                              "--sampling", "non-overlapping"])
    assert res.exit_code == 2
    assert "book.toml" in res.stderr and "window" in res.stderr
    assert "horizon_days" in res.stderr


# --------------------------------------------------------------------------- check

def test_check_finds_a_limit_conflict(demo_folder, tmp_path):
    book = _copy(demo_folder, tmp_path)
    text = book.read_text()
    first = text.index('id = "ULSD-F1"')
    start = text.index("position_limit = 30", first)
    book.write_text(text[:start] + "min_position = 25\nmax_position = 30"
                    + text[start + len("position_limit = 30"):])
    text = book.read_text()
    second = text.index('id = "ULSD-F2"')
    start = text.index("position_limit = 30", second)
    book.write_text(text[:start] + "min_position = 20\nmax_position = 30"
                    + text[start + len("position_limit = 30"):])
    _edit(book, "current = 6\n", "current = 25\n")
    _edit(book, "current = 4\n", "current = 20\n")
    _edit(book, "ULSD-F3\"]\nlimit = 40", "ULSD-F3\"]\nlimit = 30")  # 25 + 20 − 10 > 30
    res = runner.invoke(app, ["check", str(book)], env={"COLUMNS": "200"})
    assert res.exit_code == 0, res.output
    assert "limit conflict" in res.output and "ulsd-all-months" in res.output


def test_gap_from_missing_values_names_the_series(demo_folder, tmp_path):
    book = _copy(demo_folder, tmp_path)
    prices = pd.read_csv(tmp_path / "prices.csv", dtype=str)
    prices.loc[2000:2030, "propane_m2"] = ""
    prices.to_csv(tmp_path / "prices.csv", index=False)
    res = runner.invoke(app, ["check", str(book)])
    assert res.exit_code == 2 and "gap" in res.stderr and "propane_m2" in res.stderr


# --------------------------------------------------------------------------- at the door

def test_demo_refuses_to_overwrite_changed_files(tmp_path):
    folder = tmp_path / "d"
    folder.mkdir()
    (folder / "book.toml").write_text("# my own book\n")
    res = runner.invoke(app, ["demo", "--out", str(folder)])
    assert res.exit_code == 2 and "--force" in res.stderr
    assert (folder / "book.toml").read_text() == "# my own book\n"
    assert not (folder / "prices.csv").exists()
    res = runner.invoke(app, ["demo", "--out", str(folder), "--force"])
    assert res.exit_code == 0, res.output
    res = runner.invoke(app, ["demo", "--out", str(folder)])  # same files: fine
    assert res.exit_code == 0, res.output


@pytest.mark.parametrize("args, flag", [
    (["solve", "{book}", "--time-limit", "0"], "--time-limit"),
    (["solve", "{book}", "--window", "1"], "--window"),
    (["report", "{book}", "--out", "x.md", "--horizon", "0"], "--horizon"),
    (["backtest", "{book}", "--every", "0"], "--every"),
    (["backtest", "{book}", "--time-limit", "-1"], "--time-limit"),
    (["sweep", "{book}", "{scen}", "-w", "-1"], "--workers"),
])
def test_option_ranges_are_checked_at_the_door(demo_folder, args, flag):
    subs = {"{book}": str(demo_folder / "book.toml"),
            "{scen}": str(demo_folder / "limit_cuts.toml")}
    res = runner.invoke(app, [subs.get(a, a) for a in args])
    assert res.exit_code == 2 and flag in res.stderr


def test_book_metavar_and_workers_flag_are_the_same_everywhere():
    for cmd in ("solve", "check", "report", "sweep", "backtest"):
        res = runner.invoke(app, [cmd, "--help"], env={"COLUMNS": "200"})
        assert "BOOK" in res.output, cmd
    for cmd in ("sweep", "backtest"):
        res = runner.invoke(app, [cmd, "--help"], env={"COLUMNS": "200"})
        assert "-w" in res.output, cmd




def test_json_zero_has_no_sign():
    from basiswise.optimizer.results.jsonsafe import finite

    got = json.dumps(finite({"a": -0.0, "b": [-0.0, float("nan")]}))
    assert got == '{"a": 0.0, "b": [0.0, null]}'
