"""The independent safety check of every finished plan (DEVELOPERS.md, "Layering").

It shares no code path with the rules that made the plan: it reads the built-in
hard envelope as plain numbers and the plan's stages and interlocks, and does its
own arithmetic. A plan that fails is an
:class:`~chargeplan.errors.EnvelopeViolation` (an internal error, exit 3) and is
never output.
"""

from __future__ import annotations

import math
from typing import TYPE_CHECKING

from chargeplan.errors import EnvelopeViolation
from chargeplan.plan import ChargePlan
from chargeplan.profiles import HardEnvelope

if TYPE_CHECKING:
    from chargeplan.model.battery import BatteryFile

__all__ = ["verify", "violations"]

#: Lithium plans never contain these, whatever a profile says.
_NEVER_FOR_LITHIUM = frozenset({"equalization", "desulfation"})
#: Lithium is never charged below this cell temperature, whatever a profile says.
_LITHIUM_MIN_CHARGE_C = 0.0
#: The smallest current a setpoint file carries (1 mA); below it a limit would read as 0.
_LEAST_CURRENT_A = 0.001
#: Float rounding allowance (1 µV, 1 µA, 1 mK).
_EPS = 1e-6


def violations(
    plan: ChargePlan, envelope: HardEnvelope, battery_file: BatteryFile | None = None
) -> list[str]:
    """Every way ``plan`` crosses ``envelope``; empty when it is safe to emit.

    With ``battery_file``, also the limits the input itself sets: the maker's maximum
    charge current and the charger channel's voltage and current ranges.
    """
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
    v_max = envelope.cell_voltage_max_v * b.cells_in_series
    i_max = envelope.max_current_it * b.capacity_ah
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
                         f"{v_max:.4f} V ({envelope.cell_voltage_max_v} V/cell)")
        if stage.current_a > i_max + _EPS:
            found.append(f"{name} current {stage.current_a:.4f} A is above the envelope's "
                         f"{i_max:.4f} A ({envelope.max_current_it} It)")
        if stage.timer_s is not None and not (math.isfinite(stage.timer_s) and stage.timer_s > 0):
            found.append(f"{name} timer {stage.timer_s!r} s is not a positive number")
        for exit_ in stage.exits:
            if not (math.isfinite(exit_.value) and exit_.value >= 0):
                found.append(f"{name} exit {exit_.kind.value} {exit_.value!r} is not a number")
            if exit_.kind.value == "voltage_reached" and exit_.value > v_max + _EPS:
                found.append(f"{name} exits at {exit_.value:.4f} V, above the envelope")
    held = [s for s in plan.stages if s.kind.value in ("float", "storage_hold")]
    charged = [s for s in plan.stages if s.kind.value in ("bulk", "absorption")]
    if held and charged and not lithium:
        top = max(s.voltage_v for s in charged)
        for stage in held:
            if stage.voltage_v >= top - _EPS:
                found.append(f"{stage.kind.value} at {stage.voltage_v:.4f} V is not below the "
                             f"charge voltage {top:.4f} V, yet is held indefinitely")
    for index, stage in enumerate(plan.stages):
        if stage.current_a < _LEAST_CURRENT_A - _EPS:
            found.append(f"stage {index + 1} ({stage.kind.value}) current {stage.current_a!r} A "
                         "is below 1 mA, which a setpoint file cannot carry")
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
    if lock.cell_voltage_max_v > envelope.cell_voltage_max_v + _EPS:
        found.append(f"interlock cell voltage {lock.cell_voltage_max_v} V is above the "
                     f"envelope's {envelope.cell_voltage_max_v} V/cell")
    if lock.battery_voltage_max_v > v_max + _EPS:
        found.append(f"interlock battery voltage {lock.battery_voltage_max_v} V is above "
                     f"{v_max:.4f} V")
    if lock.current_max_a > i_max + _EPS:
        found.append(f"interlock current {lock.current_max_a} A is above {i_max:.4f} A")
    if lithium and plan.finish != "stop":
        found.append("a lithium plan must stop at the end, not hold")
    for stage in plan.stages:
        if stage.current_a > lock.current_max_a + _EPS:
            found.append(f"{stage.kind.value} current {stage.current_a:.4f} A is above the "
                         f"interlock's {lock.current_max_a:.4f} A")
    t = b.temperature_c
    if envelope.cool_zone_below_c is not None and envelope.cool_zone_current_it is not None:
        cool_a = envelope.cool_zone_current_it * b.capacity_ah
        if t < envelope.cool_zone_below_c:
            for stage in plan.stages:
                if stage.current_a > cool_a + _EPS:
                    found.append(f"{stage.kind.value} current {stage.current_a:.4f} A is above "
                                 f"the {cool_a:.4f} A allowed below "
                                 f"{envelope.cool_zone_below_c} °C")
        if lock.cool_zone_current_max_a is None or lock.cool_zone_current_max_a > cool_a + _EPS:
            found.append("the interlocks lack the cool-zone current limit")
    if envelope.warm_zone_above_c is not None and envelope.warm_zone_cell_v is not None:
        warm_v = envelope.warm_zone_cell_v * b.cells_in_series
        if t > envelope.warm_zone_above_c:
            for stage in plan.stages:
                if stage.voltage_v > warm_v + _EPS:
                    found.append(f"{stage.kind.value} voltage {stage.voltage_v:.4f} V is above "
                                 f"the {warm_v:.4f} V allowed above "
                                 f"{envelope.warm_zone_above_c} °C")
        if (lock.warm_zone_cell_voltage_max_v is None
                or lock.warm_zone_cell_voltage_max_v > envelope.warm_zone_cell_v + _EPS):
            found.append("the interlocks lack the warm-zone voltage limit")
    if battery_file is not None:
        found += _input_limits(plan, battery_file)
    return found


def _input_limits(plan: ChargePlan, battery_file: BatteryFile) -> list[str]:
    """The limits the input sets, read from the input itself (not from the rules' settings)."""
    found: list[str] = []
    maker = battery_file.battery.overrides.max_charge_current
    if maker is not None:
        maker_a = maker.amps(plan.battery.capacity_ah)
        for stage in plan.stages:
            if stage.current_a > maker_a + _EPS:
                found.append(f"{stage.kind.value} current {stage.current_a:.4f} A is above the "
                             f"maker's maximum {maker_a:.4f} A")
    channel = battery_file.charger
    if channel is not None:
        for stage in plan.stages:
            if stage.current_a > channel.max_current_a + _EPS:
                found.append(f"{stage.kind.value} current {stage.current_a:.4f} A is above the "
                             f"channel's {channel.max_current_a} A")
            if stage.current_a < channel.min_current_a - _EPS:
                found.append(f"{stage.kind.value} current {stage.current_a:.4f} A is below the "
                             f"channel's smallest {channel.min_current_a} A")
            if stage.voltage_v > channel.max_voltage_v + _EPS:
                found.append(f"{stage.kind.value} voltage {stage.voltage_v:.4f} V is above the "
                             f"channel's {channel.max_voltage_v} V")
    return found


def verify(
    plan: ChargePlan, envelope: HardEnvelope, battery_file: BatteryFile | None = None
) -> None:
    """Raise :class:`~chargeplan.errors.EnvelopeViolation` if ``plan`` crosses ``envelope``
    (or, with ``battery_file``, the maker's or the channel's limits)."""
    found = violations(plan, envelope, battery_file)
    if found:
        raise EnvelopeViolation(found)
