"""Turn files into validated books and aligned price panels (plus units, errors, output)."""

from data_adapters.book import (
    Book,
    BookMeta,
    Constraints,
    DataSpec,
    EstimationSpec,
    Exposure,
    GroupLimit,
    Instrument,
    SeriesSpec,
    load_book,
)
from data_adapters.errors import InputError
from data_adapters.output import atomic_path, atomic_write, write_csv_atomic, write_text_atomic
from data_adapters.prices import PricePanel, check_positive, load_prices, read_prices
from data_adapters.units import parse_price_unit, units_in_price_unit, ureg

__all__ = [
    "Book",
    "BookMeta",
    "Constraints",
    "DataSpec",
    "EstimationSpec",
    "Exposure",
    "GroupLimit",
    "InputError",
    "Instrument",
    "PricePanel",
    "SeriesSpec",
    "atomic_path",
    "atomic_write",
    "check_positive",
    "load_book",
    "load_prices",
    "parse_price_unit",
    "read_prices",
    "units_in_price_unit",
    "ureg",
    "write_csv_atomic",
    "write_text_atomic",
]
