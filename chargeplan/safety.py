"""The independent safety check of every finished plan (DEVELOPERS.md, "Layering").

It shares no code path with the rules that made the plan: it reads the built-in
hard envelope as plain numbers, its own table of published ceilings
(:data:`CEILINGS`, written from the sources, not read from ``profiles/``), and the
plan's stages and interlocks, and does its own arithmetic. A plan that fails is an
:class:`~chargeplan.errors.EnvelopeViolation` (an internal error, exit 3) and is
never output. The bundled profiles' envelopes are held inside :data:`CEILINGS` too
(:func:`envelope_problems`, called when an envelope is read).

The check is a tuple of small named checks (:data:`CHECKS`), each yielding what it finds.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterator
from dataclasses import dataclass
from typing import TYPE_CHECKING

from chargeplan.errors import EnvelopeViolation
from chargeplan.plan import ChargePlan, Stage

if TYPE_CHECKING:
    from chargeplan.model.battery import BatteryFile
    from chargeplan.profiles import HardEnvelope

__all__ = ["CEILINGS", "CHECKS", "Ceiling", "envelope_problems", "verify", "violations"]


@dataclass(frozen=True, slots=True)
class Ceiling:
    """A chemistry's published hard ceilings: nothing planned for it may cross them."""

    cell_voltage_max_v: float
    max_current_it: float
    charge_temperature_min_c: float
    charge_temperature_max_c: float
    never: frozenset[str]  # stages it never gets
    source: str
    #: lead-acid: the largest Ah cap a charge may carry, in multiples of C (None: lithium,
    #: which needs none); see :data:`CHARGE_CAP_SOURCE`
    charge_cap_c: float | None = None


_LITHIUM_NEVER = frozenset({"equalization", "desulfation"})

#: Why a lead-acid charge's Ah cap is at most 1.65 C (flooded) or 1.49 C (VRLA).
CHARGE_CAP_SOURCE = (
    "common practice (reasoning): a flooded battery returns 1.10-1.30 Ah per Ah taken out, a "
    "VRLA one 1.02-1.15 (general lead-acid references); a charge of a flat battery, plus "
    "10 % for an uncertain reading, never needs more than 1.5 x 1.1 = 1.65 C (flooded) or "
    "1.35 x 1.1 = 1.49 C (VRLA) before its cap must stop it")
#: The largest temperature rise (K) a lead-acid charge stage may run through before it
#: faults (common practice: a charge warms a battery a few kelvin; 10 K means heat).
TEMPERATURE_RISE_MAX_K = 10.0
#: The largest current rise at constant voltage (in It) before absorption faults (common
#: practice; BU-403: a healthy battery's current falls at constant voltage, so a rise of a
#: few per cent of C is thermal runaway).
CURRENT_RISE_MAX_IT = 0.05

