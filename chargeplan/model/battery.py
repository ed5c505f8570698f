"""The battery file: the battery, its state, the conditions, storage and the channel.

Keys in the file are the trade's words (``capacity``, ``rest_voltage``); the
attributes carry the unit of the float they hold (``capacity_ah``,
``rest_voltage_v``). See the glossary in DEVELOPERS.md.
"""

from __future__ import annotations

from typing import Literal

from pydantic import Field, model_validator

from chargeplan.model.charger import ChargerChannel
from chargeplan.model.fields import (
    CellOrPackVoltage,
    CurrentOrRate,
    InputModel,
    Text,
    number,
    quantity,
)

__all__ = ["Battery", "BatteryFile", "Conditions", "Overrides", "State", "Storage"]


class Overrides(InputModel):
    """Maker datasheet values; each is checked against the chemistry's hard envelope.

    Voltages may be per battery ('14.7 V') or per cell ('2.45 V/cell'); they are
    values at the profile's reference temperature (compensation is applied on top).
    Currents may be amperes or C-rates ('0.2 It').
    """

    absorption_voltage: CellOrPackVoltage | None = None
    float_voltage: CellOrPackVoltage | None = None
    storage_voltage: CellOrPackVoltage | None = None
    equalization_voltage: CellOrPackVoltage | None = Field(
        default=None,
        description="the maker's equalization voltage; for AGM it is also the maker's "
        "permission to equalize",
    )
    desulfation_voltage: CellOrPackVoltage | None = Field(
        default=None,
        description="the maker's desulfation (conditioning) voltage; for AGM it is also the "
        "maker's permission to run the stage",
    )
    bulk_current: CurrentOrRate | None = None
    max_charge_current: CurrentOrRate | None = None
    tail_current: CurrentOrRate | None = None
    precharge_current: CurrentOrRate | None = None
    absorption_time_s: quantity("duration", ge=60, le=7 * 86_400) | None = Field(
        default=None, alias="absorption_time"
    )
    temperature_coefficient_mv_per_k_per_cell: quantity("coefficient", ge=-10, le=0) | None = (
        Field(default=None, alias="temperature_coefficient")
    )


class Battery(InputModel):
    """What the battery is."""

    name: Text
    chemistry: Text = Field(description="a profile id: flooded, agm, gel, lifepo4, nmc, or yours")
    nominal_voltage_v: quantity("voltage", ge=1, le=1000) | None = Field(
        default=None, alias="nominal_voltage"
    )
    cells_in_series: number(whole=True, ge=1, le=400) | None = None
    capacity_ah: quantity("capacity", ge=0.05, le=100_000) = Field(
        alias="capacity",
        description="the actual capacity (for rating: lead-equivalent, the label figure)",
    )
    capacity_hours: number(ge=0.1, le=1000, description="the discharge time in hours the "
                           "capacity is rated at (20 for C20)") | None = None
    rating: Literal["actual", "lead-equivalent"] = "actual"
    actual_capacity_ah: quantity("capacity", ge=0.05, le=100_000) | None = Field(
        default=None,
        alias="actual_capacity",
        description="required for lithium rated lead-equivalent",
    )
    overrides: Overrides = Field(default_factory=Overrides)

    @model_validator(mode="after")
    def _voltage_or_cells(self) -> Battery:
        if self.nominal_voltage_v is None and self.cells_in_series is None:
            raise ValueError(
                "give nominal_voltage (e.g. '12 V') or cells_in_series (e.g. 6)"
            )
        return self


class State(InputModel):
    """What the battery's charge looks like now. All optional."""

    rest_voltage_v: quantity("voltage", ge=-1000, le=1000) | None = Field(
        default=None,
        alias="rest_voltage",
        description="open-circuit voltage after several hours at rest",
    )
    state_of_charge_pct: quantity("fraction", ge=0, le=100) | None = Field(
        default=None, alias="state_of_charge"
    )
    specific_gravity: number(
        ge=1.000, le=1.350,
        description="hydrometer reading of the lowest cell, as read (flooded only); corrected "
        "for the battery temperature by the planner",
    ) | None = None
    specific_gravity_spread: number(
        ge=0, le=0.300,
        description="highest minus lowest cell specific gravity (flooded only)",
    ) | None = None
    since_last_charge_s: quantity("duration", ge=0, le=20 * 365 * 86_400) | None = Field(
        default=None, alias="since_last_charge", description="how long since its last full charge"
    )
    since_equalization_s: quantity("duration", ge=0, le=20 * 365 * 86_400) | None = Field(
        default=None, alias="since_equalization"
    )
    equalize: bool | None = Field(
        default=None,
        description="true asks for an equalization (flooded only), false forbids it; "
        "unset lets the rules decide",
    )
    lowest_cell_on_float_v_cell: quantity("cell_voltage", ge=0, le=5) | None = Field(
        default=None,
        alias="lowest_cell_on_float",
        description="the lowest cell's voltage on float, e.g. '2.11 V/cell' (stationary "
        "flooded batteries; evidence for equalization)",
    )
    capacity_test: Literal["passed", "failed"] | None = Field(
        default=None,
        description="the last capacity test: 'failed' when the battery, fully charged, gave "
        "well under its rated capacity (evidence of sulfation)",
    )
    recharge_test: Literal["passed", "failed"] | None = Field(
        default=None,
        description="'failed' when a full charge did not bring the rest voltage or specific "
        "gravity back to full (evidence of sulfation)",
    )
    cells_verified: bool = Field(
        default=False,
        description="every cell was checked (hydrometer or cell voltages) and none is shorted",
    )

    @model_validator(mode="after")
    def _one_reading(self) -> State:
        if self.rest_voltage_v is not None and self.state_of_charge_pct is not None:
            raise ValueError(
                "give rest_voltage or state_of_charge, not both (the planner derives one "
                "from the other)"
            )
        return self


class Conditions(InputModel):
    battery_temperature_c: quantity("temperature", ge=-60, le=100) = Field(
        alias="battery_temperature",
        description="the battery's own temperature (case or cell), not the room's",
    )


class Storage(InputModel):
    duration_s: quantity("duration", ge=0, le=10 * 365 * 86_400) = Field(
        alias="duration", description="how long the battery will sit after this charge"
    )


class BatteryFile(InputModel):
    """A whole battery file (YAML or JSON)."""

    battery: Battery
    state: State = Field(default_factory=State)
    conditions: Conditions
    storage: Storage | None = None
    charger: ChargerChannel | None = None
    request: list[Literal["desulfation", "equalization"]] = Field(
        default_factory=list,
        description="stages the operator asks for; each still needs a chemistry that "
        "allows it (flooded, or AGM with the maker's permission)",
    )
