"""The book file: what the firm is exposed to and what it may trade.

A book is a TOML file (read with :mod:`tomllib`) validated into pydantic models. Every problem is
raised as :class:`~data_adapters.errors.InputError` naming the book file and the key at fault.
Keys of array tables are written with the entry's id when it has one (``instrument
'CRD-M1'.contract_size``) and otherwise with its 1-based position (``exposure[3].series`` is the
third ``[[exposure]]`` table). Paths in the book are relative to the book's folder.
"""

from __future__ import annotations

import math
from datetime import date
from pathlib import Path
from typing import Any

from pydantic import BaseModel, ConfigDict, Field, PrivateAttr, ValidationError, field_validator

from basiswise.data_adapters import book_rules as rules
from basiswise.data_adapters.book_costs import CostSpec, check_costs
from basiswise.data_adapters.boundary import input_boundary
from basiswise.data_adapters.choices import (
    PRICE_FORMATS,
    ChangeKind,
    Estimator,
    RollAdjustment,
    Sampling,
)
from basiswise.data_adapters.errors import InputError, from_validation_error
from basiswise.data_adapters.toml_file import read_toml
from basiswise.data_adapters.units import parse_price_unit, units_in_price_unit

__all__ = [
    "Book",
    "BookMeta",
    "Constraints",
    "CostSpec",
    "DataSpec",
    "EstimationSpec",
    "Exposure",
    "GroupLimit",
    "Instrument",
    "RollSpec",
    "SeriesSpec",
    "load_book",
]

Changes = ChangeKind  # the name the schema has always used


class _Model(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True, strict=True, allow_inf_nan=False)

    @field_validator("*", mode="after")
    @classmethod
    def _plain_text(cls, value: Any) -> Any:
        return rules.plain_text(value)


class BookMeta(_Model):
    """``[book]``: name, reporting currency, hedge horizon in trading days, as-of date."""

    name: str = Field(min_length=1)
    currency: str = Field("USD", pattern=r"^[A-Z]{3}$")
    horizon_days: int = Field(20, ge=1, le=rules.MAX_DAYS)
    as_of: date | None = None


class RollSpec(_Model):
    """``[data.roll]``: how per-contract prices become generic months (``format = "contracts"``).

    ``expiries`` is a file with columns contract, last_trade, product; ``roll_days`` business
    days before ``last_trade`` the position moves to the next contract; ``adjust`` is the
    back-adjustment of older history (see :func:`data_adapters.rolls.roll_generic`).
    """

    expiries: str = Field(min_length=1)
    roll_days: int = Field(5, ge=0, le=250)
    adjust: RollAdjustment = "ratio"
    contract_column: str = Field("contract", min_length=1)


_FORMATS = PRICE_FORMATS


class DataSpec(_Model):
    """``[data]``: where the price history is and how it is laid out.

    ``prices`` names a file; ``url`` (or ``url_env``, the environment variable holding it, so a
    password stays out of the book) a database read through SQLAlchemy, e.g.
    ``sqlite:///prices.db`` (path relative to the book) or ``postgresql+psycopg://host/db``;
    ``table`` (and ``db_schema``) name its table, ``start``/``end`` restrict the dates read.
    """

    prices: str | None = Field(None, min_length=1)
    url: str | None = Field(None, min_length=1)
    url_env: str | None = Field(None, min_length=1)
    db_schema: str | None = Field(None, min_length=1)
    start: date | None = None
    end: date | None = None
    calendar: str | None = Field(None, min_length=1)  # market calendar (data_adapters.calendars)
    holidays: str | None = Field(None, min_length=1)  # or a file of closing days
    format: str = "wide"
    date_column: str = Field("date", min_length=1)
    series_column: str = Field("series", min_length=1)
    price_column: str = Field("price", min_length=1)
    max_gap_days: int = Field(7, ge=1, le=3660)
    table: str = Field("prices", min_length=1)  # table in a SQLite file or the url database
    roll: RollSpec | None = None

    @field_validator("format")
    @classmethod
    def _known_format(cls, value: str) -> str:
        if value not in _FORMATS:
            raise ValueError(
                "must be 'wide' or 'long' (one series per column or per row), or 'contracts' "
                "(per-contract prices rolled into generic months by [data.roll])"
            )
        return value


class EstimationSpec(_Model):
    """``[estimation]``: history window, kind of price change, covariance estimator, sampling."""

    window: int = Field(500, ge=2, le=1_000_000)
    changes: Changes = "relative"
    estimator: Estimator = "ledoit-wolf"
    ewma_lambda: float = Field(0.94, gt=0.0, lt=1.0)
    sampling: Sampling = "overlapping"