#: Published ceilings per built-in chemistry, each with its source.
CEILINGS: dict[str, Ceiling] = {
    "flooded": Ceiling(
        2.67, 0.30, -20.0, 50.0, frozenset(),
        "2.67 V/cell: the highest equalization voltage across sources (Battery University, "
        "equalizing charge, 2.45-2.67 V/cell); 0.30 It: BU-403 Charging Lead Acid, 0.10-0.30 C; "
        "-20 to 50 degC: BU-410 Table 1", charge_cap_c=1.65),
    "agm": Ceiling(
        2.55, 0.50, -20.0, 50.0, frozenset(),
        "from memory: VRLA maker limits with cold compensation reach about 2.50-2.55 V/cell, "
        "makers allow 0.3-0.5 C; -20 to 50 degC: BU-410 Table 1", charge_cap_c=1.49),
    "gel": Ceiling(
        2.50, 0.30, -20.0, 50.0, _LITHIUM_NEVER,
        "from memory: gel maker limits stay below about 2.5 V/cell and 0.3 C; -20 to 50 degC: "
        "BU-410 Table 1; common practice: gel is never equalized or desulfated",
        charge_cap_c=1.49),
    "lifepo4": Ceiling(
        3.65, 1.0, 0.0, 45.0, _LITHIUM_NEVER,
        "cell handling guidelines (common practice): LFP absolute maximum 3.65 V/cell, at most "
        "1 C; BU-410 Table 1: lithium-ion 0 to 45 degC, never below 0 degC; common practice: "
        "no lead-acid overcharge stages"),
    "nmc": Ceiling(
        4.20, 1.0, 0.0, 45.0, _LITHIUM_NEVER | {"float"},
        "BU-808: 4.20 V/cell; BU-409 Charging Lithium-ion: 0.5-1 C; BU-410 Table 1: 0 to 45 "
        "degC; BU-702 and BU-808a: no float or trickle for Li-ion"),
}
#: The longest a stage may hold lithium at its voltage (BU-409: no float, the constant-voltage
#: stage ends on the tail current or a set time; 4 h: charger ICs time it out after a few
#: hours, common practice, from memory).
LITHIUM_HELD_MAX_S = 4 * 3600.0
_LITHIUM_HELD = frozenset({"absorption", "storage_hold"})
#: The longest a lead-acid battery may dwell at a voltage above float (BU-403 Charging Lead
#: Acid: not more than 48 h at the topping voltage).
LEAD_DWELL_MAX_S = 48 * 3600.0
_LEAD_DWELL = frozenset({"absorption", "equalization", "desulfation"})
#: The smallest current a setpoint file carries (1 mA); below it a limit would read as 0.
_LEAST_CURRENT_A = 0.001
#: Float rounding allowance (1 µV, 1 µA, 1 mK).
_EPS = 1e-6

Check = Callable[[ChargePlan, "HardEnvelope"], Iterator[str]]


def _lithium(plan: ChargePlan, env: HardEnvelope) -> bool:
    return env.family == "lithium" or plan.battery.family == "lithium"


def _name(index: int, stage: Stage) -> str:
    return f"stage {index + 1} ({stage.kind.value})"


def _identity(plan: ChargePlan, env: HardEnvelope) -> Iterator[str]:
    b = plan.battery
    if b.chemistry != env.chemistry:
        yield f"plan is for {b.chemistry} but was checked against {env.chemistry}"
    if not plan.stages:
        yield "the plan has no stages"


def _stage_kinds(plan: ChargePlan, env: HardEnvelope) -> Iterator[str]:
    """No stage the envelope forbids; never equalization or desulfation for lithium."""
    for index, stage in enumerate(plan.stages):
        if stage.kind.value in env.forbidden_stages:
            yield f"{_name(index, stage)} is forbidden for {env.chemistry}"
        if _lithium(plan, env) and stage.kind.value in _LITHIUM_NEVER:
            yield f"{_name(index, stage)} is never allowed for lithium"


def _stage_numbers(plan: ChargePlan, env: HardEnvelope) -> Iterator[str]:
    """Voltages, currents, timers and exits are numbers, and currents a file can carry."""
    for index, stage in enumerate(plan.stages):
        name = _name(index, stage)
        for label, value in (("voltage", stage.voltage_v), ("current", stage.current_a)):
            if not (math.isfinite(value) and value > 0):
                yield f"{name} {label} {value!r} is not a positive number"
        if stage.timer_s is not None and not (math.isfinite(stage.timer_s) and stage.timer_s > 0):
            yield f"{name} timer {stage.timer_s!r} s is not a positive number"
        for exit_ in stage.exits:
            if not (math.isfinite(exit_.value) and exit_.value >= 0):
                yield f"{name} exit {exit_.kind.value} {exit_.value!r} is not a number"
        if stage.current_a < _LEAST_CURRENT_A - _EPS:
            yield (f"{name} current {stage.current_a!r} A is below 1 mA, which a setpoint file "
                   "cannot carry")


