"""The storage site file and the inventory: the season, the temperatures, the bays, the
policy, and the batteries."""

from __future__ import annotations

import datetime as dt
from itertools import pairwise
from typing import Literal

from pydantic import Field, model_validator

from chargeplan.model.fields import InputModel, Text, quantity
from chargeplan.model.rows import BatteryRow

__all__ = ["Bay", "InventoryRow", "MonthTemperature", "Period", "Site", "SiteFile"]


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

    @model_validator(mode="after")
    def _ordered(self) -> Period:
        if self.end < self.start:
            raise ValueError("end is before start; check the dates")
        if self.min_c > self.mean_c:
            raise ValueError("min must not be above mean")
        return self


class Bay(InputModel):
    name: Text
    mains: bool = Field(default=False, description="a socket for maintainers")
    lithium_maintainer: bool = Field(
        default=False, description="its maintainers have a lithium mode with no "
        "high-voltage stage")
    monthly: list[MonthTemperature] | None = Field(
        default=None, description="this bay's own temperatures (else the site's)")
    offset_k: quantity("temperature_difference", ge=-40, le=40) | None = Field(
        default=None, alias="offset", description="warmer (+) or colder than the site, e.g. '+8 K'")


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
    warm_room: Text | None = Field(
        default=None, description="the bay where lithium is charged when its own bay is below "
        "0 degC")

    @model_validator(mode="after")
    def _season(self) -> Site:
        if (self.end is None) == (self.duration_s is None):
            raise ValueError("give end or duration (not both)")
        if self.end is not None and self.end <= self.start:
            raise ValueError("end is not after start; check the dates")
        return self

    @property
    def days(self) -> int:
        if self.end is not None:
            return (self.end - self.start).days + 1  # the end day is in the season
        assert self.duration_s is not None
        return int(self.duration_s // 86400)


class InventoryRow(BatteryRow):
    """One battery in store (a CSV row, or an inline entry)."""

    owner: str = ""
    bay: Text
    parasitic_draw_a: quantity("current", ge=0, le=100) | None = Field(
        default=None, alias="parasitic_draw",
        description="a load left connected in store, e.g. '20 mA'")

    @model_validator(mode="after")
    def _reading(self) -> InventoryRow:
        if (self.state_of_charge_pct is None) == (self.rest_voltage_v is None):
            raise ValueError("give state_of_charge or rest_voltage at intake (one of them)")
        return self


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
        if self.site.warm_room is not None and self.site.warm_room not in names:
            raise ValueError(f"warm_room '{self.site.warm_room}' is not one of the bays")
        if self.periods:
            ordered = sorted(self.periods, key=lambda p: p.start)
            for a, b in pairwise(ordered):
                if b.start <= a.end:
                    raise ValueError("temperature periods overlap; check their dates")
        return self
