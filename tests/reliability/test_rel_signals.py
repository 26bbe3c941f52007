"""Interrupts: SIGINT / SIGTERM stop solve, sweep and backtest with one line, exit 130 / 143, no
partial file and no worker left; two signals never crash the compiled search.

Each test starts the program in a child process, waits until it is at work (a line on its
output, or its worker processes), sends the signal and checks how it ended. Waits are for
events; nothing asserts on elapsed time.
"""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import pytest
from rel_kit import alive, children_of, write_book

REPO = Path(__file__).resolve().parents[2]
pytestmark = pytest.mark.skipif(not sys.platform.startswith("linux"),
                                reason="signals and /proc as on Linux")

# A hard whole-contract search (several seconds of the compiled search, more in Python): the
# seeded 48-instrument curve book of the benchmarks.
_HARD = textwrap.dedent(f"""
    import sys
    sys.path.insert(0, {str(REPO)!r})
    from benchmarks.curve_books import curve_book
    HARD = curve_book(48, "small", 1)
""")

_SEARCH = _HARD + textwrap.dedent("""
    from basiswise.optimizer.interrupts import exit_code, handle_signals
    from basiswise.optimizer.solvers.dispatch import solve_qp
    import contextlib
    guard = handle_signals() if sys.argv[1] == "guarded" else contextlib.nullcontext()
    try:
        with guard:
            print("ready", flush=True)
            solve_qp(HARD, "exact", time_limit=120)
    except KeyboardInterrupt as exc:
        print("interrupted", flush=True)
        sys.exit(exit_code(exc))
    print("finished", flush=True)
""")

# The command line, with the hard search run first inside its solve (the stand-in for a book
# whose search is long).
_CLI = _HARD + textwrap.dedent("""
    import basiswise.optimizer.pipeline as api
    real = api.solve_qp
    def slow(qp, method="exact", **kw):
        print("ready", flush=True)
        real(HARD, "exact", time_limit=120)
        return real(qp, method, **kw)
    api.solve_qp = slow
    from basiswise.cli.app import main
    sys.argv = ["basiswise", *sys.argv[1:]]
    main()
""")


def _start(code: str, *args, **kw) -> subprocess.Popen:
    return subprocess.Popen([sys.executable, "-c", code, *map(str, args)],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, **kw)


def _wait_for_line(proc: subprocess.Popen, word: str) -> None:
    line = proc.stdout.readline()
    while line and word not in line:
        line = proc.stdout.readline()
    assert word in line, proc.stderr.read()


def _finish(proc: subprocess.Popen) -> tuple[int, str, str]:
    out, err = proc.communicate(timeout=120)
    return proc.returncode, out, err


@pytest.mark.parametrize(("mode", "signals", "code"), [
    ("guarded", [signal.SIGTERM], 143),
    ("guarded", [signal.SIGINT, signal.SIGINT], 130),
    ("plain", [signal.SIGINT, signal.SIGINT], 130),  # Python's own handler, as in a notebook
])
def test_signals_stop_the_compiled_search_cleanly(mode, signals, code):
    proc = _start(_SEARCH, mode)
    _wait_for_line(proc, "ready")
    time.sleep(0.5)  # let the search get deep into its levels
    for s in signals:  # back to back: the second lands while the first is being handled
        proc.send_signal(s)
    rc, out, err = _finish(proc)
    assert rc != -signal.SIGSEGV and "Fatal Python error" not in err, (rc, err[-2000:])
    if mode == "plain" and rc == -signal.SIGINT:
        return  # Python's own handler: a second Ctrl-C after the clean-up ends the process
    assert rc == code, (rc, err[-2000:])
    assert "interrupted" in out and "finished" not in out
    assert "Traceback" not in err


@pytest.mark.parametrize(("sig", "code", "word"), [(signal.SIGINT, 130, "SIGINT"),
                                                   (signal.SIGTERM, 143, "SIGTERM")])
def test_solve_command_stops_with_one_line_and_keeps_the_old_trade_list(tmp_path, sig, code,
                                                                         word):
    book = write_book(tmp_path)
    trades = tmp_path / "trades.csv"
    trades.write_text("yesterday's list\n")
    proc = _start(_CLI, "solve", book, "--trades", trades, cwd=tmp_path)
    _wait_for_line(proc, "ready")
    time.sleep(0.5)
    proc.send_signal(sig)
    rc, _, err = _finish(proc)
    assert rc == code, err
    lines = err.strip().splitlines()
    assert len(lines) == 1 and word in lines[0] and "Traceback" not in err, lines
    assert trades.read_text() == "yesterday's list\n"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["book.toml", "prices.csv",
                                                          "trades.csv"]


