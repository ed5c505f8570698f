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

from chargeplan.fmt import duration
from chargeplan.physics.charge import (
    CellParameters,
    SimulationResult,
    StageArrays,
    ocv_grid,
    simulate_charge,
)
from chargeplan.plan import ChargePlan, ExitKind, StageEstimate, StageKind, TraceEntry
from chargeplan.profiles import ProfileSet

__all__ = ["TIMER_FLOOR_S", "TIMER_MARGIN", "arrays_for", "estimate_plans"]

#: Safety timers are this many times the estimated stage time (common practice: 1.5).
TIMER_MARGIN = 1.5
#: ... and never shorter than this, so a battery a little slower than the model is not faulted.
TIMER_FLOOR_S = {StageKind.PRECHARGE: 900.0, StageKind.BULK: 1800.0}


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
        "resistance_doubling_k", "coulombic_efficiency",
        "gas_a_per_ah", "gas_voltage_v", "gas_slope_v", "gas_doubling_k", "temperature_c",
        "soc_start")}
    present = np.zeros((n, width), dtype=bool)
    volt = np.zeros((n, width))
    amps = np.zeros((n, width))
    exit_v = np.full((n, width), np.nan)
    exit_i = np.full((n, width), np.nan)
    exit_t = np.full((n, width), np.inf)
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
                else:
                    exit_t[row, col] = min(exit_t[row, col], e.value)
                stop[row, col] |= e.then == "stop"
    params = CellParameters(
        capacity_ah=cols["capacity_ah"],
        cells=cols["cells"].astype(np.int64),
        table_index=cols["table_index"].astype(np.int64),
        tables=np.vstack(grids),
        ohmic_ohm_ah=cols["ohmic_ohm_ah"],
        acceptance_ohm_ah=cols["acceptance_ohm_ah"],
        resistance_doubling_k=cols["resistance_doubling_k"],
        coulombic_efficiency=cols["coulombic_efficiency"],
        gas_a_per_ah=cols["gas_a_per_ah"],
        gas_voltage_v=cols["gas_voltage_v"],
        gas_slope_v=cols["gas_slope_v"],
        gas_doubling_k=cols["gas_doubling_k"],
        temperature_c=cols["temperature_c"],
        soc_start=cols["soc_start"],
    )
    return params, StageArrays(present, volt, amps, exit_v, exit_i, exit_t, stop)


def estimate_plans(
    plans: list[ChargePlan], *, profiles: ProfileSet | None = None, record: bool = False
) -> SimulationResult:
    """Simulate ``plans`` together and write the estimates and tightened timers onto them."""
    from chargeplan import safety
    from chargeplan.profiles import hard_envelope

    params, stage_arrays = arrays_for(plans, profiles)
    result = simulate_charge(params, stage_arrays, record=record)
    for row, plan in enumerate(plans):
        ok = bool(result.converged[row])
        for col, stage in enumerate(plan.stages):
            hold = bool(result.held[row, col])
            stage.estimate = StageEstimate(
                duration_s=None if hold or not ok else float(result.duration_s[row, col]),
                charge_ah=float(result.charge_ah[row, col]),
                energy_wh=float(result.energy_wh[row, col]),
                end_current_a=float(result.end_current_a[row, col]),
                per_day=hold,
            )
            if not ok or hold:
                continue
            estimated = float(result.duration_s[row, col])
            floor = TIMER_FLOOR_S.get(stage.kind)
            if floor is None or stage.timer_s is None:
                continue
            timer = max(TIMER_MARGIN * estimated, floor)
            if timer < stage.timer_s:
                plan.trace.append(TraceEntry(
                    "CP601", f"{stage.kind.value}.timer",
                    f"{duration(timer)} = {TIMER_MARGIN:g} x the estimated "
                    f"{duration(estimated)} (at least {duration(floor)}; was "
                    f"{duration(stage.timer_s)})"))
                stage.timer_s = timer
        plan.estimated = ok
        safety.verify(plan, hard_envelope(plan.battery.chemistry))
    return result

