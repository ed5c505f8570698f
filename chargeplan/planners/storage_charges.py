"""The charger settings behind the storage plan, from the core engine.

Each charge a visit calls for, and each maintainer's hold for the month, is planned by the
engine once per kind of battery and conditions (models built from typed values, never from
strings parsed again), all charges estimated together by the physics. The planner keeps
the finished values; documents only format them.

A kind is planned at ``REFERENCE_AH``: with no charger given, every current the engine sets
is a C-rate (It) and every physics parameter is per Ah, so voltages and times do not depend
on the capacity and currents scale with it. ``tests/test_storage_season.py`` checks that
against the engine planning each capacity itself.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from chargeplan.model.storage import DAY_S

__all__ = ["REFERENCE_AH", "ChargeSetting", "battery_file", "charge_settings", "maintainer_holds",
           "scaled_current"]

#: The capacity each kind of charge is planned at (its currents scale with the capacity).
REFERENCE_AH = 100.0


def scaled_current(current_a: Any, capacity_ah: Any) -> Any:
    """A current planned at REFERENCE_AH, for a battery of ``capacity_ah`` (numbers or
    arrays)."""
    return current_a * capacity_ah / REFERENCE_AH


@dataclass(frozen=True)
class ChargeSetting:
    """What to set on the charger, and what the engine expects of the charge."""

    chemistry_setting: str  # the charger's chemistry setting: the profile's name
    voltage_v: float  # the regulation voltage (absorption, or lithium's constant voltage)
    current_a: float  # the current limit
    compensated: bool  # the voltage is for this temperature (lead-acid compensation)
    temperature_c: float
    duration_s: float | None  # the estimated charge time
    stages: tuple[str, ...]
    refused: str = ""  # the engine's refusal, when it refuses the charge

    def for_capacity(self, capacity_ah: float) -> ChargeSetting:
        """This setting for a battery of ``capacity_ah`` (planned at REFERENCE_AH)."""
        from dataclasses import replace

        return replace(self, current_a=scaled_current(self.current_a, capacity_ah))

    @property
    def hours(self) -> float:
        return (self.duration_s or 0.0) / 3600.0


def battery_file(chemistry: str, cells: int, capacity_ah: float, temperature_c: float, *,
                 soc_pct: float | None = None, storage_s: float | None = None,
                 name: str = "stored battery") -> Any:
    """The engine's input for one battery, built from typed values."""
    from chargeplan.model.battery import Battery, BatteryFile, Conditions, Overrides, State
    from chargeplan.model.battery import Storage as StorageSpec

    battery = Battery.model_construct(name=name, chemistry=chemistry, cells_in_series=cells,
                                      capacity_ah=capacity_ah, overrides=Overrides())
    return BatteryFile.model_construct(
        battery=battery, state=State.model_construct(state_of_charge_pct=soc_pct),
        conditions=Conditions.model_construct(battery_temperature_c=temperature_c),
        storage=None if storage_s is None else StorageSpec.model_construct(duration_s=storage_s),
        charger=None, request=[])  # every field given: a default factory's signature is slow


def _setting(charge: Any, temperature_c: float) -> ChargeSetting:
    from chargeplan.plan import StageKind

    timed = [s for s in charge.stages if not (s.estimate and s.estimate.per_day)]
    main = (charge.stage(StageKind.ABSORPTION) or charge.stage(StageKind.STORAGE_HOLD)
            or timed[-1])
    bulk = charge.stage(StageKind.BULK) or main
    total = charge.total_estimate()
    return ChargeSetting(charge.battery.profile_name, main.voltage_v, bulk.current_a,
                         main.compensated, temperature_c, total[0] if total else None,
                         tuple(s.kind.label for s in timed))


def charge_settings(keys: list[tuple[str, int, int, int, bool]], profiles: Any,
                    ) -> list[ChargeSetting]:
    """One setting per key (chemistry, cells, state of charge % or -1 for unknown,
    temperature degC, to its storage level), at REFERENCE_AH: planned, then estimated
    together."""
    from chargeplan.engine.planner import plan_charge
    from chargeplan.errors import PlanRefused
    from chargeplan.estimate import estimate_plans

    plans: dict[int, Any] = {}
    out: list[ChargeSetting | None] = [None] * len(keys)
    for k, (chem, cells, soc, temp, storage) in enumerate(keys):
        data = battery_file(chem, cells, REFERENCE_AH, temp, soc_pct=None if soc < 0 else soc,
                            storage_s=90 * DAY_S if storage else None)
        try:
            plans[k] = plan_charge(data, profiles=profiles)
        except PlanRefused as refusal:
            out[k] = ChargeSetting(chem, float("nan"), float("nan"), False, temp, None, (),
                                   refused=refusal.reason)
    if plans:
        estimate_plans(list(plans.values()), profiles=profiles)
    for k, charge in plans.items():
        out[k] = _setting(charge, keys[k][3])
    return [s for s in out if s is not None]


def maintainer_holds(keys: list[tuple[str, int, int]], profiles: Any) -> list[float]:
    """The maintainer's hold voltage per key (chemistry, cells, bay temperature degC): the
    engine's storage hold or float at that temperature (compensated for lead-acid); NaN
    where the engine plans none."""
    from chargeplan.engine.planner import plan_charge
    from chargeplan.errors import PlanRefused
    from chargeplan.plan import StageKind

    holds = []
    for chem, cells, temp in keys:
        data = battery_file(chem, cells, REFERENCE_AH, temp, soc_pct=90.0,
                            storage_s=180 * DAY_S)
        try:
            charge = plan_charge(data, profiles=profiles)
        except PlanRefused:
            holds.append(float("nan"))
            continue
        hold = charge.stage(StageKind.STORAGE_HOLD) or charge.stage(StageKind.FLOAT)
        holds.append(hold.voltage_v if hold else float("nan"))
    return holds
