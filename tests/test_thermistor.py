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


def test_interlock_codes_come_from_the_documents_rounded_limits():
    # the document rounds the minimum up to 0.1 degC (toward safety); the code must be the
    # code of that rounded value, not of the plan's unrounded float
    from chargeplan.api import program_file
    from chargeplan.demo import example_paths
    from chargeplan.firmware.setpoints import encode

    plan = program_file(example_paths()[0], table_step_c=None)
    lock = encode(plan)["interlocks"]
    table = thermistor_table(NTC, plan)
    codes = {row["name"]: row for row in table.interlocks}
    low = codes["charge_temperature_min"]
    assert low["temperature_dC"] == lock["charge_temperature_min_dC"]
    # Beta equation written out here: R = R25 exp(B (1/T - 1/T25)), code = R/(R+bias) x 4095
    t = lock["charge_temperature_min_dC"] / 10 + 273.15
    r = 10_000 * math.exp(3950 * (1 / t - 1 / 298.15))
    assert low["code"] == math.floor(r / (r + 10_000) * 4095)
    assert codes["cool_zone_below"]["temperature_dC"] == lock["cool_zone"]["below_dC"]


def test_probe_open_and_short_thresholds_carry_the_fault_codes():
    from chargeplan.firmware.faults import FAULT_CODES

    table = thermistor_table(NTC, low_c=-40.0, high_c=125.0)
    probe = {row["name"]: row for row in table.probe}
    # Beta equation at -40 and 125 degC (the table's ends), full scale 2^12 - 1 = 4095
    r_cold = 10_000 * math.exp(3950 * (1 / 233.15 - 1 / 298.15))
    r_hot = 10_000 * math.exp(3950 * (1 / 398.15 - 1 / 298.15))
    assert probe["probe_open"]["code_above"] == math.ceil(r_cold / (r_cold + 10_000) * 4095)
    assert probe["probe_short"]["code_below"] == math.floor(r_hot / (r_hot + 10_000) * 4095)
    assert probe["probe_open"]["fault_code"] == FAULT_CODES["probe_open"]
    assert probe["probe_short"]["fault_code"] == FAULT_CODES["probe_short"]
    assert table.full_scale_code == 4095
    # every row lies between the thresholds: a real temperature is never read as a fault
    assert all(probe["probe_short"]["code_below"] <= row["code"]
               <= probe["probe_open"]["code_above"] for row in table.rows)


def test_fault_codes_are_unique_and_named_once():
    from chargeplan.firmware.faults import FAULT_CODES, FAULTS

    assert len({f.code for f in FAULTS}) == len(FAULTS) == len(FAULT_CODES)
    assert {f.action for f in FAULTS} <= {"latch", "pause"}


@pytest.mark.parametrize("coefficients", [(-1.0, -1.0, -1.0), (0.0, 0.0, 0.0),
                                          (float("nan"), 2.378e-4, 2.019e-7),
                                          (1.009e-3, -2.378e-4, 2.019e-7)])
def test_coefficients_that_are_not_an_ntc_are_refused(coefficients):
    from chargeplan.errors import InputError

    divider = Divider(10_000, 3950, 10_000, 12, steinhart_hart=coefficients)
    with pytest.raises(InputError):
        thermistor_table(divider)


def test_steinhart_hart_with_c_zero_is_the_linear_form():
    # 1/T = A + B ln R: with C = 0 the resistance is exp((1/T - A) / B)
    a, b = 1.129e-3, 2.341e-4
    r = resistance_steinhart_hart(25.0, a, b, 0.0)
    assert float(r) == pytest.approx(math.exp((1 / 298.15 - a) / b))
    assert temperature_steinhart_hart(r, a, b, 0.0) == pytest.approx(25.0)


def test_thermistor_command_json_and_refusals():
    import json

    from typer.testing import CliRunner

    from chargeplan.cli import app

    runner = CliRunner()
    base = ["thermistor", "--r25", "10kohm", "--beta", "3950", "--bias", "10kohm"]
    sh = ["--a", "1.009249522e-03", "--b", "2.378405444e-04", "--c", "2.019202697e-07"]
    result = runner.invoke(app, [*base, *sh, "--json"])
    assert result.exit_code == 0, result.stderr
    out = json.loads(result.stdout)
    assert out["equation"] == "steinhart-hart" and "beta_K" not in out and "r25_ohm" not in out
    assert out["full_scale_code"] == 4095 and "2^bits - 1" in out["code"]
    plain = json.loads(runner.invoke(app, [*base, "--json"]).stdout)
    assert plain["equation"] == "beta" and plain["beta_K"] == 3950
    for bad in (["--a", "-1", "--b", "-1", "--c", "-1"], ["--a", "0", "--b", "0", "--c", "0"]):
        result = runner.invoke(app, [*base, *bad])
        assert result.exit_code == 2, result.stderr
        assert "falls steadily" in result.stderr and "Traceback" not in result.stderr
    text = runner.invoke(app, base).stdout
    assert "full scale 4095" in text and "probe_open" in text


