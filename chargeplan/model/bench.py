"""The bench file: the room, the mains budget, the working day, the channels, the batteries."""

from __future__ import annotations

import datetime as dt

from pydantic import Field, field_validator, model_validator

from chargeplan.model.charger import ChargerChannel
from chargeplan.model.fields import InputModel, Text, quantity
from chargeplan.model.rows import BatteryRow

__all__ = ["BenchBattery", "BenchChannel", "BenchFile", "Hours", "Room"]


class Room(InputModel):
    volume_m3: quantity("volume", ge=0.1, le=1e6) | None = Field(default=None, alias="volume")
    airflow_m3_per_h: quantity("airflow", ge=0, le=1e7) | None = Field(
        default=None, alias="airflow", description="mechanical ventilation")
    opening_area_cm2: quantity("area", ge=0, le=1e8) | None = Field(
        default=None, alias="opening_area",
        description="free area of each of the inlet and outlet, for natural ventilation")

    @model_validator(mode="after")
    def _something(self) -> Room:
        if self.volume_m3 is None and self.airflow_m3_per_h is None and (
                self.opening_area_cm2 is None):
            raise ValueError("a room needs its volume and its ventilation (airflow or "
                             "opening_area)")
        return self


def _clock(raw: object) -> dt.time:
    if isinstance(raw, dt.time):
        return raw
    if isinstance(raw, int | float):
        raise ValueError(f"{raw} is not a time of day; write it as 08:00 (in quotes)")
    try:
        return dt.time.fromisoformat(str(raw).strip())
    except ValueError:
        raise ValueError(f"'{raw}' is not a time of day; write it as 08:00") from None


class Hours(InputModel):
    start: dt.time = dt.time(8, 0)
    end: dt.time = dt.time(17, 0)

    _times = field_validator("start", "end", mode="before")(_clock)

    @model_validator(mode="after")
    def _ordered(self) -> Hours:
        if self.end <= self.start:
            raise ValueError("end must be after start; check the working hours")
        return self

    @property
    def minutes(self) -> float:
        return (self.end.hour * 60 + self.end.minute) - (self.start.hour * 60 + self.start.minute)


class BenchChannel(ChargerChannel):
    name: Text  # required on a bench
    lithium_mode: bool = Field(default=False, description="a charge mode for lithium")
    unattended: bool = Field(default=False, description="may run unattended, overnight")
    loads_files: bool = Field(default=False, description="takes a setpoint file")
    power_max_w: quantity("power", ge=1, le=1e6) | None = Field(default=None, alias="power_max")


class BenchBattery(BatteryRow):
    """One battery on the bench: a row's fields, its temperature and when it is wanted."""

    temperature_c: quantity("temperature", ge=-60, le=100) = Field(alias="temperature")
    due: dt.time | None = None

    _due = field_validator("due", mode="before")(lambda raw: None if raw is None else _clock(raw))

    @model_validator(mode="after")
    def _state(self) -> BenchBattery:
        if self.state_of_charge_pct is not None and self.rest_voltage_v is not None:
            raise ValueError("give state_of_charge or rest_voltage, not both")
        return self


class BenchFile(InputModel):
    room: Room
    mains_budget_w: quantity("power", ge=1, le=1e7) | None = Field(
        default=None, alias="mains_budget")
    hours: Hours = Field(default_factory=Hours)
    channels: list[BenchChannel]
    batteries: list[BenchBattery] | None = None

    @model_validator(mode="after")
    def _names(self) -> BenchFile:
        if not self.channels:
            raise ValueError("a bench needs channels; add at least one under channels:")
        ids = [b.id for b in self.batteries or []]
        if len(set(ids)) != len(ids):
            raise ValueError("two batteries share an id; give each battery its own id")
        names = [c.name for c in self.channels]
        twice = sorted({n for n in names if names.count(n) > 1})
        if twice:
            raise ValueError(f"two channels are named {twice[0]}; give each its own name")
        return self
