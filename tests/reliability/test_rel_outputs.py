"""Outputs: never over an input, checked before work, complete or absent, inert in each format."""

from __future__ import annotations

import csv
import io
import re

import pandas as pd
import pytest
from rel_kit import (
    BOOK_TEXT,
    SCENARIO_TEXT,
    assert_one_clean_line,
    run_cli,
    write_book,
)

from basiswise.data_adapters.output import atomic_write, neutralise_cells, write_csv_atomic


@pytest.mark.parametrize("which", ["book.toml", "prices.csv"])
def test_solve_refuses_to_write_over_an_input_file(tmp_path, which):
    book = write_book(tmp_path)
    before = (tmp_path / which).read_bytes()
    result = run_cli(["solve", book, "--trades", tmp_path / which])
    assert_one_clean_line(result, 2, names="input file")
    assert (tmp_path / which).read_bytes() == before


def test_report_and_sweep_refuse_their_inputs(tmp_path):
    book = write_book(tmp_path)
    scen = tmp_path / "scenarios.toml"
    scen.write_text(SCENARIO_TEXT)
    assert_one_clean_line(run_cli(["report", book, "--out", book]), 2, names="input file")
    assert_one_clean_line(run_cli(["sweep", book, scen, "--csv", scen]), 2, names="input file")
    assert_one_clean_line(run_cli(["sweep", book, scen, "--png", tmp_path / "prices.csv"]), 2,
                          names="input file")
    assert scen.read_text() == SCENARIO_TEXT


def test_output_folder_is_checked_before_any_work(tmp_path, monkeypatch):
    book = write_book(tmp_path)
    import basiswise.optimizer.pipeline as api

    def must_not_run(*a, **k):  # the check comes first: no solve is started
        raise AssertionError("solved before checking the output folder")

    monkeypatch.setattr(api, "solve_book", must_not_run)
    for target in (tmp_path / "missing" / "t.csv", tmp_path / "prices.csv" / "t.csv",
                   tmp_path):
        assert_one_clean_line(run_cli(["solve", book, "--trades", target]), 2)


def test_a_failure_while_showing_the_result_writes_no_trade_list(tmp_path, monkeypatch):
    book = write_book(tmp_path)
    out = tmp_path / "trades.csv"
    out.write_text("yesterday's list\n")
    import basiswise.cli.tables as tables

    def broken(*a, **k):
        raise RuntimeError("renderer broke")

    monkeypatch.setattr(tables, "print_report", broken)
    result = run_cli(["solve", book, "--trades", out])
    assert_one_clean_line(result, 1, names="internal error")
    assert out.read_text() == "yesterday's list\n"


@pytest.mark.parametrize("exc", [RuntimeError("disk full"), KeyboardInterrupt()])
def test_atomic_write_leaves_the_old_file_on_failure_or_interrupt(tmp_path, exc):
    target = tmp_path / "out.csv"
    target.write_text("old\n")

    def half_then_fail(tmp):
        tmp.write_text("half")
        raise exc

    with pytest.raises(type(exc)):
        atomic_write(target, half_then_fail)
    assert target.read_text() == "old\n"
    assert [p.name for p in tmp_path.iterdir()] == ["out.csv"]


def test_csv_cells_cannot_start_a_formula():
    # source: OWASP Foundation, "CSV Injection" community page: cells beginning with = + - @,
    # tab or carriage return are prefixed with a single quote (from memory)
    df = pd.DataFrame({"id": ["=HYPERLINK(\"x\")", "+1+1", "-2+3", "@SUM(A1)", "\tx", "\rx",
                              "plain", "-12.5", "a\nb|c"],
                       "contracts": [-1, 2, -3, 4, 5, 6, 7, 8, 9]})
    safe = neutralise_cells(df)
    assert list(safe["id"]) == ["'=HYPERLINK(\"x\")", "'+1+1", "'-2+3", "'@SUM(A1)", "' x",
                                "' x", "plain", "-12.5", "a b|c"]
    assert safe["contracts"].tolist() == [-1, 2, -3, 4, 5, 6, 7, 8, 9]
    assert pd.api.types.is_integer_dtype(safe["contracts"])


