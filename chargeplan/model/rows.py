"""A battery as one row of a list: the fields the bench and the storage inventory share."""

from __future__ import annotations

from collections.abc import Callable
from typing import Any, ClassVar

from pydantic import Field, model_validator

from chargeplan.model.fields import Ident, InputModel, Text, number, quantity

#: A check across a row's fields: the fields it reads, and a function of their values that
#: says what is wrong, or None.
RowCheck = tuple[tuple[str, ...], Callable[..., str | None]]


def _size_problem(nominal_voltage_v: float | None, cells_in_series: int | None) -> str | None:
    if nominal_voltage_v is None and cells_in_series is None:
        return "give nominal_voltage (e.g. '12 V') or cells_in_series"
    return None


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

    #: The row's checks across fields, each a function of the values alone: the model
    #: validator runs them on a row, and the column reader (chargeplan.csvcolumns) on each
    #: distinct set of values of a file's columns.
    row_checks: ClassVar[tuple[RowCheck, ...]] = (
        (("nominal_voltage_v", "cells_in_series"), _size_problem),)

    @model_validator(mode="after")
    def _row_checks(self) -> Any:
        for names, check in self.row_checks:
            problem = check(*(getattr(self, name) for name in names))
            if problem is not None:
                raise ValueError(problem)
        return self