def _stage_envelope(plan: ChargePlan, env: HardEnvelope) -> Iterator[str]:
    """Every stage and voltage exit stays inside the envelope's voltage and current."""
    b = plan.battery
    v_max = env.cell_voltage_max_v * b.cells_in_series
    i_max = env.max_current_it * b.capacity_ah
    for index, stage in enumerate(plan.stages):
        name = _name(index, stage)
        if stage.voltage_v > v_max + _EPS:
            yield (f"{name} voltage {stage.voltage_v:.4f} V is above the envelope's "
                   f"{v_max:.4f} V ({env.cell_voltage_max_v} V/cell)")
        if stage.current_a > i_max + _EPS:
            yield (f"{name} current {stage.current_a:.4f} A is above the envelope's "
                   f"{i_max:.4f} A ({env.max_current_it} It)")
        for exit_ in stage.exits:
            if exit_.kind.value == "voltage_reached" and exit_.value > v_max + _EPS:
                yield f"{name} exits at {exit_.value:.4f} V, above the envelope"


def _holds_below_charge(plan: ChargePlan, env: HardEnvelope) -> Iterator[str]:
    """A lead-acid hold stage (held indefinitely) sits below the charge voltage."""
    held = [s for s in plan.stages if s.kind.value in ("float", "storage_hold")]
    charged = [s for s in plan.stages if s.kind.value in ("bulk", "absorption")]
    if not (held and charged) or _lithium(plan, env):
        return
    top = max(s.voltage_v for s in charged)
    for stage in held:
        if stage.voltage_v >= top - _EPS:
            yield (f"{stage.kind.value} at {stage.voltage_v:.4f} V is not below the charge "
                   f"voltage {top:.4f} V, yet is held indefinitely")


def _temperature_interlocks(plan: ChargePlan, env: HardEnvelope) -> Iterator[str]:
    """The temperature interlocks stay inside the envelope and hold the battery's own."""
    lock, t = plan.interlocks, plan.battery.temperature_c
    t_low, t_high = lock.charge_temperature_min_c, lock.charge_temperature_max_c
    if t_low < env.charge_temperature_min_c - _EPS:
        yield (f"interlock minimum {t_low} °C is below the envelope's "
               f"{env.charge_temperature_min_c} °C")
    if t_high > env.charge_temperature_max_c + _EPS:
        yield (f"interlock maximum {t_high} °C is above the envelope's "
               f"{env.charge_temperature_max_c} °C")
    if _lithium(plan, env) and t_low < -_EPS:
        yield f"interlock minimum {t_low} °C permits charging lithium below 0 °C"
    if not t_low < t_high:
        yield f"interlock minimum {t_low} °C is not below the maximum {t_high} °C"
    if not (t_low - _EPS <= t <= t_high + _EPS):
        yield (f"battery at {t} °C is outside the interlocks {t_low}…{t_high} °C, yet a plan "
               "was made")


def _electrical_interlocks(plan: ChargePlan, env: HardEnvelope) -> Iterator[str]:
    """The voltage and current interlocks stay inside the envelope; no stage exceeds them."""
    b, lock = plan.battery, plan.interlocks
    v_max = env.cell_voltage_max_v * b.cells_in_series
    i_max = env.max_current_it * b.capacity_ah
    if lock.cell_voltage_max_v > env.cell_voltage_max_v + _EPS:
        yield (f"interlock cell voltage {lock.cell_voltage_max_v} V is above the envelope's "
               f"{env.cell_voltage_max_v} V/cell")
    if lock.battery_voltage_max_v > v_max + _EPS:
        yield f"interlock battery voltage {lock.battery_voltage_max_v} V is above {v_max:.4f} V"
    if lock.current_max_a > i_max + _EPS:
        yield f"interlock current {lock.current_max_a} A is above {i_max:.4f} A"
    for stage in plan.stages:
        if stage.current_a > lock.current_max_a + _EPS:
            yield (f"{stage.kind.value} current {stage.current_a:.4f} A is above the "
                   f"interlock's {lock.current_max_a:.4f} A")


def _lithium_stops(plan: ChargePlan, env: HardEnvelope) -> Iterator[str]:
    if _lithium(plan, env) and plan.finish != "stop":
        yield "a lithium plan must stop at the end, not hold"


