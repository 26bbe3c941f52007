"""Builders for the reliability tests: a small valid book on disk, TOML text, CLI runs.

Imported by the tests in ``tests/reliability`` (``tests/kit`` is on ``sys.path``); the library
is imported by its installed names.
"""

from __future__ import annotations

import json
import math
import os
from pathlib import Path

import numpy as np
import pandas as pd

MAX_LINE = 300  # an error is one line of at most ~300 characters

BOOK_TEXT = """\
[book]
name = "Reliability fleet"
currency = "USD"
horizon_days = 5

[data]
prices = "prices.csv"

[estimation]
window = 60
estimator = "ledoit-wolf"

[series.rack_diesel]
unit = "USD/gal"

[series.ulsd_m1]
unit = "USD/gal"

[series.crude_m1]
unit = "USD/bbl"

[[exposure]]
id = "fleet-diesel"
series = "rack_diesel"
quantity = -2000000.0
unit = "gal"
proxy = "ULSD-M1"

[[instrument]]
id = "ULSD-M1"
series = "ulsd_m1"
contract_size = 42000
unit = "gal"
position_limit = 100
adv = 5000
margin = 5000

[[instrument]]
id = "CRD-M1"
series = "crude_m1"
contract_size = 1000
unit = "bbl"
min_position = -50
max_position = 50

[[group_limit]]
id = "all-energy"
instruments = ["ULSD-M1", "CRD-M1"]
limit = 120

[constraints]
margin_budget = 1000000.0
"""

SCENARIO_TEXT = """\
[sweep]
include_base = true

[[scenario]]
name = "half-limits"
limit_scale = 0.5

[[scenario]]
name = "thin"
adv_scale = 0.2
"""


def prices_frame(rows: int = 90, seed: int = 7) -> pd.DataFrame:
    """Invented, seeded wide prices for :data:`BOOK_TEXT`: business days, three series."""
    rng = np.random.default_rng(seed)
    dates = pd.bdate_range("2025-01-06", periods=rows)
    common = rng.normal(0.0, 0.01, size=(rows, 1))
    steps = (0.8 * common + 0.6 * rng.normal(0.0, 0.01, size=(rows, 3))).cumsum(axis=0)
    base = np.array([2.50, 2.40, 75.0])
    return pd.DataFrame(np.round(base * np.exp(steps), 4), index=pd.Index(dates, name="date"),
                        columns=["rack_diesel", "ulsd_m1", "crude_m1"])


def write_book(folder: Path, text: str = BOOK_TEXT, frame: pd.DataFrame | None = None) -> Path:
    """``folder/book.toml`` with its ``prices.csv``; returns the book path."""
    folder.mkdir(parents=True, exist_ok=True)
    (prices_frame() if frame is None else frame).to_csv(folder / "prices.csv",
                                                        date_format="%Y-%m-%d")
    path = folder / "book.toml"
    path.write_text(text, encoding="utf-8")
    return path


def toml_value(v) -> str:
    """A Python value as TOML (inline tables and arrays; JSON string escapes are TOML's)."""
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, int):
        return str(v)
    if isinstance(v, float):
        if math.isnan(v):
            return "nan"
        if math.isinf(v):
            return "inf" if v > 0 else "-inf"
        return repr(v)
    if isinstance(v, str):
        return json.dumps(v)
    if isinstance(v, list):
        return "[" + ", ".join(toml_value(x) for x in v) + "]"
    if isinstance(v, dict):
        return "{" + ", ".join(f"{json.dumps(k)} = {toml_value(x)}" for k, x in v.items()) + "}"
    raise TypeError(type(v))


def toml_document(doc: dict) -> str:
    """A dict as a TOML document: one ``key = value`` line per top-level key."""
    return "".join(f"{json.dumps(k)} = {toml_value(v)}\n" for k, v in doc.items())


def assert_one_clean_line(result, code: int = 2, *, names: str | None = None) -> str:
    """A CLI result ended with ``code`` and one short error line (no traceback)."""
    assert not isinstance(result.exception, Exception) or isinstance(result.exception,
                                                                     SystemExit), \
        f"raised {result.exception!r}"
    assert result.exit_code == code, (result.exit_code, result.output)
    text = result.stderr.strip()
    assert "Traceback" not in text
    lines = text.splitlines()
    assert len(lines) == 1, lines
    line = lines[0]
    assert line.startswith("error: ")
    assert len(line) <= MAX_LINE + len("error: ") + 2, len(line)
    if names is not None:
        assert names in line, line
    return line


def run_cli(args: list[str]):
    """Run ``basiswise`` in this process (stdout and stderr kept apart)."""
    from typer.testing import CliRunner

    from basiswise.cli.app import app

    try:
        runner = CliRunner(mix_stderr=False)
    except TypeError:  # click >= 8.2 keeps them apart already
        runner = CliRunner()
    return runner.invoke(app, [str(a) for a in args])


def children_of(pid: int) -> list[int]:
    """Pids of the live child processes of ``pid`` (from /proc)."""
    kids = []
    for entry in os.listdir("/proc"):
        if not entry.isdigit():
            continue
        try:
            with open(f"/proc/{entry}/stat") as fh:
                fields = fh.read().rsplit(")", 1)[1].split()
        except OSError:
            continue
        if int(fields[1]) == pid and fields[0] != "Z":
            kids.append(int(entry))
    return kids


def alive(pid: int) -> bool:
    """Whether ``pid`` runs (a zombie counts as gone)."""
    try:
        with open(f"/proc/{pid}/stat") as fh:
            return fh.read().rsplit(")", 1)[1].split()[0] != "Z"
    except OSError:
        return False


def die_at_start() -> None:
    """Pool initializer of the fault-injection tests: the worker process dies at once."""
    os._exit(7)
