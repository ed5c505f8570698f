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

__all__ = ["FULL_SCALE_NOTE", "Divider", "ThermistorTable", "thermistor_table"]


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
    probe: list[dict[str, object]] = field(default_factory=list)
    rows: list[dict[str, object]] = field(default_factory=list)

    @property
    def full_scale_code(self) -> int:
        """The code of the ADC's full scale, ``2^bits - 1`` (4095 at 12 bits)."""
        return 2**self.divider.adc_bits - 1

    def as_json(self) -> dict[str, object]:
        """The table as JSON: the equation the codes came from and only its parameters."""
        d = self.divider
        if d.steinhart_hart is not None:
            a, b, c = d.steinhart_hart
            model: dict[str, object] = {"equation": "steinhart-hart", "a": a, "b": b, "c": c}
        else:
            model = {"equation": "beta", "r25_ohm": d.r25_ohm, "beta_K": d.beta_k}
        return {
            **model, "bias_ohm": d.bias_ohm, "adc_bits": d.adc_bits,
            "full_scale_code": self.full_scale_code, "code": FULL_SCALE_NOTE,
            "interlocks": [{k: v for k, v in row.items() if k != "exact_code"}
                           for row in self.interlocks],
            "probe": self.probe, "table": self.rows,
        }


#: The resistances of NTC thermistors and their bias resistors as made (R25 about 100 ohm
#: to 1 Mohm; from memory); a value outside is a unit slip ('10 mohm' for '10 kohm').
NTC_RESISTANCE_OHM = (100.0, 1e6)

#: How a code relates to the divider (printed with every table).
FULL_SCALE_NOTE = ("code = R / (R + bias) x (2^bits - 1): the ADC's reference is the divider's "
                   "supply and full scale is 2^bits - 1 (4095 at 12 bits)")


def _check(divider: Divider) -> None:
    for name, value in (("--r25", divider.r25_ohm), ("--bias", divider.bias_ohm),
                        ("--beta", divider.beta_k)):
        if not (math.isfinite(value) and value > 0):
            raise InputError(f"{value:g} must be above zero", field=name,
                             fix="give the datasheet value, e.g. --r25 10kohm --beta 3950")
    for name, value in (("--r25", divider.r25_ohm), ("--bias", divider.bias_ohm)):
        low, high = NTC_RESISTANCE_OHM
        if not low <= value <= high:
            raise InputError(f"{value:g} ohm is outside the {low:g} ohm to {high / 1e6:g} Mohm "
                             "of an NTC divider", field=name,
                             fix="give the datasheet value in ohms, e.g. '10 kohm' "
                                 "(kilohm: lower-case k; 'mohm' is milliohm)")
    if not 6 <= divider.adc_bits <= 24:
        raise InputError(f"{divider.adc_bits} bits is not an ADC", field="--adc-bits",
                         fix="give 6 to 24, e.g. 12")
    for name, value in zip(("--a", "--b", "--c"), divider.steinhart_hart or (), strict=False):
        if not math.isfinite(value):
            raise InputError(f"{value:g} is not a finite number", field=name,
                             fix="give the datasheet's Steinhart-Hart coefficients")


def _check_monotonic(divider: Divider, low_c: float, high_c: float) -> None:
    """An NTC's resistance falls as it warms: coefficients that give anything else (or no
    finite, positive resistance) would blind the interlocks."""
    temps = np.linspace(low_c, high_c, max(2, int((high_c - low_c) * 2) + 1))
    with np.errstate(all="ignore"):
        r = divider.resistance(temps)
    if not (np.all(np.isfinite(r)) and np.all(r > 0) and np.all(np.diff(r) < 0)):
        field_name = "--a" if divider.steinhart_hart is not None else "--beta"
        raise InputError(
            f"these coefficients do not give a resistance that falls steadily from "
            f"{low_c:g} to {high_c:g} degC, as an NTC thermistor's does",
            field=field_name, fix="give the datasheet's values (e.g. --a 1.009e-3 --b 2.378e-4 "
                                  "--c 2.019e-7 for a common 10 kohm NTC)")