class SeriesSpec(_Model):
    """``[series.NAME]``: the price unit of one price column, e.g. ``USD/gal``."""

    unit: str


class Exposure(_Model):
    """``[[exposure]]``: a quantity the firm holds (> 0) or must buy (< 0) at a series' price."""

    id: str = Field(min_length=1)
    series: str
    quantity: float = Field(ge=-rules.MAX_QUANTITY, le=rules.MAX_QUANTITY)
    unit: str
    proxy: str | None = None


class Instrument(_Model):
    """``[[instrument]]``: a futures contract that may be traded, with its limits and costs."""

    id: str = Field(min_length=1)
    series: str
    contract_size: float = Field(gt=0.0, le=rules.MAX_CONTRACT_SIZE)
    unit: str
    min_position: float | None = Field(None, ge=-rules.MAX_CONTRACTS, le=rules.MAX_CONTRACTS)
    max_position: float | None = Field(None, ge=-rules.MAX_CONTRACTS, le=rules.MAX_CONTRACTS)
    position_limit: float | None = Field(None, ge=0.0, le=rules.MAX_CONTRACTS)
    current: int = Field(0, ge=-rules.MAX_CONTRACTS, le=rules.MAX_CONTRACTS)
    adv: float | None = Field(None, ge=0.0, le=rules.MAX_CONTRACTS * 100)
    max_participation: float = Field(0.1, gt=0.0, le=1.0)
    execution_days: float = Field(1.0, gt=0.0, le=rules.MAX_DAYS)
    margin: float = Field(0.0, ge=0.0, le=rules.MAX_PER_CONTRACT)
    cost_per_contract: float = Field(0.0, ge=0.0, le=rules.MAX_PER_CONTRACT)
    amount_currency: str | None = Field(None, pattern=r"^[A-Z]{3}$")  # of margin and costs
    contract_month: str | None = Field(None, pattern=r"^\d{4}-(0[1-9]|1[0-2])$")
    # trading-cost model (optimizer.problem.costs): quoted bid-ask spread in the series' price unit,
    # or in ticks with the currency value of one tick per contract; square-root impact coefficient
    spread: float | None = Field(None, ge=0.0, le=rules.MAX_PER_CONTRACT)
    spread_ticks: float | None = Field(None, ge=0.0, le=rules.MAX_CONTRACTS)
    tick_value: float | None = Field(None, ge=0.0, le=rules.MAX_PER_CONTRACT)
    impact_coefficient: float | None = Field(None, ge=0.0, le=1e3)
    min_trade: int | None = Field(None, ge=1, le=rules.MAX_CONTRACTS)
    # passed through to the trade list for the execution desk (free text / a date)
    symbol: str | None = None
    exchange: str | None = None
    last_trade: date | None = None

    def bounds(self) -> tuple[float, float]:
        """Position bounds in contracts, ``(-inf, inf)`` when unlimited."""
        if self.position_limit is not None:
            return (-float(self.position_limit), float(self.position_limit))
        lo = -math.inf if self.min_position is None else float(self.min_position)
        hi = math.inf if self.max_position is None else float(self.max_position)
        return (lo, hi)


class GroupLimit(_Model):
    """``[[group_limit]]``: ``|sum of the group's net positions| <= limit`` (contracts)."""

    id: str = Field(min_length=1)
    instruments: list[str] = Field(min_length=1)
    limit: float = Field(gt=0.0, le=rules.MAX_CONTRACTS * 100)


class Constraints(_Model):
    """``[constraints]``: margin budget (currency), hedge-only and no-over-hedge switches.

    ``no_over_hedge``: in each group that some exposure names as its ``proxy``'s group, the net
    notional of the group's futures may not exceed the value of those exposures. Groups no
    exposure points to are not capped (they serve as cross hedges only).
    """

    margin_budget: float | None = Field(None, gt=0.0, le=rules.MAX_MONEY)
    hedge_only: bool = False
    no_over_hedge: bool = False


_PATTERN_WORDS = {
    "currency": "must be a 3-letter upper-case currency code such as 'USD'",
    "amount_currency": "must be a 3-letter upper-case currency code such as 'USD'",
    "contract_month": "must be a contract month written YYYY-MM, e.g. '2027-01'",
}
_ID_TABLES = ("exposure", "instrument", "group_limit")

_EXCLUSIVE = {"price_of_risk": "budget", "budget": "price_of_risk"}
_OVERRIDES = {
    "estimator": "estimation",
    "window": "estimation",
    "changes": "estimation",
    "sampling": "estimation",
    "ewma_lambda": "estimation",
    "horizon_days": "book",
    "price_of_risk": "costs",
    "budget": "costs",
}


