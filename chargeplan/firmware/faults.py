"""The fault table of a charge program: one code per fault, and what the charger does.

One table for every firmware-facing output (the setpoint document, the image, the C
header, the thermistor's open and short thresholds, the reference implementation).
``latch``: stop charging until a person resets the charger. ``pause``: stop charging and
resume by itself once the cause has cleared by the document's ``hysteresis``.

Codes are small positive integers; 0 means "no fault". A code, once given, is never
reused for another fault.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal

__all__ = ["FAULTS", "FAULT_CODES", "LATCH_ONLY", "VOLTAGE_TRIP_FILTER_MS", "Fault", "fault_code"]

Action = Literal["latch", "pause"]


@dataclass(frozen=True, slots=True)
class Fault:
    code: int
    name: str
    action: Action
    watches: str  # the document field (or input) the fault is judged on
    meaning: str


FAULTS: tuple[Fault, ...] = (
    Fault(1, "over_voltage", "latch", "interlocks.battery_voltage_max_mV",
          "battery voltage above the interlock for longer than hysteresis.voltage_filter_s"),
    Fault(2, "over_current", "latch", "interlocks.current_max_mA",
          "charge current above the interlock for longer than hysteresis.voltage_filter_s"),
    Fault(3, "temperature_low", "pause", "interlocks.charge_temperature_min_dC",
          "battery colder than the charge window; resumes at the minimum plus "
          "hysteresis.temperature_margin_dK"),
    Fault(4, "temperature_high", "pause", "interlocks.charge_temperature_max_dC",
          "battery warmer than the charge window; resumes at the maximum less "
          "hysteresis.temperature_margin_dK"),
    Fault(5, "probe_open", "latch", "probe",
          "the temperature probe reads open (disconnected or broken)"),
    Fault(6, "probe_short", "latch", "probe", "the temperature probe reads shorted"),
    Fault(7, "stage_timer", "latch", "stages[].timer_s",
          "a stage (or the pre-charge) ran past its safety timer"),
    Fault(8, "charge_above", "latch", "stages[].exits[charge_above]",
          "the charge put in since the charge began is above the Ah cap"),
    Fault(9, "current_rising", "latch", "stages[].exits[current_rising]",
          "at constant voltage the current rose instead of falling (thermal runaway sign)"),
    Fault(10, "temperature_rise", "latch", "stages[].exits[temperature_rise]",
          "the battery warmed by more than the stage allows"),
    Fault(11, "no_battery", "pause", "faults[no_battery].below_voltage_mV",
          "no battery (or nothing chargeable) at the terminals; waits for one"),
    Fault(12, "wrong_cell_count", "latch", "faults[wrong_cell_count].above_voltage_mV",
          "the battery at connection reads higher than this many cells can rest at: more "
          "cells, or another chemistry"),
)

#: name -> code
FAULT_CODES = {fault.name: fault.code for fault in FAULTS}

#: Faults a document may never set to ``pause``: each means something is wrong with the
#: battery, the charger or the wiring, and a person must look before charging goes on.
LATCH_ONLY = frozenset(fault.name for fault in FAULTS if fault.action == "latch")


def fault_code(name: str) -> int:
    """The code of the fault ``name`` (KeyError for an unknown name)."""
    return FAULT_CODES[name]


#: The over-voltage and over-current trips' filter time. Where the trip sits at the
#: regulation voltage (NMC: both at the envelope's 4.20 V/cell), the trip fires only when the
#: voltage stays above it this long, so regulation noise at the setpoint is not a fault while
#: a charger regulating high is. Protection-IC practice: overcharge detection delays of about
#: 1 s (from memory); charger-IC practice: over-voltage comparators with a deglitch filter
#: (common practice). The setpoint document's ``hysteresis.voltage_filter_s`` is this value.
VOLTAGE_TRIP_FILTER_MS = 1000
