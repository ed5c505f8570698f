"""The charge program: a plan that holds for any battery of its kind, whatever its state.

Firmware runs every battery of one kind that is connected to it, full or flat, at any
temperature of its table. So the setpoint document (version 4) is made from the plan for
the battery file *without* its ``state`` (the rules then plan from a flat battery whose
voltage is unknown: a pre-charge first, the longest timers, caps on the rated capacity)
and carries the rules a charger applies by itself: when to pre-charge, when to restart,
which faults latch and which pause, and the hysteresis that ends a pause. The printable
plan for one battery, now, is made from the whole battery file as before.

Safety timers in a program cover the lowest current the program may run at (a cool
zone or a cold table row), and every timer is longer than its stage's own duration exit,
so that the normal end and the fault never fall on the same second.
"""

from __future__ import annotations

from dataclasses import dataclass

from chargeplan.errors import InternalError
from chargeplan.firmware.faults import VOLTAGE_TRIP_FILTER_MS
from chargeplan.model.battery import BatteryFile, State
from chargeplan.plan import (
    HIGH_VOLTAGE_STAGES,
    ChargePlan,
    ExitKind,
    Finding,
    Severity,
    StageKind,
)
from chargeplan.profiles import ProfileSet

__all__ = [
    "LEAD_ACID_RESTART_V_CELL",
    "LITHIUM_RESTART_BELOW_V_CELL",
    "TIMER_BEYOND_EXIT",
    "ProgramRules",
    "program_plan",
]

#: Li-ion restart: charger ICs restart when the cell falls about 100 mV below the
#: regulation voltage (charger-IC datasheets; common practice, from memory).
LITHIUM_RESTART_BELOW_V_CELL = 0.100
#: ... and a restart voltage must lie below the rest voltage of a cell charged to the
#: program's target, or the battery would restart on its own rest voltage. Where the
#: 100 mV rule does not (LiFePO4's flat curve: 3.45 V/cell against a full cell's 3.40),
#: the rest voltage this many percent below the target, by the profile's own table, is
#: used (common practice: LiFePO4 needs no top-up until it has given some charge).
RESTART_BELOW_TARGET_PCT = 10.0
#: How long the rest voltage must stay below the restart voltage (common practice, from
#: memory: a minute, so the relaxation and noise after a charge do not restart it).
LITHIUM_RESTART_FILTER_S = 60
#: Lead-acid restart from float: back to bulk when the battery cannot hold float, below
#: about 2.08-2.12 V/cell for a while (common practice, from memory): the middle value.
LEAD_ACID_RESTART_V_CELL = 2.10
#: "For a while": a quarter of an hour, so a passing load on the battery does not send it
#: back to bulk (common practice, from memory).
LEAD_ACID_RESTART_FILTER_S = 900
#: A safety timer is this much longer than its stage's own duration exit (common
#: practice: the timer is the backstop of the normal end, never the same second).
TIMER_BEYOND_EXIT = 1.10
#: A paused charge resumes this far inside the temperature limit that stopped it (common
#: practice, from memory: charger ICs resume a few kelvin inside a thermal limit).
TEMPERATURE_MARGIN_K = 3.0
#: A voltage or current trip must persist this long before it latches: the one trip filter
#: time of chargeplan.firmware.faults (protection-IC practice, about 1 s, from memory).
VOLTAGE_FILTER_S = VOLTAGE_TRIP_FILTER_MS // 1000


@dataclass(frozen=True, slots=True)
class ProgramRules:
    """What a program carries beyond the stages (volts, amperes, seconds, kelvin)."""

    precharge_below_v: float
    precharge_current_a: float
    precharge_timer_s: float
    restart_v: float
    restart_condition: str  # "rest_below" (after a stop) or "float_below" (under float)
    restart_filter_s: int
    no_battery_below_v: float  # below it nothing chargeable is connected
    cells_above_v: float  # above it the battery has more cells than the program's
    temperature_margin_k: float
    voltage_filter_s: int


def _restart(plan: ChargePlan, profile, target_v_cell: float, target_pct: float
             ) -> tuple[float, str, int]:
    from chargeplan.physics.ocv import ocv_from_soc

    n = plan.battery.cells_in_series
    if plan.finish == "hold":
        return LEAD_ACID_RESTART_V_CELL * n, "float_below", LEAD_ACID_RESTART_FILTER_S
    table = profile.rest_voltage.table
    per_cell = target_v_cell - LITHIUM_RESTART_BELOW_V_CELL
    if per_cell >= float(ocv_from_soc(target_pct, table)):
        per_cell = float(ocv_from_soc(max(target_pct - RESTART_BELOW_TARGET_PCT, 0.0), table))
    return per_cell * n, "rest_below", LITHIUM_RESTART_FILTER_S


def _lowest_current_a(plan: ChargePlan, bulk_a: float) -> float:
    lock = plan.interlocks
    currents = [bulk_a]
    if lock.cool_zone_current_max_a is not None:
        currents.append(lock.cool_zone_current_max_a)
    currents += [row.current_max_a for row in plan.temperature_table or []]
    return min(currents)


def _program_timers(plan: ChargePlan, rule_timers: list[float | None]) -> None:
    """The rules' timers (from a flat battery), stretched to the lowest current the program
    may run at and past each stage's own duration exit."""
    for stage, timer in zip(plan.stages, rule_timers, strict=True):
        stage.timer_s = timer
        if stage.kind == StageKind.BULK and timer is not None:
            stage.timer_s = timer * stage.current_a / _lowest_current_a(plan, stage.current_a)
        limits = [e.value for e in stage.exits if e.kind == ExitKind.DURATION]
        if stage.timer_s is not None and limits:
            stage.timer_s = max(stage.timer_s, max(limits) * TIMER_BEYOND_EXIT)


