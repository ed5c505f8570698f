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