def _held_bounded(plan: ChargePlan, env: HardEnvelope) -> Iterator[str]:
    """No stage holds a battery at a charging voltage without a bound: lithium's absorption
    and storage hold, a lead-acid absorption, equalization or desulfation, each ended by its
    own duration or its timer in time."""
    lithium = _lithium(plan, env)
    kinds, longest, what = ((_LITHIUM_HELD, LITHIUM_HELD_MAX_S, "lithium") if lithium else
                            (_LEAD_DWELL, LEAD_DWELL_MAX_S, "a lead-acid battery"))
    for index, stage in enumerate(plan.stages):
        if stage.kind.value not in kinds:
            continue
        limits = [e.value for e in stage.exits if e.kind.value == "duration"]
        if stage.timer_s is not None:
            limits.append(stage.timer_s)
        if not limits or min(limits) > longest + _EPS:
            yield (f"{_name(index, stage)} may hold {what} at {stage.voltage_v:.3f} V for "
                   f"more than {longest / 3600:g} h")


def _cool_zone(plan: ChargePlan, env: HardEnvelope) -> Iterator[str]:
    """Below the cool boundary no stage exceeds the cool current; the interlock carries it."""
    if env.cool_zone_below_c is None or env.cool_zone_current_it is None:
        return
    b, lock = plan.battery, plan.interlocks
    cool_a = env.cool_zone_current_it * b.capacity_ah
    if b.temperature_c < env.cool_zone_below_c:
        for stage in plan.stages:
            if stage.current_a > cool_a + _EPS:
                yield (f"{stage.kind.value} current {stage.current_a:.4f} A is above the "
                       f"{cool_a:.4f} A allowed below {env.cool_zone_below_c} °C")
    if lock.cool_zone_current_max_a is None or lock.cool_zone_current_max_a > cool_a + _EPS:
        yield "the interlocks lack the cool-zone current limit"


def _warm_zone(plan: ChargePlan, env: HardEnvelope) -> Iterator[str]:
    """Above the warm boundary no stage exceeds the warm voltage; the interlock carries it."""
    if env.warm_zone_above_c is None or env.warm_zone_cell_v is None:
        return
    b, lock = plan.battery, plan.interlocks
    warm_v = env.warm_zone_cell_v * b.cells_in_series
    if b.temperature_c > env.warm_zone_above_c:
        for stage in plan.stages:
            if stage.voltage_v > warm_v + _EPS:
                yield (f"{stage.kind.value} voltage {stage.voltage_v:.4f} V is above the "
                       f"{warm_v:.4f} V allowed above {env.warm_zone_above_c} °C")
    if (lock.warm_zone_cell_voltage_max_v is None
            or lock.warm_zone_cell_voltage_max_v > env.warm_zone_cell_v + _EPS):
        yield "the interlocks lack the warm-zone voltage limit"


def _overcharge_stages(plan: ChargePlan, env: HardEnvelope) -> Iterator[str]:
    """A desulfation or equalization stage overcharges a full battery: it follows absorption,
    ends on its time, and faults on an Ah cap and on a temperature rise."""
    kinds = [stage.kind.value for stage in plan.stages]
    for index, stage in enumerate(plan.stages):
        if stage.kind.value not in _LITHIUM_NEVER:
            continue
        name = _name(index, stage)
        if "absorption" not in kinds[:index]:
            yield f"{name} does not follow absorption: it would overcharge a battery not yet full"
        exits = {(e.kind.value, e.then) for e in stage.exits}
        for needed in (("duration", "next"), ("charge_above", "fault"),
                       ("temperature_rise", "fault")):
            if needed not in exits:
                yield f"{name} lacks its {needed[0]} exit ({needed[1]})"


