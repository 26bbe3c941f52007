"""Shared fixtures. Each helper prefixes its fixtures (``adapters_`` for data_adapters)."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

ADAPTERS_BOOK_TEXT = """\
[book]
name = "Test fleet"
currency = "USD"
horizon_days = 5

[data]
prices = "prices.csv"

[estimation]
window = 40

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


@pytest.fixture
def adapters_book_text() -> str:
    """A valid book (TOML text) over three invented series."""
    return ADAPTERS_BOOK_TEXT


@pytest.fixture
def adapters_prices_frame() -> pd.DataFrame:
    """Invented, seeded wide prices for the adapters book: 30 business days, three series."""
    rng = np.random.default_rng(7)
    dates = pd.bdate_range("2025-01-06", periods=30)
    steps = rng.normal(0.0, 0.01, size=(30, 3)).cumsum(axis=0)
    base = np.array([2.50, 2.40, 75.0])
    frame = pd.DataFrame(
        np.round(base * np.exp(steps), 4),
        index=pd.Index(dates, name="date"),
        columns=["rack_diesel", "ulsd_m1", "crude_m1"],
    )
    return frame


@pytest.fixture
def adapters_book_path(tmp_path, adapters_book_text, adapters_prices_frame):
    """``tmp_path/book.toml`` plus its ``prices.csv``; returns the book path."""
    adapters_prices_frame.to_csv(tmp_path / "prices.csv", date_format="%Y-%m-%d")
    path = tmp_path / "book.toml"
    path.write_text(adapters_book_text, encoding="utf-8")
    return path


# --------------------------------------------------------------------------- PostgreSQL server
# Tests that need a real PostgreSQL server take the ``postgres_url`` fixture. `.ci/run` starts a
# throwaway cluster and exports BASISWISE_TEST_POSTGRES_URL; without it the fixture starts its own
# cluster from the server binaries on PATH (initdb, pg_ctl), as the `postgres` user when run as
# root (the server refuses to run as root). Under CI a missing server is a failure, not a skip.

POSTGRES_ENV = "BASISWISE_TEST_POSTGRES_URL"


def _free_port() -> int:
    import socket

    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return int(s.getsockname()[1])


def _as_server_user(cmd: list[str]) -> list[str]:
    import os
    import shutil

    if os.geteuid() == 0 and shutil.which("runuser"):
        return ["runuser", "-u", "postgres", "--", *cmd]
    return cmd


@pytest.fixture(scope="session")
def postgres_url():
    """SQLAlchemy URL of a live, empty-to-start PostgreSQL server on 127.0.0.1."""
    import os
    import shutil
    import subprocess
    import tempfile
    from pathlib import Path

    url = os.environ.get(POSTGRES_ENV)
    if url:
        yield url
        return
    if not (shutil.which("initdb") and shutil.which("pg_ctl")):
        if os.environ.get("CI"):
            pytest.fail("PostgreSQL server binaries (initdb, pg_ctl) are not on PATH")
        pytest.skip("PostgreSQL server binaries (initdb, pg_ctl) are not on PATH")
    # not under pytest's tmp folder: that one is private to root, the server user must enter it
    root = Path(tempfile.mkdtemp(prefix="basiswise-pg-"))
    if os.geteuid() == 0:
        shutil.chown(root, "postgres")
    data, port = root / "data", _free_port()
    subprocess.run(_as_server_user(["initdb", "-D", str(data), "-A", "trust", "-U", "postgres",
                                    "--no-sync"]), check=True, capture_output=True)
    subprocess.run(_as_server_user([
        "pg_ctl", "-D", str(data), "-l", str(root / "log"), "-w", "-o",
        f"-p {port} -k {root} -c listen_addresses=127.0.0.1 -c fsync=off", "start"]),
        check=True, capture_output=True)
    try:
        yield f"postgresql+psycopg://postgres@127.0.0.1:{port}/postgres"
    finally:
        subprocess.run(_as_server_user(["pg_ctl", "-D", str(data), "-m", "fast", "-w", "stop"]),
                       capture_output=True)
        shutil.rmtree(root, ignore_errors=True)
