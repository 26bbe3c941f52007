"""Quantity and price units with their trade meanings.

A module-level pint registry (:data:`ureg`) is built from pint's defaults and then the names
used on commodity desks are (re)defined so that each has the meaning the trade gives it.
Only the names in :data:`TRADE_UNITS` are accepted in a book; pint's own wider vocabulary is
ambiguous for this job (in pint ``kt`` is a knot, ``MT`` a megatesla, ``ton`` a short ton and
``bbl`` a 31.5-gallon barrel), so it is not exposed.

Definitions and where each comes from
-------------------------------------
``gal``
    US liquid gallon = 231 cubic inches exactly (NIST Handbook 44, Appendix C).
``bbl``
    Petroleum barrel = 42 US gallons exactly (API Manual of Petroleum Measurement Standards;
    ASTM D1250). pint's default ``bbl`` (31.5 gal) is redefined.
``L``, ``m3``
    Litre = 1 dm³ and cubic metre (SI Brochure, 9th ed.).
``bu``
    US (Winchester) bushel = 2150.42 cubic inches (NIST Handbook 44, Appendix C). It is a volume:
    grain trade weights per bushel depend on the grain, so bushels never convert to tonnes here.
``MMBtu`` (aliases ``MMBTU``, ``mmbtu``)
    One million international-table British thermal units, 1 Btu_IT = 1055.05585262 J
    (NIST SP 811, Appendix B; ISO 31-4). 1 MMBtu ≈ 1.055056 GJ.
``therm``
    100 000 Btu_IT (the gas-trade therm; NIST SP 811 lists the EC therm, 1.05506e8 J).
``GJ``, ``MWh``, ``kWh``
    Gigajoule and megawatt-hour / kilowatt-hour (SI Brochure; 1 MWh = 3.6 GJ).
``t`` (alias ``tonne``), ``kt``
    Metric tonne = 1000 kg and kilotonne = 1e6 kg (SI Brochure, Table 8, non-SI unit accepted
    for use with the SI). pint's ``kt`` (knot) is redefined.
``kg``
    Kilogram (SI base unit).
``lb``
    Avoirdupois pound = 0.45359237 kg exactly (NIST Handbook 44, Appendix C; 1959 agreement).
``ozt``
    Troy ounce = 31.1034768 g exactly (NIST Handbook 44, Appendix C).
``pt``
    Index point, for index-linked exposures and index futures (price unit e.g. ``EUR/pt``); it
    converts only to itself.

At import the registry checks itself against these numbers and refuses to load if any differ.
"""

from __future__ import annotations

import math
import re

import pint

from basiswise.data_adapters.errors import InputError

__all__ = [
    "TRADE_UNITS",
    "ureg",
    "parse_price_unit",
    "units_in_price_unit",
    "is_known_unit",
]

ureg = pint.UnitRegistry(on_redefinition="ignore")

# Trade definitions. Distinct internal names avoid clashing with pint's own meanings.
ureg.define("trade_us_gallon = 231 * inch ** 3")
ureg.define("trade_petroleum_barrel = 42 * trade_us_gallon")
ureg.define("trade_us_bushel = 2150.42 * inch ** 3")
ureg.define("trade_btu_it = 1055.05585262 * joule")
ureg.define("trade_mmbtu = 1e6 * trade_btu_it")
ureg.define("trade_therm = 1e5 * trade_btu_it")
ureg.define("trade_tonne = 1000 * kilogram")
ureg.define("trade_kilotonne = 1000 * trade_tonne")
ureg.define("trade_pound = 0.45359237 * kilogram")
ureg.define("trade_troy_ounce = 31.1034768 * gram")
ureg.define("trade_index_point = [index_point]")

#: Accepted unit names (as written in a book) -> pint expression in :data:`ureg`.
TRADE_UNITS: dict[str, str] = {
    "gal": "trade_us_gallon",
    "bbl": "trade_petroleum_barrel",
    "L": "liter",
    "m3": "meter ** 3",
    "bu": "trade_us_bushel",
    "MMBtu": "trade_mmbtu",
    "MMBTU": "trade_mmbtu",
    "mmbtu": "trade_mmbtu",
    "therm": "trade_therm",
    "GJ": "gigajoule",
    "MWh": "megawatt * hour",
    "kWh": "kilowatt * hour",
    "t": "trade_tonne",
    "tonne": "trade_tonne",
    "kt": "trade_kilotonne",
    "kg": "kilogram",
    "lb": "trade_pound",
    "ozt": "trade_troy_ounce",
    "pt": "trade_index_point",
}

_DIMENSION_WORDS = {
    "[length] ** 3": "volume",
    "[mass]": "mass",
    "[length] ** 2 * [mass] / [time] ** 2": "energy",
    "[index_point]": "index points",
}