def test_trade_list_with_hostile_ids_stays_inert(tmp_path):
    text = (BOOK_TEXT.replace('"CRD-M1"', '"=cmd|\' /C calc\'!A0"')
            .replace('"ULSD-M1", "=cmd', '"ULSD-M1", "=cmd'))
    book = write_book(tmp_path, text)
    out = tmp_path / "trades.csv"
    result = run_cli(["solve", book, "--trades", out])
    assert result.exit_code == 0, result.output
    rows = list(csv.DictReader(io.StringIO(out.read_text())))
    for row in rows:
        assert not row["instrument"].startswith(("=", "+", "@", "\t", "\r"))
        assert re.fullmatch(r"-?\d+", row["target"])  # numbers stay numbers


def _table_cells(markdown: str, heading: str) -> list[list[str]]:
    part = markdown.split(f"## {heading}", 1)[1].split("\n## ", 1)[0]
    rows = [ln for ln in part.splitlines() if ln.startswith("|")]
    return [re.split(r"(?<!\\)\|", ln.strip())[1:-1] for ln in rows]


def test_markdown_report_ids_cannot_forge_structure(tmp_path):
    evil = "X|Y <script>alert(1)</script> # [link](http://e) *b* `c`"
    text = BOOK_TEXT.replace('"CRD-M1"', f'"{evil}"').replace('name = "Reliability fleet"',
                                                               'name = "# Fake heading |"')
    book = write_book(tmp_path, text)
    out = tmp_path / "report.md"
    result = run_cli(["report", book, "--out", out])
    assert result.exit_code == 0, result.output
    md = out.read_text()
    assert "<script>" not in md
    assert md.count("\n# ") == 0 and md.startswith("# Hedge report — \\# Fake heading \\|")
    cells = _table_cells(md, "Futures positions")
    widths = {len(r) for r in cells}
    assert len(widths) == 1, widths  # no extra column from the pipe in the id
    assert any("X\\|Y" in c for r in cells for c in r)


def test_write_csv_atomic_neutralises(tmp_path):
    target = tmp_path / "x.csv"
    write_csv_atomic(pd.DataFrame({"a": ["=1"], "b": [1.5]}), target)
    assert target.read_text().splitlines() == ["a,b", "'=1,1.5"]


def test_rich_markup_in_an_error_message_is_printed_as_text(tmp_path):
    book = write_book(tmp_path, BOOK_TEXT.replace('series = "rack_diesel"', 'series = "[/]"'))
    line = assert_one_clean_line(run_cli(["solve", book]), 2, names="'[/]'")
    assert "is not declared" in line


def test_rich_markup_in_ids_neither_crashes_nor_leaves_a_file(tmp_path):
    book = write_book(tmp_path, BOOK_TEXT.replace('"CRD-M1"', '"[/][bold]x"'))
    out = tmp_path / "trades.csv"
    result = run_cli(["solve", book, "--trades", out])
    assert result.exit_code == 0, result.output
    assert "[/][bold]x" in result.stdout


def test_two_outputs_of_one_run_may_not_share_a_file(tmp_path):
    book = write_book(tmp_path)
    scen = tmp_path / "scenarios.toml"
    scen.write_text(SCENARIO_TEXT)
    same = tmp_path / "out.png"
    assert_one_clean_line(run_cli(["sweep", book, scen, "--csv", same, "--png", same]), 2,
                          names="--png")
    assert not same.exists()


def test_demo_into_a_path_below_a_file_is_one_clean_line(tmp_path):
    (tmp_path / "afile").write_text("x")
    assert_one_clean_line(run_cli(["demo", "--out", tmp_path / "afile" / "demo"]), 2,
                          names="--out")
