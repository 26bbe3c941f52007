"""Seeded generator of the invented demo price history and the demo book.

The demo describes an invented specialty-chemicals maker with a delivery fleet. It must buy
regional rack diesel, natural gas at a regional hub and propane feedstock for the next three
delivery months, and may hedge with eleven generic futures (crude, diesel, gasoline, natural
gas; one to three contract months each). Every number here is invented; no real prices are used.

Regenerate the committed files with::

    python -m basiswise.scenarios.generate_demo [folder]      # default: scenarios/demo

Price model
-----------
Five families f (crude, diesel futures "ulsd", gasoline, natural gas, propane) share two latent
daily factors (oil, gas) and an idiosyncratic shock, independent standard normals:
``z_f = a_f u_oil + b_f u_gas + sqrt(1 - a_f^2 - b_f^2) e_f``. The front-month log level is a
discretised Ornstein–Uhlenbeck (AR(1)) deviation with daily log volatility ``sigma_f`` scaled
by a regime multiplier ``m_t`` (one calm, one turbulent year, :data:`REGIMES`)::

    y_f[t] = (1 - kappa_f) y_f[t-1] + m_t sigma_f z_f[t],   log P_f1 = log L_f + y_f

Month k adds a log spread from a slow term-structure shock ``w_f`` shared by the family's months
(loading ``l_k``, :data:`MONTH_LOADING`) and a month-specific shock ``v_fk``::

    s_fk[t] = (1 - kappa_s) s_fk[t-1] + m_t sigma_f (TS_SHARE l_k w_f + MONTH_NOISE_SHARE v_fk)
    log P_fk = log L_f + (k - 1) c_f + y_f + s_fk

so daily changes of months 2 and 3 correlate about 0.98 and 0.96 with month 1. A regional
price with no future of its own is the futures plus an additive OU basis in price units, one
common to the region and a smaller one per month (:data:`BASES`)::

    B[t] = mu + (1 - kappa_B)(B[t-1] - mu) + m_t sigma_B eps[t],   R_k = F_k + B + B_k

(rack diesel on the diesel futures in USD/gal, the gas hub on natural gas in USD/MMBtu).

References
----------
.. [1] Uhlenbeck, G. E. and Ornstein, L. S. (1930). On the theory of the Brownian motion.
   Physical Review 36, 823-841.
.. [2] Vasicek, O. (1977). An equilibrium characterization of the term structure. Journal of
   Financial Economics 5, 177-188 (mean-reverting OU dynamics for prices and rates).
"""

from __future__ import annotations

import sys
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd
from scipy.signal import lfilter

from basiswise.data_adapters.errors import InputError

DEFAULT_SEED = 20261201
DEFAULT_START = "2016-01-04"
DEFAULT_DAYS = 2600
DEMO_FOLDER = Path(__file__).resolve().parent / "demo"


@dataclass(frozen=True)
class Family:
    """One product family of the invented market (front-month parameters)."""

    prefix: str
    months: int
    level: float  # long-run front-month level, price unit
    vol: float  # daily log volatility in a normal regime
    oil: float  # loading on the oil factor
    gas: float  # loading on the gas factor
    kappa: float  # daily mean-reversion speed of the log level
    carry: float  # log spread per month further out (contango > 0)
    unit: str


FAMILIES: tuple[Family, ...] = (
    Family("crude", 3, 74.0, 0.020, 0.97, 0.00, 0.014, 0.004, "USD/bbl"),
    Family("ulsd", 3, 2.45, 0.019, 0.84, 0.00, 0.014, 0.003, "USD/gal"),
    Family("gasoline", 2, 2.35, 0.021, 0.80, 0.00, 0.014, -0.004, "USD/gal"),
    Family("natgas", 3, 3.40, 0.035, 0.15, 0.97, 0.012, 0.020, "USD/MMBtu"),
    Family("propane", 3, 0.95, 0.022, 0.55, 0.20, 0.016, 0.005, "USD/gal"),
)

#: term-structure loading of month k (month 1 carries none)
MONTH_LOADING = (0.0, 1.0, 1.8)
SPREAD_KAPPA = 0.01
TS_SHARE = 0.15
MONTH_NOISE_SHARE = 0.12


@dataclass(frozen=True)
class Basis:
    """A regional price = its family's futures + an additive OU basis in price units."""

    prefix: str
    family: str
    mean: float
    kappa: float
    sigma: float  # daily, price units, common to all months
    month_sigma: float  # daily, price units, month-specific part
    month_kappa: float
    unit: str


BASES: tuple[Basis, ...] = (
    Basis("rack_diesel", "ulsd", 0.06, 0.010, 0.008, 0.003, 0.05, "USD/gal"),
    Basis("hub_gas", "natgas", -0.30, 0.020, 0.030, 0.010, 0.05, "USD/MMBtu"),
)

