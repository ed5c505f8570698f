"""The neutral setpoint document: the integer form of a plan that chargers and firmware load.

Every number is an integer in the unit its key names (``voltage_mV``,
``current_mA``, ``duration_s``, ``temperature_dC`` in tenths of a degree C).
``digest`` is ``sha256:`` and the hex SHA-256 of the canonical JSON of the
document without its ``digest`` key (keys sorted, no spaces, UTF-8), so a loader
can tell a file that was edited by hand.
"""

from __future__ import annotations

from typing import Annotated, Literal

from pydantic import BaseModel, ConfigDict, Field

__all__ = [
    "FORMAT",
    "VERSION",
    "CompensationTable",
    "CoolZone",
    "CurrentExit",
    "DocumentBattery",
    "DurationExit",
    "SetpointDocument",
    "SetpointInterlocks",
    "SetpointStage",
    "VoltageExit",
    "WarmZone",
]

from chargeplan.model import SETPOINT_FORMAT as FORMAT
from chargeplan.model import SETPOINT_VERSION as VERSION

StageKindName = Literal[
    "precharge", "desulfation", "bulk", "absorption", "equalization", "float", "storage_hold"
]
Then = Literal["next", "stop"]
Guard = Literal["fault"]


class _Doc(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True, strict=True, defer_build=True)


class VoltageExit(_Doc):
    """Ends when the terminal voltage rises to ``voltage_mV``."""

    condition: Literal["voltage_reached"]
    voltage_mV: int = Field(ge=0)
    then: Then


class CurrentExit(_Doc):
    """Ends when the current falls below ``current_mA`` (the tail current)."""

    condition: Literal["current_below"]
    current_mA: int = Field(ge=0)
    then: Then


class DurationExit(_Doc):
    """Ends when the stage has run ``duration_s``."""

    condition: Literal["duration"]
    duration_s: int = Field(ge=0)
    then: Then


class ChargeAboveExit(_Doc):
    """A fault when the charge put in since the charge began exceeds ``charge_mAh``."""

    condition: Literal["charge_above"]
    charge_mAh: int = Field(gt=0)
    then: Guard


class CurrentRisingExit(_Doc):
    """A fault when, at constant voltage, the current rises ``current_mA`` above the lowest
    current of this stage (the sign of thermal runaway)."""

    condition: Literal["current_rising"]
    current_mA: int = Field(gt=0)
    then: Guard


class TemperatureRiseExit(_Doc):
    """A fault when the battery temperature rises ``temperature_rise_dK`` (0.1 K) above its
    temperature when the stage began."""

    condition: Literal["temperature_rise"]
    temperature_rise_dK: int = Field(gt=0)
    then: Guard


StageExit = Annotated[
    VoltageExit | CurrentExit | DurationExit | ChargeAboveExit | CurrentRisingExit
    | TemperatureRiseExit,
    Field(discriminator="condition"),
]


class SetpointStage(_Doc):
    kind: StageKindName
    voltage_mV: int = Field(gt=0, description="limit (constant current) or regulation voltage")
    current_mA: int = Field(gt=0, description="current limit")
    timer_s: int | None = Field(
        ge=0, description="safety timer: still in this stage then is a fault; null for none"
    )
    compensated: bool = Field(description="the voltage follows temperature_compensation")
    exits: list[StageExit] = Field(description="the stage ends on whichever comes first")
    estimated_duration_s: int | None = Field(
        ge=0, description="the physics estimate of the stage's time; null for a stage that "
        "holds until disconnected, or when not estimated"
    )
    charge_mAh: int | None = Field(
        ge=0, description="estimated charge in (a holding stage: per day)"
    )
    energy_mWh: int | None = Field(
        ge=0, description="estimated energy in (a holding stage: per day)"
    )


class CoolZone(_Doc):
    below_dC: int
    current_max_mA: int = Field(ge=0)


class WarmZone(_Doc):
    above_dC: int
    cell_voltage_max_mV: int = Field(ge=0)


class SetpointInterlocks(_Doc):
    charge_temperature_min_dC: int
    charge_temperature_max_dC: int
    cell_voltage_max_mV: int = Field(gt=0)
    battery_voltage_max_mV: int = Field(gt=0)
    current_max_mA: int = Field(gt=0)
    cool_zone: CoolZone | None
    warm_zone: WarmZone | None


class CompensationTable(_Doc):
    """Lead-acid temperature compensation, for firmware with a battery temperature probe.

    A compensated stage's ``voltage_mV`` is already right for ``planned_temperature_dC``.
    At battery temperature T, firmware sets ``voltage_mV + coefficient_uV_per_K_per_cell x
    cells_in_series x (clamp(T) - clamp(planned temperature)) / 1000``, where clamp holds a
    temperature inside ``range_min_dC..range_max_dC``, and never above
    ``interlocks.battery_voltage_max_mV``."""

    coefficient_uV_per_K_per_cell: int
    reference_dC: int
    range_min_dC: int
    range_max_dC: int


class TableRow(_Doc):
    temperature_dC: int
    charge_voltage_mV: int = Field(gt=0, description="absorption (or storage) voltage")
    hold_voltage_mV: int | None = Field(gt=0, description="float or storage hold; null: none")
    current_max_mA: int = Field(gt=0, description="bulk current limit")


class TemperatureTable(_Doc):
    """Setpoints looked up by battery temperature, for firmware that does not compute
    compensation. Rows run every ``step_dC`` across the charge-temperature interlocks, each
    made by the same rules as the plan. Between two rows use the lower value of each column;
    outside the rows, or at a temperature with no row, do not charge."""

    step_dC: int = Field(gt=0)
    rows: list[TableRow]


class DocumentBattery(_Doc):
    name: str
    chemistry: str
    profile: str
    cells_in_series: int = Field(ge=1)
    capacity_mAh: int = Field(gt=0)
    nominal_voltage_mV: int = Field(gt=0)


class SetpointDocument(_Doc):
    """A chargeplan setpoint document (format ``chargeplan-setpoints``, version 3).

    Version 2 added each stage's estimates (``estimated_duration_s``, ``charge_mAh``,
    ``energy_mWh``); version 3 the ``temperature_table``."""

    format: Literal["chargeplan-setpoints"]
    version: Literal[3]
    generator: str
    battery: DocumentBattery
    cells_in_series: int = Field(ge=1)
    planned_temperature_dC: int
    stages: list[SetpointStage] = Field(min_length=1)
    finish: Literal["stop", "hold"]
    interlocks: SetpointInterlocks
    temperature_compensation: CompensationTable | None
    temperature_table: TemperatureTable | None
    digest: str = Field(pattern=r"^sha256:[0-9a-f]{64}$")
