"""basiswise: joint minimum-variance cross hedges of commodity books in whole futures contracts.

The Python entry points a notebook user calls (the command line, :mod:`basiswise.cli`, is a thin
layer over them); books, prices and results are pandas DataFrames or plain dataclasses:

>>> import basiswise as bw
>>> report = bw.solve_book(bw.demo_book_path(), method="exact")   # doctest: +SKIP
>>> report.hedged_std, report.trade_list()                        # doctest: +SKIP

The stages live in subpackages: :mod:`basiswise.data_adapters` (books, prices, units, rolls) and
:mod:`basiswise.optimizer` (estimation, problem, solvers, results, sweeps, backtest).
"""

from importlib import import_module
from importlib.metadata import PackageNotFoundError, version

try:
    __version__ = version("basiswise")
except PackageNotFoundError:  # pragma: no cover - only when run from an uninstalled tree
    __version__ = "0+unknown"

# Names are loaded on first use (PEP 562), so `import basiswise` and `basiswise --help` do not
# pull in pandas, pint, cvxpy or scikit-learn.
_WHERE = {
    **dict.fromkeys(["Prepared", "prepare", "model_of", "solve_model", "solve_book"],
                    "optimizer.pipeline"),
    **dict.fromkeys(["Book", "load_book"], "data_adapters.book"),
    "InputError": "data_adapters.errors",
    **dict.fromkeys(["PricePanel", "load_prices"], "data_adapters.prices"),
    "HedgeReport": "optimizer.results.report",
    **dict.fromkeys(["Scenario", "ScenarioSet", "load_scenarios", "parse_scenarios"],
                    "optimizer.sweeps.scenario_file"),
    **dict.fromkeys(["SweepResult", "run_sweep"], "optimizer.sweeps.runner"),
    **dict.fromkeys(["BacktestResult", "run_backtest"], "optimizer.backtest.engine"),
    "run_backtest_parallel": "optimizer.backtest.parallel",
    "demo_book_path": "scenarios",
}


def __getattr__(name: str):
    if name in _WHERE:
        return getattr(import_module(f"{__name__}.{_WHERE[name]}"), name)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


def __dir__() -> list[str]:
    return sorted([*globals(), *_WHERE])


__all__ = ["__version__", *sorted(_WHERE)]
