"""The neutral setpoint document: the integer form of a plan that chargers and firmware load.

Every number is an integer in the unit its key names (``voltage_mV``,
``current_mA``, ``duration_s``, ``temperature_dC`` in tenths of a degree C).
``digest`` is ``sha256:`` and the hex SHA-256 of the canonical JSON of the
document without its ``digest`` key (keys sorted, no spaces, UTF-8), so a loader
can tell a file that was edited by hand.
"""

from __future__ import annotations

from typing import Annotated, Literal

from pydantic import BaseModel, ConfigDict, Field, field_validator

__all__ = [
    "FORMAT",
    "VERSION",
    "CompensationTable",
    "CoolZone",
    "CurrentExit",
    "DocumentBattery",
    "DurationExit",
    "FaultEntry",
    "Hysteresis",
    "Precharge",
    "ProgramStage",
    "Restart",
    "SetpointDocument",
    "SetpointDocumentV3",
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

    @field_validator("name", "chemistry", "profile")
    @classmethod
    def _visible(cls, value: str) -> str:
        """No invisible or direction-changing character (a hand edit could make two
        batteries' files look the same): the input files' own rule (model.fields)."""
        if not value.isascii():
            from chargeplan.model.fields import _character_problem

            problem = _character_problem(value, identifier=False)
            if problem is not None:
                raise ValueError(problem)
        return value


class SetpointDocumentV3(_Doc):
    """A chargeplan setpoint document of version 3 (read by ``chargeplan check``).

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


ProgramStageKind = Literal["bulk", "absorption", "float", "storage_hold"]


class ProgramStage(SetpointStage):
    """A stage of a charge program: never a pre-charge (that is ``precharge``), never an
    operator-requested equalization or desulfation."""

    kind: ProgramStageKind  # type: ignore[assignment]


class Precharge(_Doc):
    """At connection, a battery resting below ``below_voltage_mV`` is pre-charged at
    ``current_mA`` until it reaches that voltage; still below it after ``timer_s`` is the
    ``stage_timer`` fault. Above it, the charge starts at the first stage. All three 0: no
    pre-charge (lead-acid takes the bulk current from the start, BU-403)."""

    below_voltage_mV: int = Field(ge=0)
    current_mA: int = Field(ge=0)
    timer_s: int = Field(ge=0)


class Restart(_Doc):
    """When charging starts again from the first stage (bulk).

    ``rest_below``: after a charge that stops, the battery's rest voltage stays below
    ``voltage_mV`` for ``filter_s``. ``float_below``: on float (or a storage hold), the
    battery voltage stays below ``voltage_mV`` for ``filter_s`` (it cannot hold float)."""

    voltage_mV: int = Field(gt=0)
    condition: Literal["rest_below", "float_below"]
    filter_s: int = Field(ge=0)


class FaultEntry(_Doc):
    """One fault the program watches (codes: ``chargeplan.firmware.faults``). ``latch``
    stops until a person resets the charger; ``pause`` resumes by itself once the cause has
    cleared by the ``hysteresis``. ``no_battery`` carries its ``below_voltage_mV`` and
    ``wrong_cell_count`` its ``above_voltage_mV`` (judged at connection, no current)."""

    code: int = Field(ge=1, le=255)
    name: str = Field(pattern=r"^[a-z_]{1,40}$")
    action: Literal["latch", "pause"]
    below_voltage_mV: int | None = Field(default=None, gt=0)
    above_voltage_mV: int | None = Field(default=None, gt=0)


class Hysteresis(_Doc):
    """A temperature pause resumes ``temperature_margin_dK`` (0.1 K) inside the limit that
    stopped it; a voltage or current trip counts only after it has lasted
    ``voltage_filter_s``."""

    temperature_margin_dK: int = Field(gt=0)
    voltage_filter_s: int = Field(ge=0, le=60)


class SetpointDocument(_Doc):
    """A chargeplan setpoint document (format ``chargeplan-setpoints``, version 4): a charge
    program for any battery of its kind, valid at connection whatever the battery's state,
    at every temperature of its table.

    Version 2 added each stage's estimates; version 3 the ``temperature_table``; version 4
    makes it a program: ``precharge``, ``restart``, ``faults`` and ``hysteresis``, the fault
    guards among the exits, and every safety timer longer than its stage's duration exit."""

    format: Literal["chargeplan-setpoints"]
    version: Literal[4]
    generator: str
    battery: DocumentBattery
    cells_in_series: int = Field(ge=1)
    planned_temperature_dC: int
    precharge: Precharge
    stages: list[ProgramStage] = Field(min_length=1)
    finish: Literal["stop", "hold"]
    restart: Restart
    interlocks: SetpointInterlocks
    temperature_compensation: CompensationTable | None
    temperature_table: TemperatureTable | None
    faults: list[FaultEntry] = Field(min_length=1)
    hysteresis: Hysteresis
    digest: str = Field(pattern=r"^sha256:[0-9a-f]{64}$")