#: (first day, last day exclusive, multiplier) as fractions of the sample: a calm year, a
#: turbulent year; every other day has multiplier 1
REGIMES = ((0.30, 0.40, 0.6), (0.50, 0.60, 1.7))


def series_units() -> dict[str, str]:
    """Price unit of every generated column, in column order."""
    units = {}
    for fam in FAMILIES:
        for k in range(1, fam.months + 1):
            units[f"{fam.prefix}_m{k}"] = fam.unit
    for basis in BASES:
        for k in range(1, 4):
            units[f"{basis.prefix}_m{k}"] = basis.unit
    return units


def regime_multiplier(days: int) -> np.ndarray:
    """Daily volatility multiplier: 1 except for one calm and one turbulent stretch."""
    mult = np.ones(days)
    for lo, hi, m in REGIMES:
        mult[int(lo * days) : int(hi * days)] = m
    return mult


def _ou(shocks: np.ndarray, kappa: float) -> np.ndarray:
    """Discretised OU deviation ``x_t = (1 - kappa) x_{t-1} + shock_t`` along axis 0."""
    return lfilter([1.0], [1.0, -(1.0 - kappa)], shocks, axis=0)


def generate_prices(
    seed: int = DEFAULT_SEED, start: str = DEFAULT_START, days: int = DEFAULT_DAYS
) -> pd.DataFrame:
    """Generate the invented daily price panel of the demo.

    Parameters
    ----------
    seed : int
        Seed of ``numpy.random.default_rng``; the same seed gives the same frame.
    start : str
        First business day (ISO date).
    days : int
        Number of business days (Monday to Friday, no holiday calendar); at least 2.

    Returns
    -------
    pandas.DataFrame
        Index ``date`` (business days), one column per series (see :func:`series_units`),
        prices rounded to 6 decimals, all positive and finite.

    Notes
    -----
    Model and references: see the module docstring.
    """
    if int(days) < 2:
        raise InputError(f"must be at least 2, got {days}", key="days")
    days = int(days)
    rng = np.random.default_rng(seed)
    index = pd.bdate_range(start=start, periods=days, name="date")
    mult = regime_multiplier(days)[:, None]

    n_fam = len(FAMILIES)
    factors = rng.standard_normal((days, 2))
    idio = rng.standard_normal((days, n_fam))
    term = rng.standard_normal((days, n_fam))
    month_noise = rng.standard_normal((days, n_fam, 3))

    loads = np.array([[f.oil, f.gas] for f in FAMILIES])
    resid = np.sqrt(1.0 - (loads**2).sum(axis=1))
    z = factors @ loads.T + idio * resid
    vols = np.array([f.vol for f in FAMILIES])

    columns: dict[str, np.ndarray] = {}
    for i, fam in enumerate(FAMILIES):
        level = _ou(mult[:, 0] * fam.vol * z[:, i], fam.kappa)
        spread_shock = (
            mult
            * vols[i]
            * (
                TS_SHARE * np.outer(term[:, i], MONTH_LOADING)
                + MONTH_NOISE_SHARE * month_noise[:, i]
            )
        )
        spread_shock[:, 0] = 0.0
        spread = _ou(spread_shock, SPREAD_KAPPA)
        for k in range(fam.months):
            log_p = np.log(fam.level) + k * fam.carry + level + spread[:, k]
            columns[f"{fam.prefix}_m{k + 1}"] = np.exp(log_p)

    for basis in BASES:
        common = basis.mean + _ou(mult[:, 0] * basis.sigma * rng.standard_normal(days), basis.kappa)
        own = _ou(mult * basis.month_sigma * rng.standard_normal((days, 3)), basis.month_kappa)
        for k in range(3):
            futures = columns[f"{basis.family}_m{k + 1}"]
            columns[f"{basis.prefix}_m{k + 1}"] = futures + common + own[:, k]

    frame = pd.DataFrame(columns, index=index).round(6)
    values = frame.to_numpy()
    if not np.isfinite(values).all() or (values <= 0).any():
        bad = frame.columns[(~np.isfinite(values) | (values <= 0)).any(axis=0)].tolist()
        raise InputError(f"produced a non-positive price in {bad}; use another seed", key="seed")
    return frame


# --------------------------------------------------------------------------------------------
# The demo book (invented firm, generic contracts). Quantities: negative = the firm must buy.
# --------------------------------------------------------------------------------------------

