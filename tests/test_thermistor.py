"""Thermistor divider codes against the Beta and Steinhart-Hart equations."""

from __future__ import annotations

import math

import pytest

from chargeplan.firmware.thermistor import Divider, round_trip_error_c, thermistor_table
from chargeplan.physics.thermistor import (
    adc_code,
    resistance_beta,
    resistance_steinhart_hart,
    temperature_steinhart_hart,
)

from .conftest import battery, plan_of

NTC = Divider(r25_ohm=10_000, beta_k=3950, bias_ohm=10_000, adc_bits=12)


def test_beta_equation_worked_values():
    # Beta equation R = R25 exp(B (1/T - 1/T25)): at 25 degC exactly R25; at 0 degC
    # 10 kohm x exp(3950 x (1/273.15 - 1/298.15)) = 33.62 kohm (the formula's own value)
    assert resistance_beta(25.0, 10_000, 3950) == pytest.approx(10_000)
    assert resistance_beta(0.0, 10_000, 3950) == pytest.approx(
        10_000 * math.exp(3950 * (1 / 273.15 - 1 / 298.15)))
    assert resistance_beta(0.0, 10_000, 3950) == pytest.approx(33_620, rel=1e-3)
    # the divider at R = bias is half scale
    assert adc_code(10_000, 10_000, 12) == pytest.approx(4095 / 2)


def test_steinhart_hart_round_trip():
    # Steinhart and Hart (1968): 1/T = A + B ln R + C (ln R)^3; coefficients of a common
    # 10 kohm NTC (from memory)
    a, b, c = 1.009249522e-03, 2.378405444e-04, 2.019202697e-07
    for t in (-20.0, 0.0, 25.0, 60.0):
        r = resistance_steinhart_hart(t, a, b, c)
        assert temperature_steinhart_hart(r, a, b, c) == pytest.approx(t, abs=1e-9)


def test_code_round_trip_within_half_a_code():
    for t in range(-20, 61, 5):
        step = abs(float(NTC.code(t + 0.5)) - float(NTC.code(t - 0.5)))  # codes per K
        assert abs(round_trip_error_c(NTC, t)) <= 0.5 / step + 1e-9


def test_interlock_codes_round_toward_safety():
    # a warmer battery reads a lower code: the minimum's code rounds down (a little warmer),
    # the maximum's up (a little cooler); BU-410 Table 1: LFP 0 to 45 degC
    plan = plan_of(battery(battery={"chemistry": "lifepo4"}, state={"rest_voltage": "13.1 V"}))
    table = thermistor_table(NTC, plan)
    codes = {row["name"]: row for row in table.interlocks}
    low, high = codes["charge_temperature_min"], codes["charge_temperature_max"]
    assert low["code"] <= low["exact_code"] and high["code"] >= high["exact_code"]
    assert low["temperature_dC"] == 0 and high["temperature_dC"] == 450
    assert [r["code"] for r in table.rows] == sorted(r["code"] for r in table.rows)
