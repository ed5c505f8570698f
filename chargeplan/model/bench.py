"""The bench file: the room, the mains budget, the working days and hours, the channels, the
batteries.

Date-times are the bench's local wall-clock time, with no offset (a day with a clock change
counts its working hours on the wall clock).
"""

from __future__ import annotations

import datetime as dt
from typing import Literal

from pydantic import Field, field_validator, model_validator

from chargeplan.clock import parse_datetime, parse_time
from chargeplan.model.charger import ChargerChannel
from chargeplan.model.fields import Ident, InputModel, Text, local_date, quantity
from chargeplan.model.rows import BatteryRow
from chargeplan.units import quote

__all__ = ["WEEKDAYS", "BenchBattery", "BenchChannel", "BenchFile", "Hours", "ProgressRow", "Room",
           "Span", "local_datetime"]

#: The days of the week as the bench file names them, Monday first (ISO 8601 order).
WEEKDAYS = ("monday", "tuesday", "wednesday", "thursday", "friday", "saturday", "sunday")


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
    """A time of day: HH:MM or HH:MM:SS (chargeplan.clock); a time object as it is."""
    if isinstance(raw, dt.time):
        moment = raw
    elif isinstance(raw, str):
        moment = parse_time(raw)
    else:
        raise ValueError(f"{quote(raw)} is not a time of day; write it as 08:00 (in quotes)")
    if moment.tzinfo is not None:
        raise ValueError(f"'{raw}' has a UTC offset; write the bench's local wall-clock time "
                         "without one, e.g. 08:00")
    if moment.microsecond:
        raise ValueError(f"'{raw}' has a fraction of a second; write whole seconds or none")
    return moment


def local_datetime(raw: object) -> dt.datetime:
    """A local wall-clock date-time, 'YYYY-MM-DDTHH:MM' (chargeplan.clock), no offset:
    '2026-12-07T14:00'; a datetime object as it is."""
    if isinstance(raw, dt.datetime):
        moment = raw
    elif isinstance(raw, str):
        moment = parse_datetime(raw)
    else:
        raise ValueError(f"{quote(raw)} is not a date-time; write it as 2026-12-07T14:00 "
                         "(in quotes)")
    if moment.tzinfo is not None:
        raise ValueError(f"'{raw}' has a UTC offset; write the bench's local wall-clock time "
                         "without one, e.g. 2026-12-07T14:00")
    if moment.microsecond:
        raise ValueError(f"'{raw}' has a fraction of a second; write whole seconds or none")
    return moment


def _due(raw: object) -> dt.time | dt.datetime | None:
    if raw is None or isinstance(raw, dt.time | dt.datetime):
        return raw
    if not isinstance(raw, str):
        raise ValueError(f"{quote(raw)} is not a time; write it as 14:00 or 2026-12-08T14:00 "
                         "(in quotes)")
    text = raw.strip()
    if "T" in text or " " in text or (len(text) >= 10 and text[4:5] == "-"):
        return local_datetime(text)
    return _clock(text)


class Span(InputModel):
    """One working span: from ``start`` to ``end``; an end at or before the start is on the
    next day (a 22:00-06:00 night shift)."""

    start: dt.time = dt.time(8, 0)
    end: dt.time = dt.time(17, 0)

    _times = field_validator("start", "end", mode="before")(_clock)

    @field_validator("start", "end", mode="after")
    @classmethod
    def _whole_minutes(cls, moment: dt.time) -> dt.time:
        if moment.second:
            raise ValueError(f"{moment.isoformat()} is not a whole minute: working hours are "
                             f"planned to the minute; write {moment.strftime('%H:%M')} or the "
                             "next minute")
        return moment

    @model_validator(mode="after")
    def _length(self) -> Span:
        if self.end == self.start:
            raise ValueError("start and end are the same time; give the working span, e.g. "
                             "08:00 to 17:00 (or 22:00 to 06:00 for a night shift)")
        return self

    @property
    def start_min(self) -> int:
        return self.start.hour * 60 + self.start.minute

    @property
    def minutes(self) -> int:
        """Its length in minutes (wall clock), past midnight if the end is before the start."""
        end = self.end.hour * 60 + self.end.minute
        return (end - self.start_min) % (24 * 60)


