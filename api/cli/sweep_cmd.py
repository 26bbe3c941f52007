"""The ``basiswise sweep BOOK SCENARIOS`` command: many limit scenarios side by side."""

from __future__ import annotations

import json
from pathlib import Path

import typer
from rich.text import Text

from basiswise.data_adapters.choices import METHODS, Method

from .common import (
    EXIT_NO_HEDGE,
    BookArg,
    book_inputs,
    check_outputs,
    err,
    fail,
    guarded,
    out,
    workers_option,
)
from .render import Column, Grid, show, text
from .tables import cautions_panel, money, note, num, pct

MAX_ROWS = 60
PROGRESS_FROM = 20
#: A sweep of more scenarios than this asks first (or needs ``--yes``): at the time limit per
#: scenario it could run for hours.
CONFIRM_ABOVE = 200


def _confirm_size(n: int, time_limit: float, workers: int, yes: bool) -> None:
    if n <= CONFIRM_ABOVE or yes:
        return
    hours = n * time_limit / max(workers, 1) / 3600
    what = (f"{n} scenarios (more than {CONFIRM_ABOVE}); at the time limit of {time_limit:g} s "
            f"each this can take up to {hours:.1f} h")
    import sys

    if sys.stdin.isatty() and err.is_terminal:
        if typer.confirm(f"{what}. Run them?", default=False, err=True):
            return
        fail("sweep not started (not confirmed)")
    fail(f"{what}; pass --yes to run them, or split the scenario file")


def _short(limit: str) -> str:
    """``group 'x' long`` → ``x (group, long)``: the name first, so it survives a narrow column."""
    for kind in ("group", "no over-hedge"):
        if limit.startswith(kind + " '"):
            name, _, side = limit[len(kind) + 2:].partition("' ")
            return f"{name} ({kind}, {side})"
    return limit


def _binding_text(r, cur: str) -> Text:
    if not r.feasible:
        return text("; ".join(r.conflicts), "red")
    top = sorted(r.binding, key=lambda b: -b["shadow"])[:2]
    more = len(r.binding) - len(top)
    unit = {"contract": "ct"}
    words = "; ".join(f"{_short(b['name'])} {money(b['shadow'])}/"
                      f"{unit.get(b['unit'], b['unit'].replace('100,000', '100k').split(' of')[0])}"
                      for b in top)
    return text(words + (f"; +{more} more" if more > 0 else ""))


def _horizon(res) -> str:
    """The title's horizon: one number when every scenario shares it, else each one."""
    hs = sorted({r.settings.get("horizon_days", res.horizon_days) for r in res.results}
                or {res.horizon_days})
    if len(hs) == 1:
        return f"{hs[0]}-day horizon"
    return "horizons " + ", ".join(str(h) for h in hs) + " days (stds over each scenario's own)"


def comparison_table(res) -> Grid:
    cur = res.currency
    t = Grid(f"Scenarios — {res.book} ({res.method}, {_horizon(res)}, {cur}; stress P&L: "
             "loss negative)",
             [Column("scenario", "left", wrap=True), Column("status", "left"),
              Column(f"hedged std {cur}"), Column("var. red."), Column(f"margin {cur}"),
              Column(f"stress unhedged → hedged {cur}", wrap=True)])
    for r in res.results[:MAX_ROWS]:
        st = r.stress
        stress = ("" if st is None else
                  f"{money(st['unhedged'])} → {money(st['hedged'])}")
        status = text(r.status, None if r.feasible else "red")
        t.add_row(r.name, status, money(r.hedged_std), pct(r.variance_reduction),
                  money(r.margin_used), stress)
    return t


def binding_table(res) -> Grid:
    t = Grid(f"Binding limits per scenario (hedged std cut per extra unit, {res.currency}) "
             "and conflicts", [Column("scenario", "left", wrap=True),
                               Column("top binding limits, or why infeasible", "left",
                                      wrap=True)])
    for r in res.results[:MAX_ROWS]:
        t.add_row(r.name, _binding_text(r, res.currency))
    return t


def contracts_table(res) -> Grid:
    digits = 2 if res.method == "continuous" else 0
    unit = "fractional contracts, method continuous" if digits else "contracts"
    t = Grid(f"Contracts per instrument (target positions, {unit}; negative = short)",
             [Column("scenario", "left", wrap=True)] + [Column(i) for i in res.instruments])
    for r in res.results[:MAX_ROWS]:
        t.add_row(r.name, *[num(r.contracts.get(i), digits) if r.feasible and i in r.contracts
                            else ("—" if r.feasible else "") for i in res.instruments])
    return t


def _stress_labels(res) -> list[str]:
    labels = {r.stress["label"] for r in res.results if r.stress}
    return sorted(labels)