def _published_ceilings(plan: ChargePlan, env: HardEnvelope) -> Iterator[str]:
    """The plan stays inside its chemistry's published ceilings (:data:`CEILINGS`), whatever
    the envelope it was given says."""
    b = plan.battery
    ceiling = CEILINGS.get(b.chemistry)
    if ceiling is None:
        yield f"{b.chemistry} has no published ceiling to check against"
        return
    v_max = ceiling.cell_voltage_max_v * b.cells_in_series
    i_max = ceiling.max_current_it * b.capacity_ah
    for index, stage in enumerate(plan.stages):
        name = _name(index, stage)
        if stage.voltage_v > v_max + _EPS:
            yield (f"{name} voltage {stage.voltage_v:.4f} V is above the published "
                   f"{ceiling.cell_voltage_max_v} V/cell for {b.chemistry}")
        if stage.current_a > i_max + _EPS:
            yield (f"{name} current {stage.current_a:.4f} A is above the published "
                   f"{ceiling.max_current_it} It for {b.chemistry}")
        if stage.kind.value in ceiling.never:
            yield f"{name} is never planned for {b.chemistry}"
    lock = plan.interlocks
    if lock.cell_voltage_max_v > ceiling.cell_voltage_max_v + _EPS:
        yield f"interlock cell voltage {lock.cell_voltage_max_v} V is above the published ceiling"
    if not (ceiling.charge_temperature_min_c - _EPS <= lock.charge_temperature_min_c
            and lock.charge_temperature_max_c <= ceiling.charge_temperature_max_c + _EPS):
        yield (f"interlocks {lock.charge_temperature_min_c}…{lock.charge_temperature_max_c} °C "
               f"leave the published {ceiling.charge_temperature_min_c:g}…"
               f"{ceiling.charge_temperature_max_c:g} °C for {b.chemistry}")


def _lead_acid_guards(plan: ChargePlan, env: HardEnvelope) -> Iterator[str]:
    """Every lead-acid bulk and absorption stage faults on an Ah cap (at most the published
    :data:`CHARGE_CAP_SOURCE` multiple of C) and on a temperature rise; absorption also on a
    current that rises at constant voltage (thermal runaway)."""
    ceiling = CEILINGS.get(plan.battery.chemistry)
    if _lithium(plan, env) or ceiling is None or ceiling.charge_cap_c is None:
        return
    capacity = plan.battery.capacity_ah
    for index, stage in enumerate(plan.stages):
        if stage.kind.value not in ("bulk", "absorption"):
            continue
        name = _name(index, stage)
        guards = {e.kind.value: e.value for e in stage.exits if e.then == "fault"}
        cap = guards.get("charge_above")
        if cap is None:
            yield f"{name} lacks its charge_above guard (fault)"
        elif cap > ceiling.charge_cap_c * capacity + _EPS:
            yield (f"{name} Ah cap {cap:.3f} Ah is above {ceiling.charge_cap_c} x "
                   f"{capacity:g} Ah")
        rise = guards.get("temperature_rise")
        if rise is None:
            yield f"{name} lacks its temperature_rise guard (fault)"
        elif rise > TEMPERATURE_RISE_MAX_K + _EPS:
            yield f"{name} temperature rise {rise:g} K is above {TEMPERATURE_RISE_MAX_K:g} K"
        if stage.kind.value == "absorption":
            rising = guards.get("current_rising")
            if rising is None:
                yield f"{name} lacks its current_rising guard (fault)"
            elif rising > CURRENT_RISE_MAX_IT * capacity + _EPS:
                yield (f"{name} current rise {rising:.4f} A is above {CURRENT_RISE_MAX_IT} "
                       "It")


#: The checks, in order; each takes the plan and the envelope and yields what it finds.
CHECKS: tuple[Check, ...] = (
    _identity, _stage_kinds, _stage_numbers, _stage_envelope, _holds_below_charge,
    _temperature_interlocks, _electrical_interlocks, _lithium_stops, _held_bounded, _cool_zone,
    _warm_zone,
    _overcharge_stages, _published_ceilings, _lead_acid_guards,
)


def _shape(plan: ChargePlan) -> Iterator[str]:
    """Cells and capacity are usable numbers (the other checks divide by them)."""
    b = plan.battery
    if not (isinstance(b.cells_in_series, int) and b.cells_in_series >= 1):
        yield f"cells_in_series {b.cells_in_series!r} is not a positive whole number"
    elif not (math.isfinite(b.capacity_ah) and b.capacity_ah > 0):
        yield f"capacity {b.capacity_ah!r} Ah is not a positive number"


