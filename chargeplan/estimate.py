"""Charge-time estimates for finished plans: the physics simulation run on the plan's own
stages and exits, so plan and estimate cannot disagree.

:func:`estimate_plans` simulates many plans together (numpy arrays, one row a battery),
writes each stage's estimated time, charge and energy onto the plan, tightens the safety
timers to a stated margin over the estimate (never lengthening one), and checks every
plan again with :func:`chargeplan.safety.verify`.
"""

from __future__ import annotations

import math

import numpy as np

from chargeplan.engine.rules.interlock import BULK_TIMER_FLOOR_S
from chargeplan.fmt import amps, celsius, duration, num
from chargeplan.model.battery import BatteryFile
from chargeplan.model.profile import Profile
from chargeplan.physics.charge import (
    CellParameters,
    SimulationResult,
    StageArrays,
    ocv_grid,
    simulate_charge,
)
from chargeplan.plan import (
    ChargePlan,
    ExitKind,
    Finding,
    Severity,
    Stage,
    StageEstimate,
    StageKind,
    TraceEntry,
)
from chargeplan.profiles import ProfileSet

__all__ = ["CAUTIOUS_KNEE_PCT", "arrays_for", "estimate_plans"]

#: A bulk timer never allows less than the time to charge to this state of charge
#: (common practice: lead-acid bulk rarely ends past 90 %).
CAUTIOUS_KNEE_PCT = 90.0


def arrays_for(
    plans: list[ChargePlan], profiles: ProfileSet | None = None
) -> tuple[CellParameters, StageArrays]:
    """The simulation's arrays for ``plans`` (one row a plan)."""
    profile_set = profiles or ProfileSet(use_environment=False)
    n = len(plans)
    width = max(len(plan.stages) for plan in plans)
    tables: dict[str, int] = {}
    grids: list[np.ndarray] = []
    cols = {name: np.zeros(n) for name in (
        "capacity_ah", "cells", "table_index", "ohmic_ohm_ah", "acceptance_ohm_ah",
        "acceptance_exponent", "resistance_doubling_k", "coulombic_efficiency",
        "gas_a_per_ah", "gas_voltage_v", "gas_slope_v", "gas_doubling_k", "temperature_c",
        "soc_start")}
    present = np.zeros((n, width), dtype=bool)
    volt = np.zeros((n, width))
    amps = np.zeros((n, width))
    exit_v = np.full((n, width), np.nan)
    exit_i = np.full((n, width), np.nan)
    exit_t = np.full((n, width), np.inf)
    exit_q = np.full((n, width), np.inf)
    stop = np.zeros((n, width), dtype=bool)
    for row, plan in enumerate(plans):
        b = plan.battery
        profile = profile_set.get(b.profile_id)
        ph = profile.physics
        if profile.id not in tables:
            tables[profile.id] = len(grids)
            grids.append(ocv_grid(profile.rest_voltage.table))
        cols["capacity_ah"][row] = b.capacity_ah
        cols["cells"][row] = b.cells_in_series
        cols["table_index"][row] = tables[profile.id]
        cols["ohmic_ohm_ah"][row] = ph.ohmic_resistance.value
        cols["acceptance_ohm_ah"][row] = ph.acceptance_resistance.value
        cols["acceptance_exponent"][row] = (np.nan if ph.acceptance_exponent is None
                                            else ph.acceptance_exponent.value)
        cols["resistance_doubling_k"][row] = ph.resistance_doubling.value
        cols["coulombic_efficiency"][row] = ph.coulombic_efficiency.value
        if ph.gassing is not None:
            gas = ph.gassing
            ratio = gas.boost_current.value / gas.float_current.value
            cols["gas_slope_v"][row] = (gas.boost_voltage.value - gas.float_voltage.value) / (
                math.log(ratio))
            cols["gas_a_per_ah"][row] = gas.float_current.value / 1000.0
            cols["gas_voltage_v"][row] = gas.float_voltage.value
            cols["gas_doubling_k"][row] = gas.doubling.value
        else:
            cols["gas_slope_v"][row] = 1.0
            cols["gas_doubling_k"][row] = 10.0
        cols["temperature_c"][row] = b.temperature_c
        cols["soc_start"][row] = (b.state_of_charge_pct or 0.0) / 100.0
        n_cells = b.cells_in_series
        for col, stage in enumerate(plan.stages):
            present[row, col] = True
            volt[row, col] = stage.voltage_v / n_cells
            amps[row, col] = stage.current_a
            for e in stage.exits:
                if e.kind == ExitKind.VOLTAGE_REACHED:
                    exit_v[row, col] = e.value / n_cells
                elif e.kind == ExitKind.CURRENT_BELOW:
                    exit_i[row, col] = e.value
                elif e.kind == ExitKind.DURATION:
                    exit_t[row, col] = min(exit_t[row, col], e.value)
                elif e.kind == ExitKind.CHARGE_ABOVE:  # the other guards watch what the
                    exit_q[row, col] = min(exit_q[row, col], e.value)  # model cannot go wrong
                stop[row, col] |= e.then == "stop"
    params = CellParameters(
        capacity_ah=cols["capacity_ah"],
        cells=cols["cells"].astype(np.int64),
        table_index=cols["table_index"].astype(np.int64),
        tables=np.vstack(grids),
        ohmic_ohm_ah=cols["ohmic_ohm_ah"],
        acceptance_ohm_ah=cols["acceptance_ohm_ah"],
        acceptance_exponent=cols["acceptance_exponent"],
        resistance_doubling_k=cols["resistance_doubling_k"],
        coulombic_efficiency=cols["coulombic_efficiency"],
        gas_a_per_ah=cols["gas_a_per_ah"],
        gas_voltage_v=cols["gas_voltage_v"],
        gas_slope_v=cols["gas_slope_v"],
        gas_doubling_k=cols["gas_doubling_k"],
        temperature_c=cols["temperature_c"],
        soc_start=cols["soc_start"],
    )
    return params, StageArrays(present, volt, amps, exit_v, exit_i, exit_t, stop, exit_q)


