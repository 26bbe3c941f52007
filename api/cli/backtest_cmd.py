"""The ``basiswise backtest BOOK`` command: rolling out-of-sample comparison of hedges."""

from __future__ import annotations

import json
from pathlib import Path

import typer
from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeElapsedColumn

from basiswise.data_adapters.choices import ESTIMATORS, WHOLE_METHODS, WholeMethod

from .common import (
    BookArg,
    book_inputs,
    check_outputs,
    check_ranges,
    err,
    fail,
    guarded,
    out,
    workers_option,
)
from .render import Column, Grid, show, text
from .tables import cautions_panel, money, note, num, pct


def _names(text: str | None, valid: tuple[str, ...], default: list[str], what: str) -> list[str]:
    if text is None:
        return default
    if text.strip() == "all":
        return list(valid)
    names = [t.strip() for t in text.split(",") if t.strip()]
    bad = [t for t in names if t not in valid]
    if bad or not names:
        fail(f"unknown {what} {', '.join(bad) or repr(text)}; valid: {', '.join(valid)}, all")
    return names


def ranking_table(result, rank: str = "gross") -> Grid:
    """Runs ranked by realised out-of-sample variance reduction (gross or net of cost)."""
    cur, h = result.currency, result.horizon_days
    t = Grid(f"Backtest — {result.book.book.name}: {len(result.dates)} rebalances every "
             f"{result.step} days, {h}-day horizon, window {result.window} rows "
             f"({result.dates[0].date()} to {result.horizon_end[-1].date()})",
             [Column("rank"), Column("strategy", "left"), Column("estimator", "left"),
              Column("realised VR"), Column("in-sample VR"), Column(f"hedged std {cur}"),
              Column(f"worst {h}-d loss {cur}"), Column("contracts traded"),
              Column(f"trading cost {cur}"), Column("net VR"), Column("held")], keys=3)
    for pos, m in enumerate(result.metrics(rank), 1):
        digits = 1 if m.strategy == "joint-continuous" else 0
        t.add_row(str(pos), m.strategy, m.estimator or "—", pct(m.variance_reduction),
                  pct(m.predicted_vr), money(m.hedged_std), money(m.worst_loss),
                  num(m.contracts_traded, digits), money(m.trading_cost),
                  pct(m.net_variance_reduction, 2), str(m.held))
    return t


RANKING_GUIDE = (
    "realised VR: 1 − Var(hedged)/Var(unhedged) of the out-of-sample horizon P&Ls (1 = all "
    "price risk removed, below 0 = the hedge added risk)",
    "in-sample VR: what the estimate promised at each rebalance; far above realised VR = the "
    "estimate overfits or the relationships moved",
    "hedged std / worst loss: the realised spread and the largest loss over one horizon, in "
    "currency, the tail the book must be able to carry",
    "contracts traded: sum of |trade| over all rebalances (joint-continuous is fractional, "
    "shown to one decimal); trading cost: those contracts at cost_per_contract",
    "held: rebalances where no feasible target was found and the previous positions were kept",
)

EFFECTIVENESS_GUIDE = (
    "slope and R²: regression of the hedge legs' P&L on the exposures' P&L per period; a slope "
    "near −1 and R² near 1 mean the legs offset the exposure period by period",
    "cumulative dollar offset: the legs' summed P&L over the exposures' summed P&L; a high "
    "variance reduction can sit beside an offset outside the band when the summed exposure P&L "
    "is near zero, so read it beside the regression, which judges every period",
)


def effectiveness_table(result) -> Grid:
    """Regression and dollar-offset evidence for the best run, per hedge relationship."""
    best = result.best()
    t = Grid(f"Effectiveness evidence — {best.label} (holding-period P&L)",
             [Column("relationship", "left", wrap=True)]
             + [Column(n) for n in ("periods", "slope", "R²", "regression test",
                                    "cumulative dollar offset", "offset test")])
    word = {True: text("inside", "green"), False: text("outside", "red"), None: "—"}
    for e in result.effectiveness(best):
        t.add_row(e.group, str(e.periods), num(e.slope, 3), num(e.r2, 3),
                  word[e.regression_ok], pct(e.dollar_offset), word[e.offset_ok])
    t.caption = ("Each test against its common-practice band. A cumulative dollar offset is "
                 "unstable when the exposure's summed P&L is near zero; over long histories "
                 "the regression test is the steadier evidence.")
    return t


