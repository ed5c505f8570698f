"""ADC codes for a plan's temperature interlocks and a lookup table, for an NTC thermistor on
a divider (see chargeplan.physics.thermistor for the equations)."""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from chargeplan.errors import InputError
from chargeplan.physics.thermistor import (
    adc_code,
    resistance_beta,
    resistance_steinhart_hart,
    temperature_from_code,
)
from chargeplan.plan import ChargePlan

__all__ = ["Divider", "ThermistorTable", "thermistor_table"]


@dataclass(frozen=True)
class Divider:
    r25_ohm: float
    beta_k: float
    bias_ohm: float
    adc_bits: int
    steinhart_hart: tuple[float, float, float] | None = None

    def resistance(self, temperature_c: np.ndarray | float) -> np.ndarray:
        if self.steinhart_hart is not None:
            return resistance_steinhart_hart(temperature_c, *self.steinhart_hart)
        return resistance_beta(temperature_c, self.r25_ohm, self.beta_k)

    def code(self, temperature_c: np.ndarray | float) -> np.ndarray:
        return adc_code(self.resistance(temperature_c), self.bias_ohm, self.adc_bits)


@dataclass
class ThermistorTable:
    divider: Divider
    interlocks: list[dict[str, object]] = field(default_factory=list)
    rows: list[dict[str, object]] = field(default_factory=list)


def _check(divider: Divider) -> None:
    for name, value in (("--r25", divider.r25_ohm), ("--bias", divider.bias_ohm),
                        ("--beta", divider.beta_k)):
        if not (math.isfinite(value) and value > 0):
            raise InputError(f"{value:g} must be above zero", field=name,
                             fix="give the datasheet value, e.g. --r25 10kohm --beta 3950")
    if not 6 <= divider.adc_bits <= 24:
        raise InputError(f"{divider.adc_bits} bits is not an ADC", field="--adc-bits",
                         fix="give 8 to 24, e.g. 12")


def thermistor_table(
    divider: Divider,
    plan: ChargePlan | None = None,
    *,
    low_c: float = -40.0,
    high_c: float = 125.0,
    step_c: float = 5.0,
) -> ThermistorTable:
    """Interlock codes rounded toward safety, and a table sorted by code.

    A warmer battery reads a lower code, so a minimum temperature's code rounds down and a
    maximum's rounds up (both toward the middle of the window); a cool-zone boundary rounds
    down and a warm-zone boundary up, so the cuts cover a little more, not less.
    """
    _check(divider)
    result = ThermistorTable(divider)
    if plan is not None:
        lock = plan.interlocks
        points = [("charge_temperature_min", lock.charge_temperature_min_c, math.floor),
                  ("charge_temperature_max", lock.charge_temperature_max_c, math.ceil)]
        if lock.cool_zone_below_c is not None:
            points.append(("cool_zone_below", lock.cool_zone_below_c, math.floor))
        if lock.warm_zone_above_c is not None:
            points.append(("warm_zone_above", lock.warm_zone_above_c, math.ceil))
        for name, t, rounding in points:
            exact = float(divider.code(t))
            result.interlocks.append({"name": name, "temperature_dC": round(t * 10),
                                      "code": int(rounding(exact)), "exact_code": exact})
    temps = np.arange(low_c, high_c + step_c / 2, step_c)
    codes = divider.code(temps)
    resistances = divider.resistance(temps)
    for t, r, c in sorted(zip(temps, resistances, codes, strict=True), key=lambda row: row[2]):
        result.rows.append({"temperature_dC": round(float(t) * 10), "resistance_ohm":
                            round(float(r), 1), "code": round(float(c))})
    return result


def round_trip_error_c(divider: Divider, temperature_c: float) -> float:
    """Temperature -> code -> temperature, the error from the code's rounding (Beta only)."""
    code = round(float(divider.code(temperature_c)))
    back = float(temperature_from_code(code, divider.bias_ohm, divider.adc_bits,
                                       divider.r25_ohm, divider.beta_k))
    return back - temperature_c
