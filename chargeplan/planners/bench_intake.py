"""Bench intake: each battery planned by the core engine on each kind of channel, with typed
values (numbers in SI, the engine's input models built directly), and what fits where.

A refusal is the reason a battery does not fit a channel, under the refusing rule's id; an
entry mistake in a battery (its cells and voltage disagree) is the battery's, reported once.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

from chargeplan.errors import InputError, PlanRefused
from chargeplan.model.battery import Battery, BatteryFile, Conditions, State
from chargeplan.model.bench import BenchBattery, BenchChannel
from chargeplan.model.charger import ChargerChannel
from chargeplan.model.profile import Profile
from chargeplan.plan import ChargePlan, Finding, Severity
from chargeplan.profiles import ProfileSet

__all__ = ["CHARGER_EFFICIENCY", "PROBE_NEEDED_K", "WARM_UP_MIN", "Misfit", "Option",
           "battery_file", "cold_start", "plan_options"]

#: Mains power = battery power / this (common practice: switch-mode chargers near 85 %).
CHARGER_EFFICIENCY = 0.85
#: A lead-acid battery with no probe is unfit when its temperature is this far from the
#: profile's reference (compensation needs the probe; common practice).
PROBE_NEEDED_K = 10.0
#: Warm-up before a battery colder than its chemistry's charge minimum may start, by capacity
#: (common practice: a few hours in a heated room, overnight for a large battery; the
#: measured cell temperature decides): up to 50 Ah 4 h, larger 8 h.
WARM_UP_MIN = ((50.0, 240.0), (math.inf, 480.0))
#: The instruction on the card of a battery that was too cold (one wording everywhere).
COLD_INSTRUCTION = "measure the cell temperature; start when it is above 0 °C"

_CHANNEL_FIELDS = ("max_voltage_v", "min_voltage_v", "max_current_a", "min_current_a",
                   "voltage_step", "current_step", "temperature_probe",
                   "can_disable_high_voltage_stages")
#: The engine's battery-file fields that are the battery's, and their bench keys.
_BATTERY_KEYS = {"battery.cells_in_series": "cells_in_series",
                 "battery.nominal_voltage": "nominal_voltage", "battery.capacity": "capacity",
                 "state.rest_voltage": "rest_voltage", "state.state_of_charge": "state_of_charge",
                 "conditions.battery_temperature": "temperature"}


@dataclass(frozen=True)
class Misfit:
    """Why a battery does not fit a channel: a rule id (CPxxx) or a bench code, and the text."""

    code: str
    text: str


@dataclass
class Option:
    """A battery on a channel: its plan, how long it takes, its mains power and airflow."""

    plan: ChargePlan
    minutes: float = 0.0
    power_w: float = 0.0
    airflow_m3_per_h: float = 0.0
    gas_ma_per_ah: float = 0.0
    notes: list[str] = field(default_factory=list)


def cold_start(b: BenchBattery, profile: Profile) -> tuple[float, float]:
    """The temperature to plan a battery at and the warm-up (minutes) it needs first.

    Lithium colder than its chemistry's charge minimum (BU-410 Table 1: never below 0 °C) is
    planned for the minimum, after a warm-up, with the cool-zone current limit; lead-acid is
    left to the engine (a frozen battery must be inspected, not warmed and charged)."""
    low = max(profile.temperature.charge_min.value, profile.envelope.charge_temperature_min.value)
    if profile.family != "lithium" or b.temperature_c >= low:
        return b.temperature_c, 0.0
    warm = next(minutes for most, minutes in WARM_UP_MIN if b.capacity_ah <= most)
    return low, warm


def _state(b: BenchBattery) -> State:
    return State.model_construct(rest_voltage_v=b.rest_voltage_v,
                                 state_of_charge_pct=b.state_of_charge_pct,
                                 equalize=False if b.equalize is False else None)


def _request(b: BenchBattery) -> list[str]:
    """The stages the workshop asks for, as the battery file's ``request`` (the engine still
    decides whether the chemistry allows them); ``equalize: false`` forbids equalization."""
    return ([*(["desulfation"] if b.desulfate else []),
             *(["equalization"] if b.equalize else [])])


def battery_file(b: BenchBattery, channel: ChargerChannel | None,
                 temperature_c: float) -> BatteryFile:
    """The engine's input for a bench battery, built from typed values (no strings)."""
    battery = Battery.model_construct(name=b.id, chemistry=b.chemistry,
                                      nominal_voltage_v=b.nominal_voltage_v,
                                      cells_in_series=b.cells_in_series,
                                      capacity_ah=b.capacity_ah)
    return BatteryFile.model_construct(
        battery=battery, state=_state(b),
        conditions=Conditions.model_construct(battery_temperature_c=temperature_c),
        storage=None, charger=channel, request=_request(b))


