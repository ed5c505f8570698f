"""The library's front door: read a battery file and plan it, in one call each."""

from __future__ import annotations

from pathlib import Path

from chargeplan.loading import read_mapping, validate
from chargeplan.model.battery import BatteryFile
from chargeplan.plan import ChargePlan
from chargeplan.profiles import ProfileSet

__all__ = ["load_battery_file", "plan_file", "program_file"]


def load_battery_file(path: str | Path) -> BatteryFile:
    """Read and validate a battery file (YAML or JSON); errors name the file and field."""
    return validate(BatteryFile, read_mapping(path, what="battery"), file=str(path))


def plan_file(
    path: str | Path,
    *,
    profiles: ProfileSet | None = None,
    estimate: bool = True,
    table_step_c: float | None = 5.0,
) -> ChargePlan:
    """Plan the battery described in ``path``; with ``estimate``, also simulate the charge
    (stage times, Ah and Wh, and safety timers tightened to the estimate); with
    ``table_step_c``, also the temperature table for firmware (None: no table).

    Examples
    --------
    >>> from chargeplan.api import plan_file
    >>> from chargeplan.demo import example_paths
    >>> plan = plan_file(example_paths()[1])
    >>> [stage.kind.value for stage in plan.stages]
    ['bulk', 'absorption', 'storage_hold']
    """
    from chargeplan.engine.planner import plan_charge

    battery_file = load_battery_file(path)
    plan = plan_charge(battery_file, profiles=profiles, file=str(path))
    if estimate:
        from chargeplan.estimate import estimate_plans

        estimate_plans([plan], profiles=profiles, battery_files=[battery_file])
    if table_step_c is not None:
        from chargeplan.firmware.tables import temperature_table

        plan.temperature_table = temperature_table(battery_file, plan, step_c=table_step_c,
                                                   profiles=profiles)
        plan.table_step_c = table_step_c
    return plan


def program_file(
    path: str | Path,
    *,
    profiles: ProfileSet | None = None,
    table_step_c: float | None = 5.0,
) -> ChargePlan:
    """The charge program for the kind of battery described in ``path`` (its ``state`` is
    not used): what the setpoint document, the C header and the image carry.

    Examples
    --------
    >>> from chargeplan.api import program_file
    >>> from chargeplan.demo import example_paths
    >>> program = program_file(example_paths()[4])
    >>> [stage.kind.value for stage in program.stages]
    ['precharge', 'bulk', 'absorption']
    """
    from chargeplan.firmware.charge_program import program_plan

    return program_plan(load_battery_file(path), profiles=profiles, file=str(path),
                        table_step_c=table_step_c)