def _cautious_bulk_s(plan: ChargePlan, stage: Stage, profile: Profile) -> float:
    """The bulk time to put back the charge up to a cautious knee at the stage's current.

    The model's knee (where constant voltage begins) rests on one calibration point; a
    battery that accepts current longer must not be faulted, so the timer never falls
    below the time to charge to CAUTIOUS_KNEE_PCT at the bulk current.
    """
    soc = plan.battery.state_of_charge_pct or 0.0
    missing = max(CAUTIOUS_KNEE_PCT - soc, 0.0) / 100.0
    factor = profile.charge.charge_factor.value
    return missing * plan.battery.capacity_ah * factor / stage.current_a * 3600.0


def _levelling_off(plan: ChargePlan, stage: Stage, estimated_s: float) -> None:
    """Warn when absorption is expected to end on its time limit with the current still
    above its tail: at constant voltage the current has stopped falling."""
    assert stage.estimate is not None
    tails = [e.value for e in stage.exits if e.kind == ExitKind.CURRENT_BELOW]
    limits = [e.value for e in stage.exits if e.kind == ExitKind.DURATION]
    if plan.battery.family != "lead_acid" or not tails or not limits:
        return
    if estimated_s < min(limits) - 1.0 or stage.estimate.end_current_a < min(tails):
        return
    plan.findings.append(Finding(
        Severity.WARNING, "CP610",
        f"the model expects the absorption current to level off near "
        f"{amps(stage.estimate.end_current_a)}, above its {amps(min(tails))} tail, at "
        f"{celsius(plan.battery.temperature_c)}: the stage ends on its "
        f"{duration(min(limits))} limit, not full by current; a current that stops falling "
        "at constant voltage is the first sign of thermal runaway, so watch the battery's "
        "temperature, check the compensation probe, and charge it cooler"))


