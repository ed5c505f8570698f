"""The independent safety check of every finished plan (DESIGN.md: **must**).

It shares no code path with the rules that made the plan: it reads the built-in
hard envelope as plain numbers and the plan's stages and interlocks, and does its
own arithmetic. A plan that fails is an
:class:`~chargeplan.errors.EnvelopeViolation` (an internal error, exit 3) and is
never output.
"""

from __future__ import annotations

import math

from chargeplan.errors import EnvelopeViolation
from chargeplan.plan import ChargePlan
from chargeplan.profiles import HardEnvelope

__all__ = ["verify", "violations"]

#: Lithium plans never contain these, whatever a profile says.
_NEVER_FOR_LITHIUM = frozenset({"equalization", "desulfation"})
#: Lithium is never charged below this cell temperature, whatever a profile says.
_LITHIUM_MIN_CHARGE_C = 0.0
#: Float rounding allowance (1 µV, 1 µA, 1 mK).
_EPS = 1e-6


def violations(plan: ChargePlan, envelope: HardEnvelope) -> list[str]:
    """Every way ``plan`` crosses ``envelope``; empty when it is safe to emit."""
    found: list[str] = []
    b = plan.battery
    lithium = envelope.family == "lithium" or b.family == "lithium"
    if b.chemistry != envelope.chemistry:
        found.append(f"plan is for {b.chemistry} but was checked against {envelope.chemistry}")
    if not (isinstance(b.cells_in_series, int) and b.cells_in_series >= 1):
        found.append(f"cells_in_series {b.cells_in_series!r} is not a positive whole number")
        return found
    if not (math.isfinite(b.capacity_ah) and b.capacity_ah > 0):
        found.append(f"capacity {b.capacity_ah!r} Ah is not a positive number")
        return found
    v_max = envelope.max_cell_voltage_v * b.cells_in_series
    i_max = envelope.max_current_c * b.capacity_ah
    if not plan.stages:
        found.append("the plan has no stages")
    for index, stage in enumerate(plan.stages):
        name = f"stage {index + 1} ({stage.kind.value})"
        if stage.kind.value in envelope.forbidden_stages:
            found.append(f"{name} is forbidden for {envelope.chemistry}")
        if lithium and stage.kind.value in _NEVER_FOR_LITHIUM:
            found.append(f"{name} is never allowed for lithium")
        for label, value in (("voltage", stage.voltage_v), ("current", stage.current_a)):
            if not (math.isfinite(value) and value > 0):
                found.append(f"{name} {label} {value!r} is not a positive number")
        if stage.voltage_v > v_max + _EPS:
            found.append(f"{name} voltage {stage.voltage_v:.4f} V is above the envelope's "
                         f"{v_max:.4f} V ({envelope.max_cell_voltage_v} V/cell)")
        if stage.current_a > i_max + _EPS:
            found.append(f"{name} current {stage.current_a:.4f} A is above the envelope's "
                         f"{i_max:.4f} A ({envelope.max_current_c} It)")
        if stage.timer_s is not None and not (math.isfinite(stage.timer_s) and stage.timer_s > 0):
            found.append(f"{name} timer {stage.timer_s!r} s is not a positive number")
        for exit_ in stage.exits:
            if not (math.isfinite(exit_.value) and exit_.value >= 0):
                found.append(f"{name} exit {exit_.kind.value} {exit_.value!r} is not a number")
            if exit_.kind.value == "voltage_reached" and exit_.value > v_max + _EPS:
                found.append(f"{name} exits at {exit_.value:.4f} V, above the envelope")
    lock = plan.interlocks
    t_low, t_high = lock.charge_temperature_min_c, lock.charge_temperature_max_c
    if t_low < envelope.charge_temperature_min_c - _EPS:
        found.append(f"interlock minimum {t_low} °C is below the envelope's "
                     f"{envelope.charge_temperature_min_c} °C")
    if t_high > envelope.charge_temperature_max_c + _EPS:
        found.append(f"interlock maximum {t_high} °C is above the envelope's "
                     f"{envelope.charge_temperature_max_c} °C")
    if lithium and t_low < _LITHIUM_MIN_CHARGE_C - _EPS:
        found.append(f"interlock minimum {t_low} °C permits charging lithium below 0 °C")
    if not t_low < t_high:
        found.append(f"interlock minimum {t_low} °C is not below the maximum {t_high} °C")
    if not (t_low - _EPS <= b.temperature_c <= t_high + _EPS):
        found.append(f"battery at {b.temperature_c} °C is outside the interlocks "
                     f"{t_low}…{t_high} °C, yet a plan was made")
    if lock.cell_voltage_max_v > envelope.max_cell_voltage_v + _EPS:
        found.append(f"interlock cell voltage {lock.cell_voltage_max_v} V is above the "
                     f"envelope's {envelope.max_cell_voltage_v} V/cell")
    if lock.battery_voltage_max_v > v_max + _EPS:
        found.append(f"interlock battery voltage {lock.battery_voltage_max_v} V is above "
                     f"{v_max:.4f} V")
    if lock.current_max_a > i_max + _EPS:
        found.append(f"interlock current {lock.current_max_a} A is above {i_max:.4f} A")
    if lithium and plan.finish != "stop":
        found.append("a lithium plan must stop at the end, not hold")
    return found


def verify(plan: ChargePlan, envelope: HardEnvelope) -> None:
    """Raise :class:`~chargeplan.errors.EnvelopeViolation` if ``plan`` crosses ``envelope``."""
    found = violations(plan, envelope)
    if found:
        raise EnvelopeViolation(found)