def _demo_sweep(tmp_path: Path) -> tuple[Path, Path]:
    import shutil

    from basiswise.scenarios import demo_book_path

    src = Path(demo_book_path()).parent
    for name in ("book.toml", "prices.csv"):
        shutil.copy(src / name, tmp_path / name)
    grid = tmp_path / "grid.toml"
    grid.write_text('[[grid]]\nname = "w"\nvary = { limit_scale = { start = 0.01, stop = 1.8, '
                    "step = 0.01 } }\n")  # 180 scenarios: minutes of work
    return tmp_path / "book.toml", grid


def _wait_for_workers(pid: int, n: int) -> list[int]:
    kids: list[int] = []
    for _ in range(600):  # up to a minute for the spawned workers to start
        kids = children_of(pid)
        if len(kids) >= n:
            break
        time.sleep(0.1)
    assert len(kids) >= n, kids
    time.sleep(0.5)  # let them take their first chunks
    return kids


def _gone(pids: list[int]) -> bool:
    for _ in range(300):
        if not any(alive(p) for p in pids):
            return True
        time.sleep(0.1)
    return False


_SWEEP = "from basiswise.cli.app import main; import sys; sys.argv = ['basiswise', " \
         "*sys.argv[1:]]; main()"


def test_sigterm_to_a_parallel_sweep_leaves_no_worker(tmp_path):
    book, grid = _demo_sweep(tmp_path)
    out = tmp_path / "sweep.csv"
    proc = _start(_SWEEP, "sweep", book, grid, "--workers", "2", "--csv", out, "--json")
    kids = _wait_for_workers(proc.pid, 2)
    proc.send_signal(signal.SIGTERM)
    rc, _, err = _finish(proc)
    assert rc == 143, err
    assert len(err.strip().splitlines()) == 1 and "Traceback" not in err
    assert _gone(kids), [p for p in kids if alive(p)]
    assert not out.exists()


def test_ctrl_c_to_the_process_group_prints_one_line(tmp_path):
    book, grid = _demo_sweep(tmp_path)
    proc = _start(_SWEEP, "sweep", book, grid, "--workers", "2", "--json",
                  start_new_session=True)
    kids = _wait_for_workers(proc.pid, 2)
    os.killpg(proc.pid, signal.SIGINT)  # what a terminal sends on Ctrl-C
    rc, _, err = _finish(proc)
    assert rc == 130, err
    lines = err.strip().splitlines()
    assert len(lines) == 1 and "SIGINT" in lines[0], lines
    assert _gone(kids)


_BACKTEST = textwrap.dedent("""
    import sys
    import basiswise.optimizer.backtest.engine as bt
    real = bt.run_backtest
    def announced(*a, **k):
        print("ready", flush=True)
        return real(*a, **k)
    bt.run_backtest = announced
    from basiswise.cli.app import main
    sys.argv = ["basiswise", *sys.argv[1:]]
    main()
""")


def test_backtest_stops_on_sigint(tmp_path):
    book, _ = _demo_sweep(tmp_path)
    png = tmp_path / "chart.png"
    proc = _start(_BACKTEST, "backtest", book, "--estimators", "all", "--png", png)
    _wait_for_line(proc, "ready")
    time.sleep(0.5)
    proc.send_signal(signal.SIGINT)
    rc, _, err = _finish(proc)
    assert rc == 130, err
    assert "Traceback" not in err and len(err.strip().splitlines()) == 1
    assert not png.exists()


_SERIAL_SWEEP = textwrap.dedent("""
    import sys
    import basiswise.optimizer.solvers.native_search as native
    import basiswise.optimizer.sweeps.runner as sweep
    real = sweep.solve_qp
    def announced(*a, **k):
        print("ready", flush=True)
        return real(*a, **k)
    sweep.solve_qp = announced
    from basiswise.cli.app import main
    sys.argv = ["basiswise", *sys.argv[1:]]
    try:
        main()
    finally:
        print("search stopped by the interrupt:", native.last_interrupt, flush=True)
""")


def test_sigint_reaches_a_long_search_on_a_small_book(tmp_path):
    # the demo book (11 instruments, searched without a helper thread at first) at a limit
    # scale whose search runs to its time limit: the interrupt must stop the search itself
    book, _ = _demo_sweep(tmp_path)
    one = tmp_path / "one.toml"
    one.write_text('[sweep]\ninclude_base = false\n\n[[scenario]]\nname = "hard"\n'
                   "limit_scale = 0.71\n")
    proc = _start(_SERIAL_SWEEP, "sweep", book, one, "--workers", "1", "--time-limit", "100",
                  "--json")
    _wait_for_line(proc, "ready")
    time.sleep(1.0)
    proc.send_signal(signal.SIGINT)
    rc, out, err = _finish(proc)
    assert rc == 130, err
    assert "search stopped by the interrupt: (True," in out, out
    assert len(err.strip().splitlines()) == 1 and "Traceback" not in err
