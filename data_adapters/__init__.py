"""Turn files into validated books and aligned price panels (plus units, errors, output)."""

from importlib import import_module

# Names are loaded on first use (PEP 562), so importing one submodule (e.g. the errors, which the
# command line needs at start-up) does not pull in pandas, pydantic and pint.
_WHERE = {
    **dict.fromkeys(["Book", "BookMeta", "Constraints", "DataSpec", "EstimationSpec", "Exposure",
                     "GroupLimit", "Instrument", "SeriesSpec", "load_book"], "book"),
    "InputError": "errors",
    **dict.fromkeys(["atomic_path", "atomic_write", "write_csv_atomic", "write_text_atomic"],
                    "output"),
    **dict.fromkeys(["PricePanel", "check_positive", "load_prices", "read_prices"], "prices"),
    **dict.fromkeys(["parse_price_unit", "units_in_price_unit", "ureg"], "units"),
}


def __getattr__(name: str):
    if name in _WHERE:
        return getattr(import_module(f"{__name__}.{_WHERE[name]}"), name)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


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