def program_plan(
    battery_file: BatteryFile,
    *,
    profiles: ProfileSet | None = None,
    file: str | None = None,
    table_step_c: float | None = 5.0,
    estimate: bool = True,
) -> ChargePlan:
    """The charge program for ``battery_file``'s kind of battery (its ``state`` is read only
    to refuse an impossible reading; the program does not depend on it).

    The returned plan carries :class:`ProgramRules` as ``plan.program``; encode it with
    :func:`chargeplan.firmware.setpoints.encode`.
    """
    return program_plans([battery_file], profiles=profiles, file=file,
                         table_step_c=table_step_c, estimate=estimate)[0]


def program_plans(
    battery_files: list[BatteryFile],
    *,
    profiles: ProfileSet | None = None,
    file: str | None = None,
    table_step_c: float | None = 5.0,
    estimate: bool = True,
) -> list[ChargePlan]:
    """:func:`program_plan` for many batteries, their estimates simulated together."""
    from chargeplan.estimate import estimate_plans

    profile_set = profiles or ProfileSet(use_environment=False)
    made = [_program_base(b, profile_set, file, table_step_c) for b in battery_files]
    if estimate and made:
        estimate_plans([plan for plan, _, _ in made], profiles=profile_set,
                       battery_files=[stateless for _, stateless, _ in made])
    return [_program_finish(plan, stateless, rule_timers, profile_set)
            for plan, stateless, rule_timers in made]


def _program_base(battery_file: BatteryFile, profile_set: ProfileSet, file: str | None,
                  table_step_c: float | None) -> tuple[ChargePlan, BatteryFile, list]:
    """The program's plan before its estimate: (plan, the stateless file, the rules' own
    timers)."""
    from chargeplan.engine.planner import derive_state, plan_charge

    # the file's own reading is still judged: one that no rested battery of this kind can
    # give (reversed leads, a dead cell, more cells than the file says) is refused
    derive_state(battery_file, profiles=profile_set, file=file)
    # a program is the normal charge: a requested desulfation or equalization is run by a
    # person, from the printed plan, never by the program on its own
    stateless = battery_file.model_copy(update={"state": State(), "request": []})
    plan = plan_charge(stateless, profiles=profile_set, file=file)
    for asked in battery_file.request or []:
        plan.findings.append(Finding(
            Severity.INFO, "CP203" if asked == "desulfation" else "CP205",
            f"{asked} asked for: a charge program carries the normal charge only; run the "
            f"{asked} from the printed plan (chargeplan plan), with someone present"))
    if any(stage.kind in HIGH_VOLTAGE_STAGES for stage in plan.stages):
        raise InternalError("a program without state got an operator-requested stage")
    pre = plan.stage(StageKind.PRECHARGE)
    if pre is not None and pre.timer_s is None:
        raise InternalError("a program without state has an untimed pre-charge")
    if pre is None and plan.battery.family != "lead_acid":
        raise InternalError("a lithium program without state has no pre-charge")
    if table_step_c is not None:
        from chargeplan.firmware.tables import temperature_table

        plan.temperature_table = temperature_table(stateless, plan, step_c=table_step_c,
                                                   profiles=profile_set)
        plan.table_step_c = table_step_c
    return plan, stateless, [stage.timer_s for stage in plan.stages]


def _program_finish(plan: ChargePlan, stateless: BatteryFile, rule_timers: list,
                    profile_set: ProfileSet) -> ChargePlan:
    from chargeplan import safety
    from chargeplan.profiles import hard_envelope

    _program_timers(plan, rule_timers)
    pre = plan.stage(StageKind.PRECHARGE)
    profile = profile_set.get(plan.battery.profile_id)
    n = plan.battery.cells_in_series
    charge = next(s for s in plan.stages if s.kind != StageKind.PRECHARGE)
    target_pct = 100.0
    if charge.kind == StageKind.BULK and plan.stage(StageKind.ABSORPTION) is None:
        from chargeplan.physics.ocv import soc_from_ocv

        target_pct = float(soc_from_ocv(charge.voltage_v / n, profile.rest_voltage.table))
    restart_v, condition, filter_s = _restart(plan, profile, charge.voltage_v / n, target_pct)
    plan.program = ProgramRules(
        # lead-acid has no pre-charge (it takes the bulk current from the start, BU-403; rule
        # CP202): the block is present and off, 0 mV / 0 mA / 0 s, which no battery reads below
        precharge_below_v=pre.voltage_v if pre else 0.0,
        precharge_current_a=pre.current_a if pre else 0.0,
        precharge_timer_s=(pre.timer_s or 0.0) if pre else 0.0,
        restart_v=restart_v,
        restart_condition=condition,
        restart_filter_s=filter_s,
        no_battery_below_v=profile.rest_voltage.dead_below.value * n,
        cells_above_v=profile.rest_voltage.highest_plausible.value * n,
        temperature_margin_k=TEMPERATURE_MARGIN_K,
        voltage_filter_s=VOLTAGE_FILTER_S,
    )
    safety.verify(plan, hard_envelope(plan.battery.chemistry), stateless)
    return plan