@pytest.mark.parametrize(("r25", "bias", "field"), [
    (0.01, 10_000, "--r25"),       # '10 mohm' is 10 milliohm, not 10 kohm
    (10_000, 0.01, "--bias"),
    (10e6, 10_000, "--r25"),       # 10 Mohm: no NTC of a charger's probe
    (10_000, 50.0, "--bias"),
])
def test_a_resistance_outside_the_ntc_range_is_refused(r25, bias, field):
    # NTC thermistors are made from about 100 ohm to 1 Mohm at 25 degC (from memory); a
    # value outside is a unit slip, and its codes blind the interlocks
    from chargeplan.errors import InputError

    with pytest.raises(InputError) as caught:
        thermistor_table(Divider(r25_ohm=r25, beta_k=3950, bias_ohm=bias, adc_bits=12))
    assert caught.value.field == field and "10 kohm" in str(caught.value)


def test_a_divider_whose_codes_cannot_tell_the_window_apart_is_refused():
    # inside the range, but a 1 Mohm bias on a 100 ohm NTC: at 125 degC the divider reads
    # R / (R + bias) x 4095 < 1 (the divider formula), so a short can never trip; and a 6-bit
    # ADC with a 1 Mohm bias on a 10 kohm NTC puts 0 and 45 degC within a code or two
    from chargeplan.errors import InputError

    plan = plan_of(battery(battery={"chemistry": "lifepo4", "nominal_voltage": "12.8 V"}))
    with pytest.raises(InputError, match="cannot trip"):
        thermistor_table(Divider(r25_ohm=100, beta_k=3950, bias_ohm=1e6, adc_bits=12), plan)
    with pytest.raises(InputError, match="cannot"):
        thermistor_table(Divider(r25_ohm=10_000, beta_k=3950, bias_ohm=1e6, adc_bits=6), plan)
    good = thermistor_table(NTC, plan)  # the common 10 kohm / 10 kohm divider is kept
    codes = {row["name"]: row["code"] for row in good.interlocks}
    assert codes["charge_temperature_min"] > codes["charge_temperature_max"]


def test_cli_refuses_milliohms_and_its_example_says_kohm(tmp_path):
    from typer.testing import CliRunner

    from chargeplan.cli import app

    runner = CliRunner()
    for args in (["--r25", "10 mohm", "--bias", "10kohm"], ["--r25", "10kohm", "--bias",
                                                            "10 mohm"]):
        result = runner.invoke(app, ["thermistor", *args, "--beta", "3950"])
        assert result.exit_code == 2 and "Traceback" not in result.output
        assert "10 kohm" in result.stderr
    result = runner.invoke(app, ["thermistor", "--r25", "10 Kohm", "--bias", "10kohm",
                                 "--beta", "3950"])
    assert result.exit_code == 2 and "'10 kohm'" in result.stderr
    assert "mohm'" not in result.stderr


def test_window_codes_that_collapse_are_refused_even_when_the_probe_checks_can_trip():
    # an NTC's code falls as it warms (the divider formula), so the window's minimum must
    # read a higher code than its maximum; equal codes cannot tell 0 degC from 45 degC
    from chargeplan.errors import InputError
    from chargeplan.firmware.thermistor import ThermistorTable, _check_codes

    table = ThermistorTable(NTC, interlocks=[
        {"name": "charge_temperature_min", "temperature_dC": 0, "code": 1500},
        {"name": "charge_temperature_max", "temperature_dC": 450, "code": 1500}],
        probe=[{"name": "probe_open", "code_above": 3996},
               {"name": "probe_short", "code_below": 27}])
    with pytest.raises(InputError, match="cannot tell the charge window apart"):
        _check_codes(table)
    table.interlocks[0]["code"] = 3156
    _check_codes(table)  # apart, and inside the probe thresholds: kept