_CURRENCY = re.compile(r"^[A-Z]{3}$")


def _quantity(name: str) -> pint.Quantity:
    return ureg.Quantity(1.0, TRADE_UNITS[name])


def _dimension_word(q: pint.Quantity) -> str:
    dim = str(q.dimensionality)
    return _DIMENSION_WORDS.get(dim, dim)


def _self_check() -> None:
    """Refuse to load if a trade definition drifted from its standard."""
    checks = [
        ("bbl", "trade_us_gallon", 42.0),
        ("gal", "inch ** 3", 231.0),
        ("MMBtu", "gigajoule", 1.05505585262),
        ("therm", "megajoule", 105.505585262),
        ("t", "kilogram", 1000.0),
        ("kt", "kilogram", 1.0e6),
        ("lb", "kilogram", 0.45359237),
        ("MWh", "gigajoule", 3.6),
    ]
    for name, target, expected in checks:
        got = _quantity(name).to(target).magnitude
        if not math.isclose(got, expected, rel_tol=1e-12):
            raise RuntimeError(f"unit {name!r} is {got} {target}, expected {expected}")


_self_check()


def is_known_unit(name: str) -> bool:
    """True if ``name`` is one of the accepted quantity units (:data:`TRADE_UNITS`)."""
    return name in TRADE_UNITS


def _known_list() -> str:
    return ", ".join(TRADE_UNITS)


def parse_price_unit(
    text: str, *, key: str | None = None, file: str | None = None
) -> tuple[str, str]:
    """Split a price unit ``"CUR/unit"`` into currency and quantity unit.

    Parameters
    ----------
    text : str
        E.g. ``"USD/gal"``. The currency is a 3-letter upper-case code (ISO 4217 style) and the
        denominator one of :data:`TRADE_UNITS`.
    key, file : str, optional
        Where the text came from, for the error message.

    Returns
    -------
    tuple of str
        ``(currency, unit)``, e.g. ``("USD", "gal")``.

    Raises
    ------
    InputError
        If the text is not of the form ``CUR/unit`` or the unit is unknown.
    """
    if not isinstance(text, str):
        raise InputError(
            f"price unit must be text like 'USD/gal', got {text!r}", file=file, key=key
        )
    parts = text.strip().split("/")
    if len(parts) != 2 or not parts[0].strip() or not parts[1].strip():
        raise InputError(
            f"price unit {text!r} must look like 'USD/gal' (currency / quantity unit)",
            file=file,
            key=key,
        )
    currency, unit = parts[0].strip(), parts[1].strip()
    if not _CURRENCY.match(currency):
        raise InputError(
            f"currency {currency!r} in price unit {text!r} must be a 3-letter upper-case code "
            "such as 'USD'",
            file=file,
            key=key,
        )
    if not is_known_unit(unit):
        raise InputError(
            f"unknown unit {unit!r} in price unit {text!r}; known units: {_known_list()}",
            file=file,
            key=key,
        )
    return currency, unit


def units_in_price_unit(
    quantity_unit: str, price_unit: str, *, key: str, file: str | None = None
) -> float:
    """How many price denominators one quantity unit is.

    A position of ``x`` quantity units is worth ``x * factor * price`` where the price is quoted
    per the denominator of ``price_unit``.

    Parameters
    ----------
    quantity_unit : str
        Unit of the exposure or contract size, e.g. ``"bbl"``.
    price_unit : str
        Price unit of the series, e.g. ``"USD/gal"``.
    key : str
        The book key being checked, named in any error.
    file : str, optional
        The book file, named in any error.

    Returns
    -------
    float
        E.g. ``("bbl", "USD/gal") -> 42.0``, ``("MMBtu", "USD/MMBtu") -> 1.0``.

    Raises
    ------
    InputError
        Unknown unit names, or dimensions that do not convert (mass vs volume).
    """
    _, denominator = parse_price_unit(price_unit, key=key, file=file)
    if not isinstance(quantity_unit, str) or not is_known_unit(quantity_unit.strip()):
        raise InputError(
            f"unknown unit {quantity_unit!r}; known units: {_known_list()}", file=file, key=key
        )
    q = _quantity(quantity_unit.strip())
    d = _quantity(denominator)
    if q.dimensionality != d.dimensionality:
        raise InputError(
            f"unit {quantity_unit!r} ({_dimension_word(q)}) cannot be converted to the price "
            f"unit {price_unit!r} ({_dimension_word(d)}): incompatible dimensions",
            file=file,
            key=key,
        )
    factor = float((q / d).to("dimensionless").magnitude)
    # Snap round-off from the pint conversion chain (e.g. 41.99999999999999 -> 42.0).
    nearest = round(factor)
    if nearest != 0 and math.isclose(factor, nearest, rel_tol=1e-12):
        factor = float(nearest)
    return factor