class Book(_Model):
    """A validated book. Build it with :func:`load_book` or :meth:`Book.from_dict`."""

    book: BookMeta
    data: DataSpec
    estimation: EstimationSpec = EstimationSpec()
    series: dict[str, SeriesSpec] = Field(default_factory=dict)
    exposures: list[Exposure] = Field(default_factory=list, alias="exposure")
    instruments: list[Instrument] = Field(default_factory=list, alias="instrument")
    group_limits: list[GroupLimit] = Field(default_factory=list, alias="group_limit")
    constraints: Constraints = Constraints()
    costs: CostSpec = CostSpec()
    fx: dict[str, str] = Field(default_factory=dict)  # currency -> exchange-rate series

    _path: Path = PrivateAttr(default=Path("book.toml"))
    _source: str = PrivateAttr(default="book.toml")

    @property
    def path(self) -> Path:
        """The book file."""
        return self._path

    @property
    def folder(self) -> Path:
        """The folder relative paths in the book are resolved against."""
        return self._path.parent

    @property
    def source(self) -> str:
        """How the book file is named in messages."""
        return self._source

    @property
    def prices_path(self) -> Path:
        """The price history file (or database named by ``url``), resolved against the folder."""
        if self.data.prices is None:
            return self.folder / "database"
        return self.folder / self.data.prices

    @property
    def expiries_path(self) -> Path | None:
        """The contract expiries file of ``[data.roll]``, resolved; None without a roll table."""
        return None if self.data.roll is None else self.folder / self.data.roll.expiries

    def input_files(self) -> list[Path]:
        """The files this book reads (book, prices, expiries): never an output path."""
        files = [self.path, self.prices_path]
        return files + ([self.expiries_path] if self.expiries_path is not None else [])

    def series_ids(self) -> list[str]:
        """Series used by exposures and instruments, in order of first use."""
        seen: dict[str, None] = {}
        for item in [*self.exposures, *self.instruments]:
            seen.setdefault(item.series, None)
        return list(seen)

    def instrument(self, instrument_id: str) -> Instrument:
        """The instrument with this id (``KeyError`` if none)."""
        for inst in self.instruments:
            if inst.id == instrument_id:
                return inst
        raise KeyError(instrument_id)

    @classmethod
    def from_dict(cls, data: dict, folder: str | Path, source: str = "book.toml") -> Book:
        """Validate a book given as a dict (the parsed TOML).

        Parameters
        ----------
        data : dict
            Same shape as the TOML file.
        folder : str or Path
            Folder that relative paths are resolved against.
        source : str
            Name of the book in error messages; the book's ``path`` is ``folder / source``.
        """
        if not isinstance(data, dict):
            raise InputError("the book must be a table of keys", file=source)
        with input_boundary(source, "book file"):
            try:
                book = cls.model_validate(data)
            except ValidationError as err:
                raise from_validation_error(
                    err, data, source=source, root=cls, id_tables=_ID_TABLES,
                    words=_PATTERN_WORDS) from None
            _check(book, source)
        src = Path(source)
        book._path = src if src.is_absolute() else Path(folder) / src.name
        book._source = source
        return book

    def with_overrides(self, **kw: Any) -> Book:
        """A copy with some settings replaced, validated like the file.

        Accepted keywords: ``estimator``, ``window``, ``changes``, ``sampling``, ``ewma_lambda``
        (``[estimation]``) and ``horizon_days`` (``[book]``). ``None`` values are ignored.
        """
        data = self.model_dump(by_alias=True, exclude_none=True)
        for name, value in kw.items():
            if name not in _OVERRIDES:
                raise InputError(
                    f"unknown override; allowed: {', '.join(_OVERRIDES)}", key=name
                )
            if value is not None:
                section = data.setdefault(_OVERRIDES[name], {})
                section[name] = value
                if name in _EXCLUSIVE:  # a cost budget replaces a price of risk and back
                    section.pop(_EXCLUSIVE[name], None)
        return Book.from_dict(data, self.folder, f"{self._source} (with overrides)")


def load_book(path: str | Path) -> Book:
    """Read and validate a TOML book file.

    Raises
    ------
    InputError
        Missing file, TOML syntax error (with its line) or any invalid key.
    """
    p = Path(path)
    source = str(path)
    data = read_toml(p, "book file")
    book = Book.from_dict(data, p.parent, source)
    book._path = p
    return book


# --------------------------------------------------------------------------- cross checks