#: (id, series, quantity, unit, proxy instrument)
EXPOSURES: tuple[tuple[str, str, int, str, str], ...] = (
    ("fleet-diesel-m1", "rack_diesel_m1", -600_000, "gal", "ULSD-F1"),
    ("fleet-diesel-m2", "rack_diesel_m2", -520_000, "gal", "ULSD-F2"),
    ("fleet-diesel-m3", "rack_diesel_m3", -450_000, "gal", "ULSD-F3"),
    ("plant-gas-m1", "hub_gas_m1", -320_000, "MMBtu", "NATGAS-F1"),
    ("plant-gas-m2", "hub_gas_m2", -300_000, "MMBtu", "NATGAS-F2"),
    ("plant-gas-m3", "hub_gas_m3", -260_000, "MMBtu", "NATGAS-F3"),
    ("feed-propane-m1", "propane_m1", -12_000, "bbl", "CRUDE-F1"),
    ("feed-propane-m2", "propane_m2", -10_000, "bbl", "CRUDE-F2"),
    ("feed-propane-m3", "propane_m3", -8_000, "bbl", "CRUDE-F3"),
)

#: id, series, contract_size, unit, limit (L for -L..L, or (min, max)), current, adv
#: (contracts/day), initial margin (USD/contract), cost (USD/contract), contract month
INSTRUMENTS: tuple[tuple, ...] = (
    ("CRUDE-F1", "crude_m1", 1000, "bbl", 40, 2, 180_000, 6_200, 2.80, "2026-02"),
    ("CRUDE-F2", "crude_m2", 1000, "bbl", 40, 0, 90_000, 6_200, 2.80, "2026-03"),
    ("CRUDE-F3", "crude_m3", 1000, "bbl", 40, 0, 40_000, 6_200, 2.80, "2026-04"),
    ("ULSD-F1", "ulsd_m1", 42000, "gal", 30, 6, 45_000, 7_600, 3.10, "2026-02"),
    ("ULSD-F2", "ulsd_m2", 42000, "gal", 30, 4, 20_000, 7_600, 3.10, "2026-03"),
    ("ULSD-F3", "ulsd_m3", 42000, "gal", (-10, 20), 0, 6_000, 7_600, 3.10, "2026-04"),
    ("GASOLINE-F1", "gasoline_m1", 42000, "gal", 20, 0, 40_000, 7_100, 3.10, "2026-02"),
    ("GASOLINE-F2", "gasoline_m2", 42000, "gal", 20, 0, 12_000, 7_100, 3.10, "2026-03"),
    ("NATGAS-F1", "natgas_m1", 10000, "MMBtu", 50, 10, 120_000, 4_600, 2.50, "2026-02"),
    ("NATGAS-F2", "natgas_m2", 10000, "MMBtu", 50, 0, 50_000, 4_600, 2.50, "2026-03"),
    ("NATGAS-F3", "natgas_m3", 10000, "MMBtu", (-20, 40), 0, 18_000, 4_600, 2.50, "2026-04"),
)
MAX_PARTICIPATION = 0.1
EXECUTION_DAYS = 3

#: (id, instruments, limit in contracts): one per product family, all months combined
GROUP_LIMITS: tuple[tuple[str, tuple[str, ...], int], ...] = (
    ("crude-all-months", ("CRUDE-F1", "CRUDE-F2", "CRUDE-F3"), 30),
    ("ulsd-all-months", ("ULSD-F1", "ULSD-F2", "ULSD-F3"), 40),
    ("gasoline-all-months", ("GASOLINE-F1", "GASOLINE-F2"), 20),
    ("natgas-all-months", ("NATGAS-F1", "NATGAS-F2", "NATGAS-F3"), 80),
)
MARGIN_BUDGET = 750_000


def _toml_value(value: object) -> str:
    if isinstance(value, str):
        return f'"{value}"'
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, float):
        return f"{value:.2f}" if value >= 1 else repr(value)
    if isinstance(value, int):
        return f"{value:_}" if abs(value) >= 10_000 else str(value)
    if isinstance(value, tuple | list):
        return "[" + ", ".join(_toml_value(v) for v in value) + "]"
    raise TypeError(f"no TOML rendering for {value!r}")


def _pairs(**items: object) -> list[str]:
    return [f"{key} = {_toml_value(val)}" for key, val in items.items()]


def _table(header: str, **items: object) -> list[str]:
    return ["", header, *_pairs(**items)]