DaySpan = Span | Literal["closed"] | None


class Hours(Span):
    """The working hours: one span for every day (``start``, ``end``), or one span per
    weekday (``monday: {start: "08:00", end: "17:00"}``, ``sunday: closed``; a weekday left
    out is closed)."""

    monday: DaySpan = None
    tuesday: DaySpan = None
    wednesday: DaySpan = None
    thursday: DaySpan = None
    friday: DaySpan = None
    saturday: DaySpan = None
    sunday: DaySpan = None

    @model_validator(mode="after")
    def _one_form(self) -> Hours:
        days = [getattr(self, d) for d in WEEKDAYS]
        given = [d for d in WEEKDAYS if getattr(self, d) is not None]
        if given and ({"start", "end"} & self.model_fields_set):
            raise ValueError("give one span (start, end) or one span per weekday, not both")
        if given and all(d == "closed" or d is None for d in days):
            raise ValueError("every day is closed; give the working hours of at least one day")
        return self

    @property
    def per_weekday(self) -> bool:
        return any(getattr(self, d) is not None for d in WEEKDAYS)

    def span(self, weekday: int) -> Span | None:
        """The span of ``weekday`` (0 Monday … 6 Sunday), or None when closed."""
        if not self.per_weekday:
            return self
        day = getattr(self, WEEKDAYS[weekday])
        return day if isinstance(day, Span) else None


class BenchChannel(ChargerChannel):
    name: Ident  # required on a bench
    lithium_mode: bool = Field(default=False, description="a charge mode for lithium")
    unattended: bool = Field(default=False, description="may run unattended, past closing")
    loads_files: bool = Field(default=False, description="takes a setpoint file")
    power_max_w: quantity("power", ge=1, le=1e6) | None = Field(default=None, alias="power_max")


class BenchBattery(BatteryRow):
    """One battery on the bench: a row's fields, its temperature, whose it is, when it is
    wanted, and the optional stages asked for."""

    temperature_c: quantity("temperature", ge=-60, le=100) = Field(alias="temperature")
    owner: Text | None = None
    due: dt.datetime | dt.time | None = Field(
        default=None, description="a time on the first working day (14:00) or a local "
        "date-time (2026-12-08T14:00)")
    equalize: bool | None = Field(
        default=None, description="true asks for an equalization (flooded only), false "
        "forbids it; unset lets the rules decide")
    desulfate: bool | None = Field(
        default=None, description="true asks for a desulfation stage (flooded only)")

    _due = field_validator("due", mode="before")(_due)

    @model_validator(mode="after")
    def _state(self) -> BenchBattery:
        if self.state_of_charge_pct is not None and self.rest_voltage_v is not None:
            raise ValueError("give state_of_charge or rest_voltage, not both")
        return self


class BenchFile(InputModel):
    room: Room
    mains_budget_w: quantity("power", ge=1, le=1e7) | None = Field(
        default=None, alias="mains_budget")
    date: dt.date | None = Field(
        default=None, description="the first working day (ISO 8601, 2026-12-07); today if left "
        "out")
    hours: Hours = Field(default_factory=Hours)
    channels: list[BenchChannel]
    batteries: list[BenchBattery] | None = None

    _date = field_validator("date", mode="before")(local_date)

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


class ProgressRow(InputModel):
    """One row of a re-plan's progress.csv: a battery's channel, when it started and when it
    finished (or ``faulted`` when its charge stopped with a fault)."""

    battery: Ident
    channel: Ident | None = None
    started: dt.datetime | None = None
    finished: dt.datetime | Literal["faulted"] | None = None

    @field_validator("started", mode="before")
    @classmethod
    def _started(cls, raw: object) -> object:
        return None if raw is None else local_datetime(raw)

    @field_validator("finished", mode="before")
    @classmethod
    def _finished(cls, raw: object) -> object:
        if raw is None or (isinstance(raw, str) and raw.strip().lower() == "faulted"):
            return None if raw is None else "faulted"
        return local_datetime(raw)
