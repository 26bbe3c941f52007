"""Long runs: a big sweep asks first, and every scenario stops at its time limit."""

from __future__ import annotations

from rel_kit import assert_one_clean_line, run_cli, write_book


def test_a_sweep_beyond_the_stated_size_needs_yes(tmp_path):
    book = write_book(tmp_path)
    grid = tmp_path / "grid.toml"
    grid.write_text('[[grid]]\nname = "g"\nvary = { limit_scale = { start = 0.005, stop = 1.5, '
                    "step = 0.005 } }\n")  # 300 scenarios
    line = assert_one_clean_line(run_cli(["sweep", book, grid]), 2, names="--yes")
    assert "300" in line or "301" in line


def test_yes_skips_the_question():
    from basiswise.cli import sweep_cmd

    sweep_cmd._confirm_size(10_000, 30.0, 2, yes=True)  # returns without asking or failing
    sweep_cmd._confirm_size(sweep_cmd.CONFIRM_ABOVE, 30.0, 1, yes=False)


def test_each_scenario_stops_at_its_time_limit():
    from basiswise.optimizer.sweeps.runner import run_sweep
    from basiswise.optimizer.sweeps.scenario_file import Scenario
    from basiswise.scenarios import demo_book_path

    # this limit scale leaves fractional limits that make the demo's search long (about 30 s
    # here); with a short limit the scenario reports time-limited with its true gap
    res = run_sweep(demo_book_path(), [Scenario("hard", {"limit_scale": 0.71})],
                    time_limit=0.3)
    (r,) = res.results
    assert r.feasible and r.status == "time-limited"
    assert r.relaxed_std <= r.hedged_std