def render_book(as_of: str, seed: int = DEFAULT_SEED) -> str:
    """Render the demo ``book.toml`` text (deterministic; short comments for a desk user).

    Parameters
    ----------
    as_of : str
        ISO date of the valuation (the last price row).
    seed : int
        Seed of the price history, recorded in the header comment.

    Returns
    -------
    str
        The TOML document, LF line ends.
    """
    units = series_units()
    used = [e[1] for e in EXPOSURES] + [i[1] for i in INSTRUMENTS]
    lines = [
        "# basiswise demo book: an invented specialty-chemicals maker with a delivery fleet.",
        f"# Generated by `python -m basiswise.scenarios.generate_demo` (seed {seed}); all prices "
        "invented.",
        "#",
        "# Signs: exposure quantity < 0 means the firm must BUY that amount (it is short the",
        "# commodity and loses when the price rises); futures positions < 0 are short contracts,",
        "# > 0 long. A must-buy exposure is hedged with long futures.",
        "# Units: each series declares its price unit CUR/unit; each exposure and contract states",
        "# its quantity unit, converted into the series' unit (1 bbl = 42 gal).",
        "",
        "[book]",
        'name = "Demo chemicals and fleet"',
        'currency = "USD"',
        "horizon_days = 20          # hedge horizon in business days",
        f"as_of = {as_of}       # valuation date: the last row of prices.csv",
        "",
        "[data]",
        'prices = "prices.csv"      # path relative to this file',
        'format = "wide"            # date + one column per series',
        "",
        "[estimation]",
        "window = 500               # business days of history used for the covariance",
        'changes = "relative"       # percent price changes over the horizon',
        'estimator = "ledoit-wolf"',
        "ewma_lambda = 0.94         # used only by the ewma estimator",
        'sampling = "overlapping"   # overlapping 20-day windows',
        "",
        "# Price unit of every series used (the series name is the price column).",
    ]
    for name in dict.fromkeys(used):
        lines += [f"[series.{name}]", f'unit = "{units[name]}"']
    lines += [
        "",
        "# Exposures: what the firm must buy per delivery month. quantity < 0 = must buy.",
        "# proxy = the futures a quantity-for-quantity hedge would use.",
        "# The propane feedstock is stated in bbl against a USD/gal price (1 bbl = 42 gal).",
    ]
    for ident, series, qty, unit, proxy in EXPOSURES:
        lines += _table("[[exposure]]", id=ident, series=series, quantity=qty, unit=unit)
        lines += _pairs(proxy=proxy)
    lines += [
        "",
        "# Candidate futures. Positions in contracts (negative = short).",
        "# position_limit L allows -L..L; min_position/max_position set each side.",
        "# current = contracts held now. Liquidity: |target - current| may not exceed",
        "# max_participation x adv (contracts/day) x execution_days.",
        "# margin = initial margin in USD per contract; cost_per_contract in USD per contract.",
    ]
    for ident, series, size, unit, limit, current, adv, margin, cost, month in INSTRUMENTS:
        lines += _table("[[instrument]]", id=ident, series=series, contract_size=size, unit=unit)
        if isinstance(limit, tuple):
            lines += [f"min_position = {limit[0]}", f"max_position = {limit[1]}"]
        else:
            lines.append(f"position_limit = {limit}")
        lines += _pairs(current=current, adv=adv, max_participation=MAX_PARTICIPATION)
        lines += _pairs(execution_days=EXECUTION_DAYS, margin=margin, cost_per_contract=cost)
        lines += _pairs(contract_month=month)
    lines += [
        "",
        "# Group limits: all months of one product combined:",
        "# |sum of the listed instruments' net positions| <= limit (contracts).",
    ]
    for ident, members, limit in GROUP_LIMITS:
        lines += _table("[[group_limit]]", id=ident, instruments=members, limit=limit)
    lines += [
        "",
        "[constraints]",
        f"margin_budget = {_toml_value(MARGIN_BUDGET)}   # USD: sum of margin x |position|",
        "hedge_only = false",
        "",
    ]
    return "\n".join(lines)


def write_prices(frame: pd.DataFrame, path: Path) -> None:
    """Write the wide CSV (``date`` + one column per series, 6 decimals, LF line ends)."""
    text = frame.to_csv(float_format="%.6f", date_format="%Y-%m-%d", lineterminator="\n")
    path.write_text(text, encoding="utf-8", newline="")


def write_demo(folder: Path = DEMO_FOLDER, seed: int = DEFAULT_SEED) -> Path:
    """Write ``book.toml`` and ``prices.csv`` of the demo into ``folder``.

    Parameters
    ----------
    folder : pathlib.Path
        Target folder, created if missing; existing demo files are overwritten.
    seed : int
        Seed of the price generator.

    Returns
    -------
    pathlib.Path
        Path of the written book file. The output is byte-identical for the same seed.
    """
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    frame = generate_prices(seed=seed)
    write_prices(frame, folder / "prices.csv")
    book_path = folder / "book.toml"
    as_of = frame.index[-1].date().isoformat()
    book_path.write_text(render_book(as_of=as_of, seed=seed), encoding="utf-8", newline="")
    return book_path


def main(argv: list[str] | None = None) -> int:
    """Command-line entry: ``python -m basiswise.scenarios.generate_demo [folder]``."""
    args = sys.argv[1:] if argv is None else argv
    folder = Path(args[0]) if args else DEMO_FOLDER
    book = write_demo(folder)
    print(f"wrote {book} and {book.parent / 'prices.csv'}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