def channel_for(channel: BenchChannel, max_current_a: float | None = None) -> ChargerChannel:
    values = {name: getattr(channel, name) for name in _CHANNEL_FIELDS}
    if max_current_a is not None:
        values["max_current_a"] = max_current_a
    return ChargerChannel.model_construct(**values)


def _engine(b: BenchBattery, index: int, channel: ChargerChannel, temperature_c: float,
            profiles: ProfileSet) -> ChargePlan | Misfit:
    from chargeplan.engine.planner import plan_charge

    try:
        return plan_charge(battery_file(b, channel, temperature_c), profiles=profiles)
    except PlanRefused as refusal:
        return Misfit(refusal.rule_id, refusal.reason)
    except InputError as error:
        key = _BATTERY_KEYS.get(error.field or "")
        if key is not None:
            raise InputError(f"battery {b.id}: {error.problem}",
                             field=f"batteries[{index}].{key}", fix=error.fix) from None
        return Misfit("input", f"{error.field}: {error.problem}" if error.field else str(error))


def _bench_misfits(b: BenchBattery, profile: Profile, channel: BenchChannel) -> list[Misfit]:
    misfits = []
    if profile.family == "lithium" and not channel.lithium_mode:
        misfits.append(Misfit("bench.lithium", "no lithium mode"))
    comp = profile.temperature.compensation
    far = abs(b.temperature_c - (comp.reference.value if comp else 25.0))
    if profile.family == "lead_acid" and not channel.temperature_probe and far > PROBE_NEEDED_K:
        misfits.append(Misfit("bench.probe", f"no probe, and the battery is more than "
                                             f"{PROBE_NEEDED_K:g} K from the reference "
                                             "temperature its compensation needs"))
    return misfits


def _power(plan: ChargePlan) -> tuple[float, float]:
    """Mains watts at the plan's highest stage power, and the highest stage voltage."""
    top = max(plan.stages, key=lambda s: s.voltage_v * s.current_a)
    return top.voltage_v * top.current_a / CHARGER_EFFICIENCY, max(s.voltage_v
                                                                    for s in plan.stages)


def _within_power(b: BenchBattery, index: int, channel: BenchChannel, temperature_c: float,
                  profiles: ProfileSet, plan: ChargePlan) -> Option | Misfit:
    """The plan, or one with the channel's current lowered to keep within its power_max."""
    watts, volts = _power(plan)
    if channel.power_max_w is None or watts <= channel.power_max_w + 1e-9:
        return Option(plan)
    amps = channel.power_max_w * CHARGER_EFFICIENCY / volts
    if channel.current_step:
        amps = math.floor(amps / channel.current_step + 1e-9) * channel.current_step
    lowered = _engine(b, index, channel_for(channel, amps), temperature_c, profiles)
    if isinstance(lowered, Misfit):
        return Misfit(lowered.code, f"at the {amps:.2f} A its {channel.power_max_w:.0f} W "
                                    f"power_max allows: {lowered.text}")
    note = (f"current lowered to {amps:.2f} A so that {volts:.2f} V x {amps:.2f} A / "
            f"{CHARGER_EFFICIENCY:g} stays within the channel's {channel.power_max_w:.0f} W")
    lowered.findings.append(Finding(Severity.INFO, "bench.power", note))
    return Option(lowered, notes=[note])


def plan_options(rows: list[BenchBattery], channels: list[BenchChannel],
                 profiles: ProfileSet) -> tuple[list[list[Option | list[Misfit]]],
                                                list[Profile], list[float]]:
    """Every battery planned on every channel (once per distinct kind of channel): an
    :class:`Option` where it fits, else its misfits; each battery's profile and warm-up."""
    cache: dict[tuple, Option | Misfit] = {}
    fit: list[list[Option | list[Misfit]]] = []
    found: list[Profile] = []
    warm_ups: list[float] = []
    for i, b in enumerate(rows):
        try:
            profile = profiles.get(b.chemistry, field=f"batteries[{i}].chemistry")
        except InputError as error:
            raise error.in_file(f"battery {b.id}") from None
        temperature, warm = cold_start(b, profile)
        found.append(profile)
        warm_ups.append(warm)
        row: list[Option | list[Misfit]] = []
        for channel in channels:
            key = (i, *(getattr(channel, n) for n in _CHANNEL_FIELDS), channel.power_max_w)
            if key not in cache:
                got = _engine(b, i, channel_for(channel), temperature, profiles)
                cache[key] = got if isinstance(got, Misfit) else _within_power(
                    b, i, channel, temperature, profiles, got)
            got = cache[key]
            misfits = _bench_misfits(b, profile, channel)
            if isinstance(got, Misfit):
                misfits.append(got)
            row.append(misfits if misfits else Option(got.plan, notes=list(got.notes)))
        fit.append(row)
    return fit, found, warm_ups
