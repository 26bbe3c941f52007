"""Trade units: each definition checked against the standard that fixes it."""

from __future__ import annotations

import math

import pytest

from basiswise.data_adapters.errors import InputError
from basiswise.data_adapters.units import TRADE_UNITS, parse_price_unit, units_in_price_unit, ureg


def q(name: str):
    return ureg.Quantity(1.0, TRADE_UNITS[name])


def test_barrel_is_42_us_gallons_exactly():
    # source: API Manual of Petroleum Measurement Standards / ASTM D1250 define the petroleum
    # barrel as 42 US gallons (from memory)
    assert units_in_price_unit("bbl", "USD/gal", key="k") == 42.0
    assert q("bbl").to(TRADE_UNITS["gal"]).magnitude == pytest.approx(42.0, rel=1e-15)


def test_pint_default_barrel_is_not_used():
    # source: NIST Handbook 44 Appendix C, the 31.5-gallon barrel is a different (liquid) barrel
    # (from memory); pint's default `bbl` is that one, so a book must not get it.
    assert ureg.Quantity(1.0, "bbl").to("gallon").magnitude == pytest.approx(31.5)
    assert units_in_price_unit("bbl", "USD/gal", key="k") != pytest.approx(31.5)


def test_us_gallon_is_231_cubic_inches():
    # source: NIST Handbook 44 Appendix C (from memory)
    assert q("gal").to("inch ** 3").magnitude == pytest.approx(231.0, rel=1e-12)
    # 1 in = 2.54 cm exactly (1959 international yard and pound agreement), so 3.785411784 L
    # source: NIST Handbook 44 Appendix C (from memory)
    assert q("gal").to("liter").magnitude == pytest.approx(3.785411784, rel=1e-12)


def test_mmbtu_is_1_055056_gigajoule():
    # source: NIST SP 811 Appendix B.9, Btu (International Table) = 1.055056 E+03 J
    assert q("MMBtu").to("gigajoule").magnitude == pytest.approx(1.055056, rel=1e-6)
    assert units_in_price_unit("MMBTU", "USD/mmbtu", key="k") == 1.0
    assert units_in_price_unit("MMBtu", "USD/MMBtu", key="k") == 1.0


def test_therm_and_mwh():
    # source: NIST SP 811 Appendix B.9, therm (EC) = 1.055 06 E+08 J (from memory)
    assert q("therm").to("joule").magnitude == pytest.approx(1.05506e8, rel=1e-5)
    assert units_in_price_unit("therm", "USD/MMBtu", key="k") == pytest.approx(0.1, rel=1e-12)
    # source: SI Brochure 9th ed., Table 8: 1 h = 3600 s, so 1 MWh = 3.6 GJ
    assert q("MWh").to("gigajoule").magnitude == pytest.approx(3.6, rel=1e-12)
    # 1 MWh in MMBtu = 3.6 / 1.05505585262
    assert units_in_price_unit("MWh", "EUR/MMBtu", key="k") == pytest.approx(
        3.6 / 1.05505585262, rel=1e-12
    )


def test_tonne_is_1000_kg():
    # source: SI Brochure 9th ed., Table 8 (tonne, t = 1000 kg)
    assert q("t").to("kilogram").magnitude == pytest.approx(1000.0, rel=1e-15)
    assert units_in_price_unit("kt", "USD/t", key="k") == 1000.0
    # pint's own `kt` is a knot; the trade meaning (kilotonne) must win.
    assert q("kt").to("kilogram").magnitude == pytest.approx(1e6)


def test_pound_and_bushel():
    # source: NIST Handbook 44 Appendix C, 1 lb (avoirdupois) = 0.45359237 kg exactly (from memory)
    assert units_in_price_unit("t", "USD/lb", key="k") == pytest.approx(1000 / 0.45359237)
    # source: NIST Handbook 44 Appendix C, 1 US bushel = 2150.42 in^3 (from memory)
    assert q("bu").to("inch ** 3").magnitude == pytest.approx(2150.42, rel=1e-12)


def test_parse_price_unit():
    assert parse_price_unit("USD/gal") == ("USD", "gal")
    assert parse_price_unit(" EUR / MWh ") == ("EUR", "MWh")


@pytest.mark.parametrize(
    "text, words",
    [
        ("usd/gal", "3-letter upper-case"),
        ("USDX/gal", "3-letter upper-case"),
        ("USD", "must look like"),
        ("USD/gal/day", "must look like"),
        ("USD/furlong", "unknown unit 'furlong'"),
        ("USD/", "must look like"),
    ],
)
def test_parse_price_unit_errors_name_key(text, words):
    with pytest.raises(InputError) as info:
        parse_price_unit(text, key="series.x.unit")
    assert info.value.key == "series.x.unit"
    assert "series.x.unit" in str(info.value)
    assert words in str(info.value)


def test_incompatible_dimensions_name_key():
    with pytest.raises(InputError) as info:
        units_in_price_unit("t", "USD/gal", key="exposure 'a'.unit", file="book.toml")
    text = str(info.value)
    assert text.startswith("book.toml, key \"exposure 'a'.unit\": ")
    assert "mass" in text and "volume" in text and "incompatible" in text


@pytest.mark.parametrize("unit", ["MT", "ton", "barrels", "", "Gal"])
def test_unknown_unit_names_key_and_unit(unit):
    with pytest.raises(InputError) as info:
        units_in_price_unit(unit, "USD/t", key="instrument 'X'.unit")
    assert info.value.key == "instrument 'X'.unit"
    assert repr(unit) in str(info.value)


def test_every_unit_converts_to_itself():
    for name in TRADE_UNITS:
        assert units_in_price_unit(name, f"USD/{name}", key="k") == 1.0
        assert math.isfinite(q(name).to_base_units().magnitude)
