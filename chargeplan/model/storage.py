"""The storage site file and the inventory: the season, the temperatures, the bays, the
policy, and the batteries."""

from __future__ import annotations

import datetime as dt
from functools import cache
from itertools import pairwise
from typing import Any, ClassVar, Literal

from pydantic import Field, field_validator, model_validator

from chargeplan.model.fields import FreeText, Ident, InputModel, Text, local_date, quantity
from chargeplan.model.rows import BatteryRow

__all__ = ["DAY_S", "Bay", "InventoryCsvRow", "InventoryRow", "MonthTemperature", "Period", "Site",
           "SiteFile", "carried_notes", "load_connected"]

#: Seconds in a day: the storage season is counted in whole days.
DAY_S = 86400


class MonthTemperature(InputModel):
    month: int = Field(ge=1, le=12, strict=True)
    mean_c: quantity("temperature", ge=-60, le=60) = Field(alias="mean")
    min_c: quantity("temperature", ge=-70, le=60) = Field(alias="min")

    @model_validator(mode="after")
    def _ordered(self) -> MonthTemperature:
        if self.min_c > self.mean_c:
            raise ValueError("min must not be above mean")
        return self


class Period(InputModel):
    start: dt.date
    end: dt.date
    mean_c: quantity("temperature", ge=-60, le=60) = Field(alias="mean")
    min_c: quantity("temperature", ge=-70, le=60) = Field(alias="min")

    _dates = field_validator("start", "end", mode="before")(local_date)

    @model_validator(mode="after")
    def _ordered(self) -> Period:
        if self.end < self.start:
            raise ValueError("end is before start; check the dates")
        if self.min_c > self.mean_c:
            raise ValueError("min must not be above mean")
        return self


class Bay(InputModel):
    name: Ident
    mains: bool = Field(default=False, description="a socket for maintainers")
    lithium_maintainer: bool = Field(
        default=False, description="accepted for older files and not used: lithium is never "
        "floated (rule CP206), so lithium is kept off maintainers")
    monthly: list[MonthTemperature] | None = Field(
        default=None, description="this bay's own temperatures (else the site's)")
    offset_k: quantity("temperature_difference", ge=-40, le=40) | None = Field(
        default=None, alias="offset", description="warmer (+) or colder than the site, e.g. '+8 K'")
    airflow_m3_per_h: quantity("airflow", ge=0, le=1e7) | None = Field(
        default=None, alias="airflow", description="mechanical ventilation, for charging "
        "lead-acid here (IEC 62485-2 cl. 7)")
    opening_area_cm2: quantity("area", ge=0, le=1e8) | None = Field(
        default=None, alias="opening_area",
        description="free area of each of the inlet and outlet, for natural ventilation")

    @model_validator(mode="after")
    def _one_temperature(self) -> Bay:
        if self.monthly is not None and self.offset_k is not None:
            raise ValueError(f"bay {self.name} has its own monthly temperatures and an offset; "
                             "give one of them (the offset applies to the site's months)")
        return self


