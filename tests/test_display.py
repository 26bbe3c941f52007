"""What a desk sees in the terminal: every figure whole at 80 columns, COLUMNS honoured, text
in brackets shown as written, sweep titles and labels that say what they show."""

from __future__ import annotations

import io
import json
import re
import shutil
from pathlib import Path

import pytest
from rich.console import Console
from typer.testing import CliRunner

from basiswise.cli.app import app
from basiswise.cli.render import Column, Grid, fit
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


# --------------------------------------------------------------------------- 80 columns

def _cut(output: str, width: int = 80) -> list[str]:
    return [ln for ln in output.splitlines() if "…" in ln or len(ln) > width]


def _cells(output: str) -> set[str]:
    cells = set()
    for ln in output.splitlines():
        for part in re.split(r"[│┃]", ln):
            if part.strip():
                cells.add(part.strip())
    return cells


@pytest.mark.parametrize("width", [80, 120])
def test_solve_at_80_columns_shows_every_figure_whole(demo_folder, outputs, width):
    res = runner.invoke(app, ["solve", str(demo_folder / "book.toml")],
                        env={"COLUMNS": str(width)})
    assert res.exit_code == 0, res.output
    assert _cut(res.output, width) == []
    cells = _cells(res.output)
    for i in outputs["solve"]["instruments"]:
        assert f"{i['target_notional']:,.0f}".replace("-0", "0") in cells or \
            i["target_notional"] == 0
        assert str(i["target"]) in cells
    for e in outputs["solve"]["exposures"]:
        assert f"{e['value']:,.0f}" in cells and f"{e['risk_after']:,.0f}" in cells
    assert f"{outputs['solve']['hedged_std']:,.0f}" in cells


def test_sweep_at_80_columns_shows_every_figure_whole(demo_folder, outputs):
    res = runner.invoke(app, ["sweep", str(demo_folder / "book.toml"),
                              str(demo_folder / "limit_cuts.toml"), "-w", "1"],
                        env={"COLUMNS": "80"})
    assert res.exit_code == 0, res.output
    assert _cut(res.output) == []
    cells = _cells(res.output)
    for sc in outputs["sweep"]["scenarios"]:
        if sc["feasible"]:
            assert f"{sc['hedged_std']:,.0f}" in cells


def test_backtest_at_80_columns_shows_every_figure_whole(demo_folder, outputs):
    res = runner.invoke(app, ["backtest", str(demo_folder / "book.toml"), *BACKTEST_QUICK],
                        env={"COLUMNS": "80"})
    assert res.exit_code == 0, res.output
    assert _cut(res.output) == []
    cells = _cells(res.output)
    for run in outputs["backtest"]["ranking"]:
        assert f"{run['worst_loss']:,.0f}" in cells


def test_columns_is_honoured_when_piped(demo_folder):
    res = runner.invoke(app, ["solve", str(demo_folder / "book.toml")], env={"COLUMNS": "120"})
    widths = {len(ln) for ln in res.output.splitlines()}
    assert max(widths) <= 120 and max(widths) > 80


def test_a_grid_too_wide_is_split_and_keeps_its_key_column():
    g = Grid("wide", [Column("id", "left")] + [Column(f"column {k}") for k in range(12)])
    g.add_row("row-one", *[f"{1_234_567.0 * k:,.0f}" for k in range(12)])
    tables = fit(g, 80)
    assert len(tables) > 1
    buf = io.StringIO()
    con = Console(file=buf, width=80)
    for t in tables:
        con.print(t)
    out = buf.getvalue()
    assert "…" not in out and out.count("row-one") == len(tables)
    for k in range(12):
        assert f"{1_234_567.0 * k:,.0f}" in _cells(out)


def test_zero_has_no_sign():
    from basiswise.cli.tables import money, num, pct

    assert money(-0.0) == money(-0.4) == num(-0.001, 2) == "0" and pct(-1e-6) == "0 %"


# --------------------------------------------------------------------------- brackets

def test_brackets_survive_in_help(demo_folder):
    res = runner.invoke(app, ["solve", "--help"], env={"COLUMNS": "200"})
    assert "[estimation].estimator" in res.output and "[book].horizon_days" in res.output
    res = runner.invoke(app, ["backtest", "--help"], env={"COLUMNS": "200"})
    assert "[default: horizon]" in res.output


def test_brackets_survive_in_errors(demo_folder, tmp_path):
    book = _copy(demo_folder, tmp_path)
    _edit(book, 'series = "rack_diesel_m1"', 'series = "rack_diesel_m9"')
    res = runner.invoke(app, ["solve", str(book)])
    assert res.exit_code == 2
    assert "[series.rack_diesel_m9]" in res.stderr or "[series." in res.stderr


def test_brackets_survive_in_tables():
    g = Grid("[bold]title[/]", [Column("id", "left"), Column("[USD]")])
    g.add_row("[red]x[/]", "1")
    buf = io.StringIO()
    for t in fit(g, 80):
        Console(file=buf, width=80).print(t)
    assert "[bold]title[/]" in buf.getvalue() and "[red]x[/]" in buf.getvalue()
    assert "[USD]" in buf.getvalue()


# --------------------------------------------------------------------------- sweep words

SWEEP_SMALL = """\
[[scenario]]
name = "short-horizon"
horizon_days = 5

[[grid]]
name = "budget"
vary = { margin_budget = [500000.0, 1000000.0] }
"""


def test_sweep_labels_horizons_and_a_frontier_too_short_to_draw(demo_folder, tmp_path):
    scen = tmp_path / "small.toml"
    scen.write_text(SWEEP_SMALL)
    png = tmp_path / "f.png"
    res = runner.invoke(app, ["sweep", str(demo_folder / "book.toml"), str(scen), "-w", "1",
                              "--png", str(png)], env={"COLUMNS": "200"})
    assert res.exit_code == 0, res.output
    assert "margin_budget=1,000,000" in res.output and "e+06" not in res.output
    assert "horizons 5, 20 days" in res.output
    assert not png.exists() and "frontier chart not written" in res.stderr
    d = _json(["sweep", str(demo_folder / "book.toml"), str(scen), "--json", "-w", "1"])
    assert {sc["name"]: sc["horizon_days"] for sc in d["scenarios"]}["short-horizon"] == 5
