"""Temperature tables for firmware that looks setpoints up instead of computing them.

Each row is the plan made again at that battery temperature by the same rules, so the
table is compensated, cut and clamped exactly as a plan is. A temperature at which the
rules refuse to charge has no row: firmware must not charge there.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from chargeplan.errors import PlanRefused
from chargeplan.model.battery import BatteryFile, Conditions
from chargeplan.plan import ChargePlan, StageKind
from chargeplan.profiles import ProfileSet

__all__ = ["DEFAULT_STEP_C", "TableRow", "temperature_table"]

#: The table's step (issue: firmware; configurable).
DEFAULT_STEP_C = 5.0

_CHARGE = (StageKind.ABSORPTION, StageKind.BULK)
_HOLD = (StageKind.FLOAT, StageKind.STORAGE_HOLD)


@dataclass(frozen=True, slots=True)
class TableRow:
    temperature_c: float
    charge_voltage_v: float  # absorption (or, charging to storage, the storage hold) voltage
    hold_voltage_v: float | None  # float or lead-acid storage hold; None for lithium
    current_max_a: float  # bulk current limit at this temperature


def _row(plan: ChargePlan, temperature_c: float) -> TableRow:
    charge = next((s for kind in _CHARGE for s in plan.stages if s.kind == kind), None)
    if charge is None:  # lithium already at its storage level: the hold is the charge
        charge = next(s for s in plan.stages if s.kind == StageKind.STORAGE_HOLD)
    hold = None
    if plan.battery.family != "lithium":
        hold = next((s for kind in _HOLD for s in plan.stages if s.kind == kind), None)
    bulk = plan.stage(StageKind.BULK) or charge
    return TableRow(temperature_c, charge.voltage_v, hold.voltage_v if hold else None,
                    bulk.current_a)


def temperature_table(
    battery_file: BatteryFile,
    plan: ChargePlan,
    *,
    step_c: float = DEFAULT_STEP_C,
    profiles: ProfileSet | None = None,
) -> list[TableRow]:
    """Rows every ``step_c`` across the plan's charge-temperature interlocks."""
    from chargeplan.engine.planner import plan_charge

    if not step_c > 0:
        raise ValueError("step_c must be above zero")
    lock = plan.interlocks
    first = math.ceil(lock.charge_temperature_min_c / step_c - 1e-9)
    last = math.floor(lock.charge_temperature_max_c / step_c + 1e-9)
    rows = []
    for index in range(first, last + 1):
        t = round(index * step_c, 6)
        at_t = battery_file.model_copy(
            update={"conditions": Conditions.model_construct(battery_temperature_c=t)}
        )
        try:
            rows.append(_row(plan_charge(at_t, profiles=profiles), t))
        except PlanRefused:
            continue
    return rows