def _check_unique(items: list, table: str, source: str) -> None:
    seen: dict[str, int] = {}
    for i, item in enumerate(items):
        if item.id in seen:
            raise InputError(
                f"duplicate id {item.id!r} (also used by {table}[{seen[item.id] + 1}])",
                file=source,
                key=f"{table}[{i + 1}].id",
            )
        seen[item.id] = i


def _check(book: Book, source: str) -> None:
    """Checks that span several keys; each raises InputError naming the key."""
    currency = book.book.currency
    if book.data.format == "contracts" and book.data.roll is None:
        raise InputError(
            "format = 'contracts' needs a [data.roll] table naming the expiries file",
            file=source,
            key="data.roll",
        )
    if book.data.roll is not None and book.data.format != "contracts":
        raise InputError(
            f"[data.roll] is only used with format = 'contracts' (format is "
            f"{book.data.format!r})",
            file=source,
            key="data.roll",
        )
    _check_source(book, source)
    units: dict[str, str] = {}
    for name, spec in book.series.items():
        if rules.CONTROL_CHARS.search(name):
            raise InputError("series name contains a control character; use plain text",
                             file=source, key="series")
        parse_price_unit(spec.unit, key=f"series.{name}.unit", file=source)
        units[name] = spec.unit
    if not book.exposures:
        raise InputError("the book has no [[exposure]] entries", file=source, key="exposure")
    if not book.instruments:
        raise InputError("the book has no [[instrument]] entries", file=source, key="instrument")
    _check_unique(book.exposures, "exposure", source)
    _check_unique(book.instruments, "instrument", source)
    _check_unique(book.group_limits, "group_limit", source)
    declared = ", ".join(units) or "none"
    instrument_ids = {inst.id for inst in book.instruments}

    for table, items in (("exposure", book.exposures), ("instrument", book.instruments)):
        for item in items:
            where = f"{table} {item.id!r}"
            if item.series not in units:
                raise InputError(
                    f"series {item.series!r} is not declared; add [series.{item.series}] with its "
                    f"price unit (declared: {declared})",
                    file=source,
                    key=f"{where}.series",
                )
            units_in_price_unit(item.unit, units[item.series], key=f"{where}.unit", file=source)

    for exp in book.exposures:
        where = f"exposure {exp.id!r}"
        if exp.quantity == 0:
            raise InputError("quantity must be nonzero", file=source, key=f"{where}.quantity")
        if exp.proxy is not None and exp.proxy not in instrument_ids:
            raise InputError(
                f"proxy {exp.proxy!r} is not an instrument id", file=source, key=f"{where}.proxy"
            )

    for inst in book.instruments:
        where = f"instrument {inst.id!r}"
        has_min_max = inst.min_position is not None or inst.max_position is not None
        if inst.position_limit is not None and has_min_max:
            raise InputError(
                "give either position_limit or min_position/max_position, not both",
                file=source,
                key=f"{where}.position_limit",
            )
        lo, hi = inst.bounds()
        if lo > hi:
            raise InputError(
                f"min_position {inst.min_position:g} is above max_position {inst.max_position:g}",
                file=source,
                key=f"{where}.min_position",
            )

    check_costs(book, source)

    from basiswise.data_adapters.currency import check_currencies

    check_currencies(book, currency, source)

    for group in book.group_limits:
        where = f"group_limit {group.id!r}"
        seen: set[str] = set()
        for j, inst_id in enumerate(group.instruments):
            key = f"{where}.instruments[{j + 1}]"
            if inst_id not in instrument_ids:
                raise InputError(f"{inst_id!r} is not an instrument id", file=source, key=key)
            if inst_id in seen:
                raise InputError(f"{inst_id!r} is listed twice", file=source, key=key)
            seen.add(inst_id)


def _check_source(book: Book, source: str) -> None:
    """Exactly one of ``[data]`` prices, url, url_env; dates in order."""
    d = book.data
    given = [k for k in ("prices", "url", "url_env") if getattr(d, k) is not None]
    if len(given) != 1:
        what = "required key is missing" if not given else f"found {', '.join(given)}"
        raise InputError(
            f"{what}: give exactly one of prices (a file), url (a database URL) or url_env "
            "(the environment variable holding the URL)", file=source, key="data.prices",
        )
    if d.start is not None and d.end is not None and d.start > d.end:
        raise InputError(f"start {d.start} is after end {d.end}", file=source, key="data.start")
    if d.format == "contracts" and d.prices is None:
        raise InputError("format = 'contracts' reads a file: give prices", file=source,
                         key="data.url")