class Site(InputModel):
    name: Text
    start: dt.date
    end: dt.date | None = None
    duration_s: quantity("duration", ge=86400, le=800 * 86400) | None = Field(
        default=None, alias="duration")
    round_interval_s: quantity("duration", ge=86400, le=120 * 86400) = Field(
        default=14 * 86400, alias="round_interval", description="how often staff do rounds")
    policy: Literal["maintainer", "top-up"] = Field(
        default="maintainer", description="maintainer: keep on a maintainer where a bay allows "
        "it, else top up; top-up: periodic top-up charges only")
    lead_acid_top_up_pct: quantity("fraction", ge=50, le=95) | None = Field(
        default=None, alias="lead_acid_top_up", description="the facility's own threshold")
    lithium_top_up_pct: quantity("fraction", ge=10, le=60) | None = Field(
        default=None, alias="lithium_top_up")
    warm_room: Ident | None = Field(
        default=None, description="the bay where lithium is charged when its own bay is below "
        "0 degC, and where a lead-acid battery at risk of freezing is moved")

    _dates = field_validator("start", "end", mode="before")(local_date)

    @model_validator(mode="after")
    def _season(self) -> Site:
        if (self.end is None) == (self.duration_s is None):
            raise ValueError("give end or duration (not both)")
        if self.end is not None and self.end <= self.start:
            raise ValueError("end is not after start; check the dates")
        if self.round_interval_s % DAY_S:
            raise ValueError(f"round_interval is {_days_and_hours(self.round_interval_s)}, not "
                             "a whole number of days; give it in days, e.g. '14 d'")
        if self.duration_s is not None and self.duration_s % DAY_S:
            raise ValueError(f"duration is {_days_and_hours(self.duration_s)}, not a whole "
                             "number of days; give it in days, e.g. '180 d'")
        # the calendar needs the day after the last one: dates end at 9999-12-31
        if self.days > (dt.date.max - self.start).days:
            raise ValueError("the season runs to the end of the year 9999, past the last date "
                             "there is; check the start date and the season's length")
        return self

    @property
    def days(self) -> int:
        if self.end is not None:
            return (self.end - self.start).days + 1  # the end day is in the season
        assert self.duration_s is not None
        return int(self.duration_s // DAY_S)

    @property
    def round_days(self) -> int:
        return int(self.round_interval_s // DAY_S)


def _days_and_hours(seconds: float) -> str:
    """A length as days and as hours ('14.5 d (348 h)'), however it was written."""
    return f"{seconds / DAY_S:g} d ({seconds / 3600:g} h)"


def _intake_problem(state_of_charge_pct: float | None, rest_voltage_v: float | None,
                   arrive: dt.date | None, depart: dt.date | None) -> str | None:
    if (state_of_charge_pct is None) == (rest_voltage_v is None):
        return "give state_of_charge or rest_voltage at intake (one of them)"
    if arrive and depart and depart < arrive:
        return "depart is before arrive; check the dates"
    return None


class InventoryRow(BatteryRow):
    """One battery in store (a CSV row, or an inline entry)."""

    owner: FreeText = ""
    bay: Ident
    parasitic_draw_a: quantity("current", ge=0, le=100) | None = Field(
        default=None, alias="parasitic_draw",
        description="the draw of a load wired to the battery, e.g. '20 mA'")
    loads: Literal["connected", "disconnected"] | None = Field(
        default=None, description="connected: its load must stay connected all season; "
        "disconnected: it is disconnected at intake; unset: connected when a parasitic_draw "
        "is given, and disconnected by staff when it would freeze the battery")
    arrive: dt.date | None = Field(default=None, description="the day it comes in, if after "
                                   "the season's start")
    depart: dt.date | None = Field(default=None, description="the day it leaves, if before "
                                   "the season's end")
    notes: FreeText = Field(default="", description="free text carried to the round sheets")

    _dates = field_validator("arrive", "depart", mode="before")(local_date)

    @field_validator("loads", mode="before")
    @classmethod
    def _loads_any_case(cls, value: object) -> object:
        return value.strip().lower() if isinstance(value, str) else value

    row_checks = (*BatteryRow.row_checks,
                  (("state_of_charge_pct", "rest_voltage_v", "arrive", "depart"),
                   _intake_problem))

    @property
    def load_connected(self) -> bool:
        """The model follows what staff are told: a load draws only while connected."""
        return load_connected(self.loads, self.parasitic_draw_a)


def load_connected(loads: str | None, parasitic_draw_a: float | None) -> bool:
    """Whether a battery's load stays connected, from its ``loads`` and ``parasitic_draw``:
    as ``loads`` says, else connected when it has a draw (:attr:`InventoryRow.load_connected`;
    the storage intake asks this of its columns)."""
    if loads is not None:
        return loads == "connected"
    return bool(parasitic_draw_a)


class SiteFile(InputModel):
    site: Site
    monthly: list[MonthTemperature] | None = None
    periods: list[Period] | None = None
    bays: list[Bay] = Field(min_length=1)
    inventory: list[InventoryRow] | None = None

    @model_validator(mode="after")
    def _consistent(self) -> SiteFile:
        for months in [self.monthly, *(b.monthly for b in self.bays)]:
            if months is not None and len({m.month for m in months}) != len(months):
                raise ValueError("a month is listed twice; give each month once")
        if (self.monthly is None) == (self.periods is None):
            raise ValueError("give the site's temperatures as monthly or as periods")
        names = [b.name for b in self.bays]
        if len(set(names)) != len(names):
            raise ValueError("two bays share a name; give each bay its own name")
        ids = [row.id for row in self.inventory or []]
        if len(set(ids)) != len(ids):
            twice = next(i for i in ids if ids.count(i) > 1)
            raise ValueError(f"battery id '{twice}' is listed twice in the inventory; give each "
                             "battery its own id")
        for row in self.inventory or []:
            self._in_season(row)
        if self.site.warm_room is not None and self.site.warm_room not in names:
            raise ValueError(f"warm_room '{self.site.warm_room}' is not one of the bays")
        if self.periods:
            ordered = sorted(self.periods, key=lambda p: p.start)
            for a, b in pairwise(ordered):
                if b.start <= a.end:
                    raise ValueError("temperature periods overlap; check their dates")
        return self

    def _in_season(self, row: InventoryRow) -> None:
        first = self.site.start
        last = first + dt.timedelta(days=self.site.days - 1)
        for name, day in (("arrive", row.arrive), ("depart", row.depart)):
            if day is not None and not first <= day <= last:
                raise ValueError(f"battery {row.id}: {name} {day.isoformat()} is outside the "
                                 f"season ({first.isoformat()} to {last.isoformat()})")


def carried_notes(notes: str, extra: list[tuple[str, Any]]) -> str:
    """A row's notes with its own columns carried in, each as "column: value", in the
    header's order (:class:`InventoryCsvRow`; the column reader, chargeplan.csvcolumns,
    makes the notes column with it too)."""
    carried = "; ".join(f"{k}: {v}" for k, v in extra)
    return "; ".join(p for p in (notes, carried) if p)


@cache
def _known_columns(model: type[InputModel]) -> frozenset[str]:
    return frozenset({f.alias or name for name, f in model.model_fields.items()}
                     | set(model.model_fields))


class InventoryCsvRow(InventoryRow):
    """An inventory CSV row: columns the model does not know (a phone number, a berth) are
    carried into ``notes`` as "column: value", so a facility's own columns are kept."""

    #: For the column reader (chargeplan.csvcolumns.read_columns): the field the columns the
    #: model does not know are carried into, and how (as the validator below carries them).
    carry_into: ClassVar[str] = "notes"
    carried: ClassVar[Any] = staticmethod(carried_notes)

    @model_validator(mode="before")
    @classmethod
    def _extra_columns_to_notes(cls, data: object) -> object:
        if not isinstance(data, dict):
            return data
        known = _known_columns(cls)
        if known.issuperset(data):  # the usual row: every column is the model's
            return data
        extra = [(k, v) for k, v in data.items() if k not in known]
        kept = {k: v for k, v in data.items() if k in known}
        kept["notes"] = carried_notes(str(kept.get("notes", "")), extra)
        return kept