def violations(
    plan: ChargePlan, envelope: HardEnvelope, battery_file: BatteryFile | None = None
) -> list[str]:
    """Every way ``plan`` crosses ``envelope`` or its published ceilings; empty when it is
    safe to emit.

    With ``battery_file``, also the limits the input itself sets: the maker's maximum
    charge current and the charger channel's voltage and current ranges.
    """
    shape = list(_shape(plan))
    if shape:
        return [*_identity(plan, envelope), *shape]
    found = [problem for check in CHECKS for problem in check(plan, envelope)]
    if battery_file is not None:
        found += list(_maker_limit(plan, battery_file)) + list(_channel_limits(plan,
                                                                              battery_file))
    return found


def _maker_limit(plan: ChargePlan, battery_file: BatteryFile) -> Iterator[str]:
    """No stage above the maker's maximum charge current, read from the input itself."""
    maker = battery_file.battery.overrides.max_charge_current
    if maker is None:
        return
    maker_a = maker.amps(plan.battery.capacity_ah)
    for stage in plan.stages:
        if stage.current_a > maker_a + _EPS:
            yield (f"{stage.kind.value} current {stage.current_a:.4f} A is above the maker's "
                   f"maximum {maker_a:.4f} A")


def _channel_limits(plan: ChargePlan, battery_file: BatteryFile) -> Iterator[str]:
    """Every stage inside the charger channel's voltage and current ranges."""
    channel = battery_file.charger
    if channel is None:
        return
    for stage in plan.stages:
        if stage.current_a > channel.max_current_a + _EPS:
            yield (f"{stage.kind.value} current {stage.current_a:.4f} A is above the channel's "
                   f"{channel.max_current_a} A")
        if stage.current_a < channel.min_current_a - _EPS:
            yield (f"{stage.kind.value} current {stage.current_a:.4f} A is below the channel's "
                   f"smallest {channel.min_current_a} A")
        if stage.voltage_v > channel.max_voltage_v + _EPS:
            yield (f"{stage.kind.value} voltage {stage.voltage_v:.4f} V is above the channel's "
                   f"{channel.max_voltage_v} V")


def envelope_problems(envelope: HardEnvelope) -> list[str]:
    """How a built-in envelope crosses its chemistry's published ceilings (empty: inside)."""
    ceiling = CEILINGS.get(envelope.chemistry)
    if ceiling is None:
        return [f"{envelope.chemistry} has no published ceiling"]
    problems = []
    if envelope.cell_voltage_max_v > ceiling.cell_voltage_max_v + _EPS:
        problems.append(f"max_cell_voltage {envelope.cell_voltage_max_v} V/cell is above the "
                        f"published {ceiling.cell_voltage_max_v} V/cell")
    if envelope.max_current_it > ceiling.max_current_it + _EPS:
        problems.append(f"max_current {envelope.max_current_it} It is above the published "
                        f"{ceiling.max_current_it} It")
    if envelope.charge_temperature_min_c < ceiling.charge_temperature_min_c - _EPS:
        problems.append("charge_temperature_min is below the published window")
    if envelope.charge_temperature_max_c > ceiling.charge_temperature_max_c + _EPS:
        problems.append("charge_temperature_max is above the published window")
    missing = ceiling.never - envelope.forbidden_stages
    if missing:
        problems.append(f"forbidden_stages lacks {', '.join(sorted(missing))}")
    return problems


def verify(
    plan: ChargePlan, envelope: HardEnvelope, battery_file: BatteryFile | None = None
) -> None:
    """Raise :class:`~chargeplan.errors.EnvelopeViolation` if ``plan`` crosses ``envelope``
    or its published ceilings (or, with ``battery_file``, the maker's or the channel's
    limits)."""
    found = violations(plan, envelope, battery_file)
    if found:
        raise EnvelopeViolation(found)