def _interlock_points(plan: ChargePlan) -> list[tuple[str, int, object]]:
    """The document's own rounded limits (dC), each with its rounding toward safety."""
    from chargeplan.firmware.setpoints import encode_interlocks

    lock = encode_interlocks(plan.interlocks)
    points = [("charge_temperature_min", lock["charge_temperature_min_dC"], math.floor),
              ("charge_temperature_max", lock["charge_temperature_max_dC"], math.ceil)]
    if lock["cool_zone"]:
        points.append(("cool_zone_below", lock["cool_zone"]["below_dC"], math.floor))
    if lock["warm_zone"]:
        points.append(("warm_zone_above", lock["warm_zone"]["above_dC"], math.ceil))
    return points


def _probe_thresholds(divider: Divider, low_c: float, high_c: float) -> list[dict[str, object]]:
    """Codes beyond the table's coldest and hottest rows: an open or a shorted probe."""
    from chargeplan.firmware.faults import FAULT_CODES

    cold, hot = float(divider.code(low_c)), float(divider.code(high_c))
    return [
        {"name": "probe_open", "fault_code": FAULT_CODES["probe_open"],
         "code_above": math.ceil(cold), "meaning": f"colder than {low_c:g} degC: open circuit"},
        {"name": "probe_short", "fault_code": FAULT_CODES["probe_short"],
         "code_below": math.floor(hot), "meaning": f"hotter than {high_c:g} degC: short circuit"},
    ]


def _check_codes(table: ThermistorTable) -> None:
    """Codes firmware can act on: the charge window's limits apart (a warmer battery reads
    a lower code, so the minimum's code lies above the maximum's), every interlock between
    the probe's open and short thresholds, and both thresholds reachable inside the ADC's
    0 to full scale. Else the 0 degC lithium interlock, or the probe checks, never trip."""
    full = table.full_scale_code
    fix = "choose a bias resistor near the thermistor's resistance inside the window (e.g. " \
          "--bias 10kohm for a 10 kohm NTC), or an ADC with more bits"
    opened = next(int(p["code_above"]) for p in table.probe if p["name"] == "probe_open")
    shorted = next(int(p["code_below"]) for p in table.probe if p["name"] == "probe_short")
    if opened >= full:
        raise InputError(f"the open-probe threshold (code above {opened}) cannot trip: full "
                         f"scale is {full}", field="--bias", fix=fix)
    if shorted <= 0:
        raise InputError(f"the shorted-probe threshold (code below {shorted}) cannot trip: "
                         "the lowest code is 0", field="--bias", fix=fix)
    codes = {str(row["name"]): int(row["code"]) for row in table.interlocks}  # type: ignore[call-overload]
    low, high = codes.get("charge_temperature_min"), codes.get("charge_temperature_max")
    if low is not None and high is not None and not shorted < high < low < opened:
        raise InputError(
            f"the divider's codes cannot tell the charge window apart: minimum code {low}, "
            f"maximum code {high}, probe short below {shorted}, open above {opened} (each "
            "must lie above the next)", field="--bias", fix=fix)
    for name in ("cool_zone_below", "warm_zone_above"):
        code = codes.get(name)
        if code is not None and low is not None and high is not None and not (
                high <= code <= low):  # a zone may start at the window's edge
            raise InputError(f"the divider's code for {name} ({code}) does not lie inside "
                             f"the charge window's codes ({high} to {low})", field="--bias",
                             fix=fix)


def thermistor_table(
    divider: Divider,
    plan: ChargePlan | None = None,
    *,
    low_c: float = -40.0,
    high_c: float = 125.0,
    step_c: float = 5.0,
) -> ThermistorTable:
    """Interlock codes rounded toward safety, the probe's open and short thresholds, and a
    table sorted by code.

    The interlock codes are computed from the setpoint document's own rounded limits. A
    warmer battery reads a lower code, so a minimum temperature's code rounds down and a
    maximum's rounds up (both toward the middle of the window); a cool-zone boundary rounds
    down and a warm-zone boundary up, so the cuts cover a little more, not less.
    """
    _check(divider)
    _check_monotonic(divider, low_c, high_c)
    result = ThermistorTable(divider)
    if plan is not None:
        for name, t_dc, rounding in _interlock_points(plan):
            exact = float(divider.code(t_dc / 10))
            result.interlocks.append({"name": name, "temperature_dC": t_dc,
                                      "code": int(rounding(exact)), "exact_code": exact})
    result.probe = _probe_thresholds(divider, low_c, high_c)
    _check_codes(result)
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
