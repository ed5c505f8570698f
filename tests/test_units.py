"""The unit registry and quantity parsing."""

from __future__ import annotations

import math

import pytest

from chargeplan.units import parse_quantity, ureg


def test_registry_converts_like_the_si_definitions():
    # SI brochure (BIPM, 9th ed.): 1 h = 3600 s; 1 Ah = 3600 C; 0 degC = 273.15 K
    assert parse_quantity("2 h", "duration") == 7200
    assert ureg.Quantity("9 Ah").to("A*s").magnitude == pytest.approx(32400)
    assert ureg.Quantity("0 degC").to("K").magnitude == pytest.approx(273.15)
    # 41 degF is 5 degC (SI brochure, Fahrenheit definition)
    assert parse_quantity("41 degF", "temperature") == pytest.approx(5.0)


@pytest.mark.parametrize(
    ("text", "kind", "expected"),
    [
        ("12.6 V", "voltage", 12.6),
        ("12600 mV", "voltage", 12.6),
        ("2.43 V/cell", "cell_voltage", 2.43),
        ("-3 mV/K/cell", "coefficient", -3.0),
        ("60 %", "fraction", 60.0),
        ("120 d", "duration", 120 * 86400),
        ("0.1 It", "c_rate", 0.1),
        ("500 mA", "current", 0.5),
        ("9Ah", "capacity", 9.0),
        # the degree sign, as people write it (pint alone reads "°C" as "degreeC");
        # 41 °F = 5 °C by the Fahrenheit definition (NIST SP 811, Appendix B, from memory)
        ("5 °C", "temperature", 5.0),
        ("-4°C", "temperature", -4.0),
        ("41 °F", "temperature", 5.0),
        ("10 Ω", "resistance", 10.0),
    ],
)
def test_parse_quantity(text, kind, expected):
    assert parse_quantity(text, kind) == pytest.approx(expected)


@pytest.mark.parametrize(
    ("text", "kind", "fragment"),
    [
        ("9 V", "capacity", "is not a capacity"),
        ("9", "capacity", "has no unit"),
        ("0.1 C", "c_rate", "write a C-rate as '0.1 It'"),
        ("nan V", "voltage", "not a finite number"),
        ("inf A", "current", "not a finite number"),
        ("12 furlongs", "voltage", "unknown unit"),
        ("", "voltage", "empty"),
        ("2.4 V", "cell_voltage", "is not a voltage per cell"),
    ],
)
def test_parse_quantity_refuses(text, kind, fragment):
    with pytest.raises(ValueError, match=None) as caught:
        parse_quantity(text, kind)
    assert fragment in str(caught.value)


def test_c_rate_is_never_coulombs():
    # A C-rate written "0.1 C" must not parse at all (issue: core planner).
    with pytest.raises(ValueError):
        parse_quantity("0.1 C", "current")
    assert not math.isnan(parse_quantity("0.1 It", "c_rate"))


def test_registry_matches_pints_own_file_parser():
    # chargeplan.units defines units.txt line by line through pint's statement classes;
    # pint.UnitRegistry(filename) reads the same file with pint's full parser
    # (library: pint, UnitRegistry). Every unit, alias and prefixed unit must agree.
    from pathlib import Path

    import pint

    import chargeplan.units

    reference = pint.UnitRegistry(
        str(Path(chargeplan.units.__file__).with_name("units.txt")), cache_folder=None,
        autoconvert_offset_to_baseunit=True,
    )
    # both ways of building it: pint's statement classes, and plain define(text), which is
    # what runs where the installed pint has moved those classes
    for ours in (chargeplan.units._registry(), chargeplan.units._registry(statements=False)):
        # (pint's parser also caches the prefixed units the definitions use, e.g. kilogram)
        assert set(ours._units) <= set(reference._units)
        assert set(ours._prefixes) == set(reference._prefixes)
        # ("°C" is left out: pint reads "°" as "degree"; parse_quantity rewrites it first)
        names = [*(name for name in reference._units if "°" not in name),
                 "mV/K/cell", "mA/Ah", "ohm*Ah", "percent/day", "m**3/h", "kWh", "µA", "degF"]
        for name in names:
            mine = ours.Quantity(1.7, name).to_base_units()
            theirs = reference.Quantity(1.7, name).to_base_units()
            assert mine.magnitude == pytest.approx(theirs.magnitude, rel=1e-12), name
            assert str(mine.units) == str(theirs.units), name


@pytest.mark.parametrize(
    ("text", "expected_k"),
    [
        # SI Brochure (BIPM, 9th ed., 2.3.1): a temperature difference has the same numerical
        # value in degrees Celsius as in kelvin
        ("+8 °C", 8.0),
        ("8 degC", 8.0),
        ("-3 celsius", -3.0),
        ("5 K", 5.0),
        # a difference of 1 °F is 5/9 K (NIST SP 811, Appendix B, from memory)
        ("9 degF", 5.0),
        ("18 °F", 10.0),
    ],
)
def test_a_temperature_difference_in_degrees_is_that_many_kelvin(text, expected_k):
    # never the absolute temperature: "+8 °C" warmer than the site is not 281.15 K
    assert parse_quantity(text, "temperature_difference") == pytest.approx(expected_k)


def test_messages_quote_the_text_as_written():
    with pytest.raises(ValueError) as caught:
        parse_quantity("1 mA/°C", "current")
    assert "'1 mA/°C' is not a current" in str(caught.value)
