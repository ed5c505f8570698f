"""A battery as one row of a list: the fields the bench and the storage inventory share."""

from __future__ import annotations

from pydantic import Field, model_validator

from chargeplan.model.fields import Ident, InputModel, Text, number, quantity


class BatteryRow(InputModel):
    """One battery in a list (a CSV row or an inline entry): its id, chemistry, size and state.

    The state's bounds are the core battery model's (model/battery.py): a negative rest
    voltage is accepted here so the core rules can refuse a reversed battery by name.
    """

    id: Ident
    chemistry: Text
    nominal_voltage_v: quantity("voltage", ge=1, le=1000) | None = Field(
        default=None, alias="nominal_voltage")
    cells_in_series: number(whole=True, ge=1, le=400) | None = None
    capacity_ah: quantity("capacity", ge=0.05, le=100_000) = Field(alias="capacity")
    state_of_charge_pct: quantity("fraction", ge=0, le=100) | None = Field(
        default=None, alias="state_of_charge")
    rest_voltage_v: quantity("voltage", ge=-1000, le=1000) | None = Field(
        default=None, alias="rest_voltage")

    @model_validator(mode="after")
    def _size(self) -> BatteryRow:
        if self.nominal_voltage_v is None and self.cells_in_series is None:
            raise ValueError("give nominal_voltage (e.g. '12 V') or cells_in_series")
        return self