def register(app: typer.Typer) -> None:
    """Add the ``backtest`` command to ``app``."""

    @app.command()
    @guarded
    def backtest(
        book: Path = BookArg,
        every: int | None = typer.Option(
            None, "--every", "-k", help="Business days per rebalance [default: horizon]."),
        strategies: str | None = typer.Option(
            None, "--strategies", help="Comma list or 'all' [default: all]: unhedged, "
            "one-to-one, single-mv, joint-continuous, joint-whole."),
        estimators: str | None = typer.Option(
            None, "--estimators", help="Comma list or 'all' [default: the book's]: "
            + ", ".join(ESTIMATORS) + "."),
        method: WholeMethod = typer.Option("exact", "--method", "-m",
                                   help="Whole contracts for joint-whole: exact | round."),
        window: int | None = typer.Option(None, help="Override [estimation].window (rows)."),
        horizon: int | None = typer.Option(None, help="Override [book].horizon_days."),
        time_limit: float = typer.Option(10.0, help="Seconds per whole-contract solve."),
        as_json: bool = typer.Option(False, "--json", help="Print one JSON object on stdout."),
        png: Path | None = typer.Option(None, "--png", help="Write the cumulative P&L chart."),
        workers: int = workers_option(1, "Local processes (one estimator per job)."),
        rank: str = typer.Option("gross", "--rank",
                                 help="Rank by realised VR gross or net of trading cost."),
    ) -> None:
        """Rolling out-of-sample backtest: each strategy and estimator, ranked by realised
        variance reduction, with hedge-effectiveness evidence."""
        from basiswise.optimizer.backtest.effectiveness import EVIDENCE_NOTE
        from basiswise.optimizer.backtest.engine import run_backtest
        from basiswise.optimizer.backtest.strategies import ALL_STRATEGIES, STRATEGIES
        from basiswise.optimizer.pipeline import prepare
        from basiswise.optimizer.results.cautions import CAUTIONS

        if rank not in ("gross", "net"):
            fail(f"unknown ranking '{rank}'; valid: gross, net")
        if method not in WHOLE_METHODS:
            fail(f"unknown method '{method}'; valid: {', '.join(WHOLE_METHODS)}")
        check_ranges(every=(every, 1, False), window=(window, 2, False),
                     horizon=(horizon, 1, False), time_limit=(time_limit, 0, True),
                     workers=(workers, 1, False))
        check_outputs({"--png": png}, book_inputs(book))
        prep = prepare(book, window=window, horizon_days=horizon)
        default = list(STRATEGIES)
        if prep.book.costs.price_of_risk is not None or prep.book.costs.budget is not None:
            default.append("joint-whole-cost")  # the book prices its trades: compare net
        strat = _names(strategies, ALL_STRATEGIES, default, "strategy")
        ests = _names(estimators, ESTIMATORS, [prep.book.estimation.estimator], "estimator")
        with Progress(TextColumn("backtest"), BarColumn(), MofNCompleteColumn(),
                      TimeElapsedColumn(), console=err, transient=True,
                      disable=as_json) as bar:
            task = bar.add_task("rebalances", total=None)
            tick = lambda done, total: bar.update(task, completed=done, total=total)  # noqa: E731
            if workers > 1 and len(ests) > 1:
                from basiswise.optimizer.backtest.parallel import run_backtest_parallel

                result = run_backtest_parallel(prep, step=every, strategies=strat,
                                               estimators=ests, method=method,
                                               time_limit=time_limit, workers=workers,
                                               progress=tick)
            else:
                result = run_backtest(prep, step=every, strategies=strat, estimators=ests,
                                      method=method, time_limit=time_limit, progress=tick)
        if png is not None:
            from basiswise.optimizer.backtest.chart import write_backtest_png

            write_backtest_png(result, png)
        if as_json:
            d = result.to_dict()
            d["notes"] = list(prep.notes) + d["notes"]  # e.g. the rows as_of left out
            print(json.dumps(d, indent=2))
            return
        show(out, ranking_table(result, rank))
        for line in RANKING_GUIDE:
            note(out, line, "")
        show(out, effectiveness_table(result))
        for line in EFFECTIVENESS_GUIDE + (EVIDENCE_NOTE,):
            note(out, line, "")
        for line in prep.notes + result.notes:
            note(out, line)
        if png is not None:
            out.print(text(f"chart written to {png}"))
        out.print(cautions_panel(CAUTIONS))