def _run(book, scenarios, method, workers, scheduler, show_progress, time_limit, yes):
    from basiswise.data_adapters.book import load_book
    from basiswise.optimizer.sweeps.runner import default_workers, run_sweep
    from basiswise.optimizer.sweeps.scenario_file import load_scenarios

    b = load_book(book)
    ss = load_scenarios(scenarios, b)
    n = default_workers(len(ss)) if workers <= 0 else workers
    _confirm_size(len(ss), time_limit, n, yes)
    if not show_progress or len(ss) < PROGRESS_FROM:
        return run_sweep(book, ss, method=method, workers=n, scheduler=scheduler,
                         time_limit=time_limit)
    from rich.progress import BarColumn, MofNCompleteColumn, Progress, TimeRemainingColumn

    with Progress("[progress.description]{task.description}", BarColumn(),
                  MofNCompleteColumn(), TimeRemainingColumn(), console=err,
                  transient=True) as bar:
        task = bar.add_task("solving scenarios", total=len(ss))
        return run_sweep(book, ss, method=method, workers=n, scheduler=scheduler,
                         time_limit=time_limit,
                         progress=lambda done, total: bar.update(task, completed=done))


def register(app: typer.Typer) -> None:
    """Add the ``sweep`` command to ``app``."""

    @app.command()
    @guarded
    def sweep(
        book: Path = BookArg,
        scenarios: Path = typer.Argument(..., help="Scenario file (TOML).", show_default=False,
                                         metavar="SCENARIOS"),
        method: Method = typer.Option("exact", "--method", "-m",
                                   help="exact (whole contracts, proven) | round | continuous"),
        as_json: bool = typer.Option(False, "--json", help="Print one JSON object on stdout."),
        csv: Path | None = typer.Option(None, "--csv", help="Write one row per scenario (CSV)."),
        png: Path | None = typer.Option(None, "--png", help="Write the limit frontier (PNG)."),
        workers: int = workers_option(0, "Local worker processes (0 = automatic, 1 = serial)."),
        scheduler: str | None = typer.Option(None, "--scheduler",
                                             help="dask.distributed scheduler address."),
        time_limit: float = typer.Option(30.0, help="Seconds allowed per scenario's "
                                                    "whole-contract search."),
        yes: bool = typer.Option(False, "--yes", "-y",
                                 help=f"Run more than {CONFIRM_ABOVE} scenarios without asking."),
    ) -> None:
        """Solve every scenario of a scenario file and compare residual risk and limits."""
        from basiswise.data_adapters.output import write_csv_atomic
        from basiswise.optimizer.sweeps.frontier import (
            frontier_lines,
            frontier_text,
            write_frontier_png,
        )

        if method not in METHODS:
            fail(f"unknown method '{method}'; valid: exact, round, continuous")
        if workers < 0:
            fail(f"--workers must be 0 or more, got {workers}")
        if not time_limit > 0:
            fail(f"--time-limit must be above 0, got {time_limit:g}")
        check_outputs({"--csv": csv, "--png": png}, book_inputs(book, scenarios))
        res = _run(book, scenarios, method, workers, scheduler,
                   show_progress=not as_json and err.is_terminal, time_limit=time_limit,
                   yes=yes)
        lines = frontier_lines(res.results)
        if csv is not None:
            write_csv_atomic(res.to_frame(), csv)
        points = sum(len(ln.scale) for ln in lines)
        png_skipped = png is not None and points < 2
        if png is not None and not png_skipped:
            write_frontier_png(lines, png, currency=res.currency,
                               title=f"Limit frontier — {res.book}")
        if as_json:
            print(json.dumps(res.to_dict(), indent=2, allow_nan=False))
        else:
            show(out, [comparison_table(res), binding_table(res), contracts_table(res)])
            if len(res.results) > MAX_ROWS:
                note(out, f"{len(res.results) - MAX_ROWS} more scenarios: see --csv or --json",
                     "")
            for label in _stress_labels(res):
                note(out, label, "stress: ")
            out.print(frontier_text(lines, res.currency), highlight=False, markup=False)
            note(out, f"{len(res.results)} scenarios in {res.seconds:.1f} s ({res.mode}); "
                 "shadow prices from the continuous relaxation", "")
            for path, what in ((csv, "scenario table"),
                               (None if png_skipped else png, "frontier chart")):
                if path is not None:
                    out.print(text(f"{what} written to {path}"))
            out.print(cautions_panel(res))
        if png_skipped:
            err.print(text(f"frontier chart not written to {png}: fewer than two feasible "
                           "limit-scale points (add a limit_scale grid)", "yellow"))
        if not any(r.feasible for r in res.results):
            fail("no scenario has a feasible hedge", EXIT_NO_HEDGE)
