"""Fault codes, in one place, for everything firmware-facing: the thermistor table's probe
thresholds, the C header and the setpoint document's fault list use these numbers.

``latch`` stops charging until a person resets the charger; ``pause`` stops charging and
resumes by itself once the cause has cleared by the hysteresis margin.
"""

from __future__ import annotations

from dataclasses import dataclass

__all__ = ["FAULTS", "FAULT_CODES", "VOLTAGE_TRIP_FILTER_MS", "Fault"]


@dataclass(frozen=True, slots=True)
class Fault:
    code: int
    name: str
    action: str  # "latch" or "pause"
    meaning: str


FAULTS: tuple[Fault, ...] = (
    Fault(1, "over_voltage", "latch", "battery voltage above interlocks.battery_voltage_max_mV "
          "for longer than the trip filter time"),
    Fault(2, "over_current", "latch", "current above interlocks.current_max_mA"),
    Fault(3, "temperature_out_of_window", "pause", "battery temperature outside the "
          "charge-temperature interlocks"),
    Fault(4, "probe_open", "latch", "thermistor reads colder than its table: open circuit"),
    Fault(5, "probe_short", "latch", "thermistor reads hotter than its table: short circuit"),
    Fault(6, "stage_timer", "latch", "a stage still running when its timer_s runs out"),
    Fault(7, "charge_cap", "latch", "more charge put in than the charge_above guard allows"),
    Fault(8, "current_rising", "latch", "current rising at constant voltage (thermal runaway "
          "sign)"),
    Fault(9, "temperature_rise", "latch", "battery temperature rising faster than the "
          "temperature_rise guard allows"),
    Fault(10, "no_battery", "pause", "no battery voltage at the terminals"),
    Fault(11, "cell_count", "latch", "battery voltage impossible for cells_in_series"),
)

#: name -> code, for code that only needs the numbers.
FAULT_CODES: dict[str, int] = {fault.name: fault.code for fault in FAULTS}

#: The over-voltage trip's filter time. Where the trip sits at the regulation voltage (NMC:
#: both at the envelope's 4.20 V/cell), the trip fires only when the voltage stays above it
#: this long, so regulation noise at the setpoint is not a fault while a charger regulating
#: high is. Protection-IC practice: overcharge detection delays of about 1 s (from memory);
#: charger-IC practice: over-voltage comparators with a deglitch filter (common practice).
VOLTAGE_TRIP_FILTER_MS = 1000