def estimate_plans(
    plans: list[ChargePlan],
    *,
    profiles: ProfileSet | None = None,
    record: bool = False,
    battery_files: list[BatteryFile] | None = None,
) -> SimulationResult:
    """Simulate ``plans`` together and write the estimates and tightened timers onto them.

    Only bulk timers tighten: to the profile's timer margin times the estimate, never below
    the floor or the cautious-knee time, never above the rule's own timer. A stage the model
    expects to outlast its safety timer is simulated up to the timer and reported as a
    warning (the charger would stop with a fault). ``battery_files`` (one per plan) lets the
    final safety check see the maker's and the channel's limits again.
    """
    from chargeplan import safety
    from chargeplan.profiles import hard_envelope

    if record and len(plans) != 1:
        raise ValueError("a time series is recorded for one plan at a time")
    profile_set = profiles or ProfileSet(use_environment=False)
    params, stage_arrays = arrays_for(plans, profile_set)
    timers = np.full(stage_arrays.present.shape, np.inf)
    for row, plan in enumerate(plans):
        for col, stage in enumerate(plan.stages):
            if stage.timer_s is not None:
                timers[row, col] = stage.timer_s
    capped = timers < stage_arrays.exit_duration_s
    stage_arrays.exit_duration_s = np.minimum(stage_arrays.exit_duration_s, timers)
    result = simulate_charge(params, stage_arrays, record=record)
    for row, plan in enumerate(plans):
        ok = bool(result.converged[row]) and bool(np.all(np.isfinite(
            result.charge_ah[row][stage_arrays.present[row]])))
        if not ok:
            for stage in plan.stages:
                stage.estimate = None
            plan.estimated = False
            plan.findings.append(Finding(Severity.WARNING, "CP601", "the charge model did "
                                         "not settle for this battery: no time estimate"))
            continue
        profile = profile_set.get(plan.battery.profile_id)
        margin = profile.charge.timer_margin.value
        faulted = False
        for col, stage in enumerate(plan.stages):
            if faulted:  # the charger stopped on the timer: later stages would not run
                stage.estimate = None
                continue
            hold = bool(result.held[row, col])
            estimated = float(result.duration_s[row, col])
            timed_out = bool(capped[row, col]) and estimated >= timers[row, col] - 1e-6
            stage.estimate = StageEstimate(
                duration_s=None if hold else estimated,
                charge_ah=float(result.charge_ah[row, col]),
                energy_wh=float(result.energy_wh[row, col]),
                end_current_a=float(result.end_current_a[row, col]),
                per_day=hold,
            )
            if timed_out:
                plan.findings.append(Finding(
                    Severity.WARNING, "CP601",
                    f"the model expects the {stage.kind.label} stage not to reach its exit "
                    f"within its {duration(timers[row, col])} safety timer: the charger would "
                    "stop with a fault (at this temperature much of the current may go to "
                    "gas); charge the battery cooler or check the setpoints"))
                faulted = True
                continue
            if result.charge_capped[row, col]:
                cap_ah = min(e.value for e in stage.exits if e.kind == ExitKind.CHARGE_ABOVE)
                plan.findings.append(Finding(
                    Severity.WARNING, "CP610",
                    f"the model expects the charge to pass its {num(cap_ah, 1)} Ah cap during "
                    f"the {stage.kind.label} stage: the charger would stop with a fault (much "
                    "of the current is going to gas and heat); check the battery's state, its "
                    "temperature and the setpoints"))
                faulted = True
                continue
            if stage.kind == StageKind.ABSORPTION and not hold:
                _levelling_off(plan, stage, estimated)
            if stage.kind != StageKind.BULK or stage.timer_s is None or hold:
                continue
            cautious = _cautious_bulk_s(plan, stage, profile)
            timer = max(margin * estimated, BULK_TIMER_FLOOR_S, cautious)
            if timer < stage.timer_s:
                plan.trace.append(TraceEntry(
                    "CP601", "bulk.timer",
                    f"{duration(timer)} = the longest of {margin:g} x the estimated "
                    f"{duration(estimated)}, {duration(BULK_TIMER_FLOOR_S)}, and "
                    f"{duration(cautious)} to charge to {CAUTIOUS_KNEE_PCT:g} % (was "
                    f"{duration(stage.timer_s)})"))
                stage.timer_s = timer
        plan.estimated = True
        battery_file = battery_files[row] if battery_files else None
        safety.verify(plan, hard_envelope(plan.battery.chemistry), battery_file)
    return result
