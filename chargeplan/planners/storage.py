"""The storage planner: winter procedures, top-up dates and freeze checks for an inventory.

In four parts: intake (``storage_intake``: rows resolved into typed arrays), policy (here:
who goes on a maintainer, which readings reset a battery), the pure kernel
(``storage_kernel``: the season walked as arrays; self-discharge from each profile,
doubled per 10 K of warming, BU-802b, at the bay's mean temperature, plus any connected
load; freeze checks by US Army TM 5-1185 Table III) and the charger settings
(``storage_charges``: from the core engine, timed by the physics). Notes for staff carry
machine-readable codes.
"""

from __future__ import annotations

import datetime as dt
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from functools import cached_property
from itertools import repeat
from pathlib import Path
from typing import Any, NamedTuple

import numpy as np

from chargeplan.csvcolumns import Table, read_columns
from chargeplan.csvfile import InputErrors, csv_reader, csv_rows, read_rows
from chargeplan.errors import InputError
from chargeplan.loading import read_mapping, validate
from chargeplan.model.storage import InventoryCsvRow, InventoryRow, SiteFile
from chargeplan.physics.ocv import soc_from_ocv
from chargeplan.planners.storage_charges import (
    ChargeSetting,
    battery_file,
    charge_settings,
    maintainer_holds,
)
from chargeplan.planners.storage_intake import (
    LITHIUM_STORAGE_BAND_PCT,
    Fleet,
    flat_reading,
    resolve_fleet,
)
from chargeplan.planners.storage_kernel import (
    CHARGES,
    FREEZE_MARGIN_K,
    Act,
    Kind,
    Remedy,
    Season,
    Visits,
    freezing_charge,
    freezing_point_at,
    run_season,
)
from chargeplan.profiles import ProfileSet

__all__ = ["FREEZE_MARGIN_K", "InputErrors", "Note", "Reading", "ReadingFlag", "StoragePlan",
           "TopUp", "load_site", "plan_storage", "read_inventory", "read_readings"]

#: Lithium's lowest discharge (and so storage) temperature: BU-410 Table 1, Li-ion discharge
#: -20 to 60 degC (from memory); a maker's datasheet may allow less cold.
LITHIUM_DISCHARGE_MIN_C = -20.0
#: Percentage points below the prediction at which a reading is flagged (common practice).
FAST_LOSS_POINTS = 10.0
#: Bytes per battery-day the planner may use at most (its day arrays), in all.
MEMORY_LIMIT_BYTES = 6 * 1024**3
#: Notes and reading flags the console summary shows (the procedure lists them all).
SUMMARY_LINES = 20
#: The readings log's columns it must have, with one of rest_voltage, state_of_charge and
#: specific_gravity (more may follow: the round sheet's template has them).
READING_COLUMNS = ("date", "battery")


def load_site(path: str | Path) -> SiteFile:
    return validate(SiteFile, read_mapping(path, what="storage site"), file=str(path))


def read_inventory(path: str | Path) -> Table[InventoryRow]:
    """The inventory CSV; every bad row is reported (with its line) before anything is done.
    Columns the model does not know are carried into each battery's notes.

    A valid file is read column by column (:func:`chargeplan.csvcolumns.read_columns`),
    any other row by row."""
    table = read_columns(path, InventoryRow, carry=InventoryCsvRow)
    if table is not None:
        return table
    return Table.of_rows(read_rows(path, InventoryCsvRow, plain=InventoryRow),
                         list(InventoryRow.model_fields))


@dataclass(frozen=True)
class Reading:
    """One row of the readings log (the round sheet's readings.csv as filled in): a measured
    state (a rest voltage, the pack's own display or a battery monitor's state of charge, a
    hydrometer's specific gravity) and the sheet's yes/no checks; None where left blank."""

    date: dt.date
    battery: str
    rest_voltage_v: float | None = None
    state_of_charge_pct: float | None = None
    specific_gravity: float | None = None
    electrolyte_ok: bool | None = None
    terminals_case_ok: bool | None = None
    returned_to_bay: bool | None = None
    notes: str = ""

    @property
    def measured(self) -> bool:
        return (self.rest_voltage_v, self.state_of_charge_pct,
                self.specific_gravity) != (None, None, None)


#: The answers a yes/no column of the readings log takes (any case), and what they mean.
YES_NO = {"yes": True, "y": True, "ok": True, "no": False, "n": False, "not ok": False}
#: The checks of the readings log: column -> the Reading's field.
READING_CHECKS = {"electrolyte_level_ok": "electrolyte_ok",
                  "terminals_case_ok": "terminals_case_ok", "returned_to_bay": "returned_to_bay"}


def _reading_row(data: dict[str, str], where: str) -> Reading | str | None:
    from chargeplan.units import parse_number, parse_quantity

    filled = {k: v for k, v in data.items() if k in (
        "rest_voltage", "state_of_charge", "specific_gravity", "notes", *READING_CHECKS)}
    if not filled:
        return None  # a row of the template left blank: not measured, not checked
    from chargeplan.clock import parse_date

    try:
        date = parse_date(data.get("date", ""))
    except ValueError as error:  # the one date reader: YYYY-MM-DD only (not 20261201)
        return f"{where}: date: {error}"
    if not data.get("battery"):
        return f"{where}: battery: is empty; give the battery id"
    values: dict[str, Any] = {}
    for column, kind, name in (("rest_voltage", "voltage", "rest_voltage_v"),
                               ("state_of_charge", "fraction", "state_of_charge_pct")):
        if column in filled:
            try:
                values[name] = parse_quantity(filled[column], kind)
            except ValueError as error:
                return f"{where}: {column}: {error}"
    soc = values.get("state_of_charge_pct")
    if soc is not None and not 0 <= soc <= 100:
        return (f"{where}: state_of_charge: {soc:g} % is outside 0-100 %; write the pack's "
                "display as shown, e.g. '45 %'")
    if "specific_gravity" in filled:
        try:
            gravity = parse_number(filled["specific_gravity"])
        except ValueError as error:
            return f"{where}: specific_gravity: {error}"
        from chargeplan.planners.readings import GRAVITY_RANGE

        low, high = GRAVITY_RANGE
        if not low <= gravity <= high:
            return (f"{where}: specific_gravity: {gravity:g} is outside {low:.3f}-{high:.3f}; "
                    "read the hydrometer again (battery acid lies in 1.100-1.300)")
        values["specific_gravity"] = gravity
    for column, name in READING_CHECKS.items():
        if column in filled:
            answer = YES_NO.get(filled[column].strip().lower())
            if answer is None:
                from chargeplan.model.fields import shown_text

                return (f"{where}: {column}: '{shown_text(filled[column])}' is not an answer; "
                        "write yes or no (or leave it blank if not checked)")
            values[name] = answer
    from chargeplan.model.fields import free_text

    try:  # staff's notes reach the procedure: plain text, as an inventory's notes
        notes = free_text(filled.get("notes", ""))
    except ValueError as error:
        return f"{where}: notes: {error}"
    return Reading(date, data["battery"], notes=notes, **values)


def read_readings(path: str | Path) -> list[Reading]:
    """The readings log (or the round sheet's readings.csv as filled in): columns date
    (YYYY-MM-DD), battery, and rest_voltage ('12.41 V') or state_of_charge (the pack's own
    display, '45 %') or specific_gravity (1.000-1.350); optionally the sheet's checks
    electrolyte_level_ok, terminals_case_ok and returned_to_bay (yes or no) and notes. Other
    columns (owner, bay, expected_rest_voltage) are ignored; a row with nothing filled in
    was not measured."""
    shown, reader = csv_reader(path)
    if reader.fieldnames is None:
        raise InputError("is empty", file=shown,
                         fix="write the header date,battery,rest_voltage, then one row a reading")
    header = [f.strip() for f in reader.fieldnames]
    missing = [c for c in READING_COLUMNS if c not in header]
    if not missing and not {"rest_voltage", "state_of_charge", "specific_gravity"} & set(header):
        missing = ["rest_voltage"]
    if missing:
        raise InputError(f"has no {', '.join(missing)} column", file=shown, field=missing[0],
                         fix="write the header date,battery,rest_voltage (or state_of_charge "
                             "for a pack's own display)")
    readings: list[Reading] = []
    errors: list[str] = []
    for line, data in csv_rows(reader, shown, errors):
        got = _reading_row(data, f"{shown}: line {line}")
        if isinstance(got, str):
            errors.append(got)
        elif got is not None:
            readings.append(got)
    if errors:
        raise InputErrors(errors)
    return readings


@dataclass(frozen=True)
class ReadingFlag:
    # unknown-battery, outside-season, set-aside, implausible, flat-curve, sealed, disagree,
    # damaged, electrolyte, not-returned, note, fast-loss, reset
    code: str
    battery: str
    date: dt.date
    text: str


class Note(NamedTuple):
    """What staff must know about one battery (a tuple: a fleet may have a note a battery)."""

    battery: int
    code: str
    text: str


@dataclass(frozen=True)
class TopUp:
    """A charge at a round, as the older interface listed them."""

    battery: int
    day: int
    soc_before: float
    where: str
    setting: ChargeSetting | None

    @property
    def plan(self) -> str:
        from chargeplan.fmt import duration

        s = self.setting
        if s is None:
            return ""
        if s.refused:
            return f"do not charge here: {s.refused}"
        time = f", about {duration(s.duration_s)}" if s.duration_s else ""
        return (f"{s.chemistry_setting} setting, {s.voltage_v:.2f} V, {s.current_a:.1f} A: "
                + " -> ".join(s.stages) + ", then disconnect" + time)


@dataclass
class StoragePlan:
    site_file: SiteFile
    fleet: Fleet
    dates: list[dt.date]
    round_days: list[int]
    bay_names: list[str]
    bay_mean: np.ndarray
    bay_min: np.ndarray
    on_maintainer: np.ndarray
    refused: np.ndarray
    visits: Visits
    soc_daily: np.ndarray
    bay_daily: np.ndarray
    settings: list[ChargeSetting] = field(default_factory=list)
    visit_setting: np.ndarray | None = None  # per visit: index into settings, -1 none
    visit_hold_v: np.ndarray | None = None  # per visit: the maintainer's hold voltage
    # per visit: the bay temperature that hold is for (the warmest daily mean until the next
    # visit, so the hold never runs high as the bay warms)
    visit_hold_c: np.ndarray | None = None
    notes: list[Note] = field(default_factory=list)
    reading_flags: list[ReadingFlag] = field(default_factory=list)

    # the fleet's columns, under the names the documents use
    @property
    def rows(self) -> Table[InventoryRow]:
        return self.fleet.rows

    @property
    def ids(self) -> list[str]:
        """Each battery's id (a column of :attr:`rows`)."""
        return self.fleet.rows.column("id")

    @property
    def chemistry(self) -> list[str]:
        return self.fleet.chemistry

    @property
    def family(self) -> np.ndarray:
        return np.where(self.fleet.lead, "lead_acid", "lithium")

    @property
    def cells(self) -> np.ndarray:
        return self.fleet.cells

    @property
    def threshold(self) -> np.ndarray:
        return self.fleet.threshold

    @property
    def target_soc(self) -> np.ndarray:
        return self.fleet.storage_soc

    @property
    def bay_index(self) -> np.ndarray:
        return self.fleet.bay

    @property
    def round_step(self) -> int:
        return self.site_file.site.round_days

    @property
    def top_ups(self) -> list[TopUp]:
        v = self.visits
        chosen = np.flatnonzero(np.isin(v.act, CHARGES) & (v.kind == Kind.ROUND))
        return [TopUp(int(v.battery[k]), int(v.day[k]), float(v.soc_before[k]),
                      self.bay_names[int(v.where[k])], self.setting_of(int(k))) for k in chosen]

    @property
    def postponed(self) -> list[tuple[int, int]]:
        v = self.visits
        waits = np.flatnonzero(v.act == Act.WAIT)
        return [(int(v.battery[k]), int(v.day[k])) for k in waits]

    def warmer_room_words(self) -> str:
        """Where to take a battery whose charge waits for a warmer bay: a room with mains,
        saying so where the site's warm room is itself too cold or has none."""
        warm = self.site_file.site.warm_room
        if warm is None:
            return "move it to a warm room with mains"
        b = self.bay_names.index(warm)
        why = ("has no mains" if not self.site_file.bays[b].mains else
               f"falls to {self.bay_min[b].min():.0f} degC itself")
        return f"move it to a room with mains that stays above 0 degC ({warm} {why})"

    @cached_property
    def profile_first(self) -> np.ndarray:
        """Per battery, the first battery of the fleet with its profile (so a profile is
        looked at once, however many batteries share it)."""
        index = self.fleet.profile_index
        _found, first = np.unique(index, return_index=True)
        return first[index]  # profile numbers run in order from 0

    @cached_property
    def visit_connected(self) -> np.ndarray:
        """Per visit: the battery's load is connected as staff find it (connected at intake
        and not disconnected at an earlier visit against the freeze; it is never
        reconnected before the release)."""
        v, f = self.visits, self.fleet
        off = np.full(f.n, np.iinfo(np.int64).max)
        cut = v.remedy == Remedy.DISCONNECT
        np.minimum.at(off, v.battery[cut], v.day[cut].astype(np.int64))
        return f.connected[v.battery] & (v.day <= off[v.battery]) & (f.draw_pct_day[v.battery] > 0)

    @cached_property
    def first_freeze_day(self) -> np.ndarray:
        """The first day each lead-acid battery's predicted electrolyte freezes under the plan
        (at or above the day's minimum; TM 5-1185), -1 for none.

        The freezing point falls as the charge rises, so each bay-day has a charge below which
        it freezes: only the battery-days within a point of it are checked against the
        freezing point itself (the same answer as checking every battery-day)."""
        lead = np.flatnonzero(self.fleet.lead)
        first = np.full(self.fleet.n, -1)
        below = freezing_charge(self.bay_min, none=-1.0, every=200.0) + 1.0
        open_ = np.ones(len(lead), dtype=bool)
        for day in range(len(self.dates)):
            bays = self.bay_daily[lead, day]
            soc = self.soc_daily[lead, day].astype(float)
            near = below[bays, day]
            if near.max(initial=-1.0) >= 100.0:
                soc = np.nan_to_num(soc, nan=100.0)
            check = np.flatnonzero(open_ & (soc <= near))
            if not check.size:
                continue
            frozen = check[self.bay_min[bays[check], day] <= freezing_point_at(soc[check])]
            first[lead[frozen]] = day
            open_[frozen] = False
        return first

    @property
    def would_freeze(self) -> np.ndarray:
        full = float(freezing_point_at(np.array(100.0)))
        return self.fleet.lead & (self.bay_min.min(axis=1)[self.fleet.bay] <= full)

    @property
    def maintainer(self) -> dict[int, str]:
        """Battery -> its maintainer's hold at intake, in words."""
        out: dict[int, str] = {}
        v = self.visits
        for k in np.flatnonzero(v.act == Act.MAINTAINER):
            i = int(v.battery[k])
            if i not in out and self.visit_hold_v is not None and self.visit_hold_c is not None:
                out[i] = (f"on a maintainer at {self.visit_hold_v[k]:.2f} V (for "
                          f"{self.visit_hold_c[k]:.0f} degC)")
        return out

    def bands(self) -> list[dict[str, Any]]:
        """Per chemistry and cell count present: the rested voltages that mean charge now,
        storage level and full (the profile's table)."""
        from chargeplan.physics.ocv import ocv_from_soc

        seen: dict[tuple[str, int], dict[str, Any]] = {}
        f = self.fleet
        firsts: dict[tuple[str, int], int] = {}
        pair = self.profile_first.astype(np.int64) * (int(f.cells.max(initial=0)) + 1) + f.cells
        _pairs, first = np.unique(pair, return_index=True)
        for i in np.sort(first).tolist():  # each (profile, cells) by its first battery
            firsts.setdefault((f.chemistry[i], int(f.cells[i])), i)
        for key, i in firsts.items():
            profile, n = f.profiles[i], key[1]
            table = profile.rest_voltage.table
            seen[key] = {"chemistry": profile.name, "cells": n,
                         "threshold_pct": float(f.threshold[i]),
                         "charge_below_v": float(ocv_from_soc(f.threshold[i], table)) * n,
                         "full_v": float(ocv_from_soc(100.0, table)) * n,
                         "storage_v": float(ocv_from_soc(f.storage_soc[i], table)) * n,
                         "flat": bool(f.lfp[i]), "expected": None}
        return list(seen.values())

    def ventilation(self, bay: int | None = None) -> list[Any]:
        """The ventilation of ``bay`` (the warm room when None) on each day it charges
        lead-acid (IEC 62485-2 cl. 7)."""
        from chargeplan.planners.storage_ventilation import warm_room_ventilation
        from chargeplan.planners.ventilation import available_airflow

        site = self.site_file.site
        if bay is None:
            if site.warm_room is None:
                return []
            bay = self.bay_names.index(site.warm_room)
        room = self.site_file.bays[bay]
        given = room.airflow_m3_per_h is not None or room.opening_area_cm2 is not None
        f = self.fleet
        return warm_room_ventilation(
            self.visits, bay, f.lead, self._vented, f.cells, f.capacity_ah, self.dates,
            available_airflow(room.airflow_m3_per_h, room.opening_area_cm2) if given else None,
            self._lead_charging)

    @cached_property
    def _vented(self) -> np.ndarray:
        """Per battery: its cells are vented (flooded)."""
        first = self.profile_first
        out = np.zeros(self.fleet.n, dtype=bool)
        for i in np.unique(first).tolist():  # each profile once
            out[first == i] = self.fleet.profiles[i].vented
        return out

    @cached_property
    def _lead_charging(self) -> np.ndarray:
        """Per visit: it charges a lead-acid battery."""
        v = self.visits
        return np.isin(v.act, CHARGES) & self.fleet.lead[v.battery]

    def charging_bays(self) -> list[int]:
        """The bays in which the plan charges lead-acid, the warm room first: each needs its
        ventilation checked (IEC 62485-2 cl. 7 applies wherever batteries charge)."""
        v = self.visits
        bays = np.unique(v.where[self._lead_charging]).tolist()
        warm = self.site_file.site.warm_room
        first = [self.bay_names.index(warm)] if warm in self.bay_names else []
        return [b for b in first if b in bays] + [b for b in bays if b not in first]

    def expected_rest_v(self, k: int) -> float:
        """The rested voltage visit ``k``'s predicted charge means (the profile's table); NaN
        where a rest voltage says nothing (LiFePO4's flat curve, a battery on a maintainer)."""
        from chargeplan.physics.ocv import ocv_from_soc

        v, f = self.visits, self.fleet
        i = int(v.battery[k])
        soc = float(v.soc_before[k])
        if not np.isfinite(soc) or flat_reading(f.profiles[i], soc) or (
                v.act[k] == Act.MAINTAINER):
            return float("nan")
        return float(ocv_from_soc(soc, f.profiles[i].rest_voltage.table)) * int(f.cells[i])

    def setting_of(self, k: int) -> ChargeSetting | None:
        """Visit ``k``'s charger setting, for its battery's capacity."""
        if self.visit_setting is None or self.visit_setting[k] < 0:
            return None
        setting = self.settings[int(self.visit_setting[k])]
        return setting.for_capacity(float(self.fleet.capacity_ah[int(self.visits.battery[k])]))

    def intake_charger_hours(self) -> float:
        """The estimated charge time of every intake charge, added up."""
        v = self.visits
        if self.visit_setting is None:
            return 0.0
        hours = np.array([s.hours for s in self.settings] + [0.0])[self.visit_setting]
        return float(hours[np.isin(v.act, CHARGES) & (v.kind == Kind.INTAKE)].sum())

    def top_up_count(self) -> int:
        v = self.visits
        return int((np.isin(v.act, CHARGES) & (v.kind == Kind.ROUND)).sum())

    def take_out_ah(self, i: int) -> float:
        """LiFePO4 counted down to its storage level: the Ah to take out after a full charge."""
        return float(self.fleet.capacity_ah[i] * (100.0 - self.fleet.storage_soc[i]) / 100.0)

    def compare_readings(self, readings: list[Any] | None = None,
                         profiles: ProfileSet | None = None) -> list[str]:
        """The readings' flags as lines (the plan was made with them)."""
        return [f"{f.battery}: {f.text}" for f in self.reading_flags]

    def summary(self) -> str:
        from collections import Counter

        v = self.visits
        counts = Counter(self.chemistry)
        intake = int((np.isin(v.act, CHARGES) & (v.kind == Kind.INTAKE)).sum())
        lines = [f"{self.site_file.site.name}: {len(self.rows)} batteries, "
                 f"{self.dates[0].isoformat()} to {self.dates[-1].isoformat()} "
                 f"({len(self.dates)} d), rounds every {self.round_step} d",
                 "  by chemistry: " + ", ".join(f"{k} {n}" for k, n in sorted(counts.items())),
                 f"  on a maintainer: {int(self.on_maintainer.sum())}",
                 f"  intake charges: {intake}, "
                 f"{self.intake_charger_hours():.1f} charger-hours in all",
                 f"  top-ups across the season: {self.top_up_count()}",
                 f"  rounds with a freeze risk: {int(v.freeze.sum())}"]
        first = self.first_freeze_day[self.first_freeze_day >= 0]
        lines.append("  first day a battery freezes under this plan: " + (
            self.dates[int(first.min())].isoformat() if first.size else "none"))
        waits = int((v.act == Act.WAIT).sum())
        if waits:
            lines.append(f"  charges waiting for a bay inside their window: {waits}")
        for note in self.notes[:SUMMARY_LINES]:
            lines.append(f"  ! {self.ids[note.battery]}: {note.text}")
        if len(self.notes) > SUMMARY_LINES:
            lines.append(f"  ! and {len(self.notes) - SUMMARY_LINES} more notes: see "
                         "procedure.md")
        for flag in self.reading_flags[:SUMMARY_LINES]:
            lines.append(f"  reading: {flag.battery}: {flag.text}")
        if len(self.reading_flags) > SUMMARY_LINES:
            lines.append(f"  reading: and {len(self.reading_flags) - SUMMARY_LINES} more: see "
                         "procedure.md")
        from chargeplan.cautions import caution_groups, groups_text

        profiles = [self.fleet.profiles[i] for i in np.unique(self.profile_first).tolist()]
        return "\n".join(lines) + "\n\n" + groups_text(caution_groups(profiles))


def _series(dates: list[dt.date], monthly: Any, periods: Any) -> tuple[np.ndarray, np.ndarray]:
    mean = np.full(len(dates), np.nan)
    low = np.full(len(dates), np.nan)
    if monthly is not None:
        by_month = {m.month: m for m in monthly}
        for d, day in enumerate(dates):
            if (m := by_month.get(day.month)) is not None:
                mean[d], low[d] = m.mean_c, m.min_c
        return mean, low
    for period in periods:
        for d, day in enumerate(dates):
            if period.start <= day <= period.end:
                mean[d], low[d] = period.mean_c, period.min_c
    return mean, low


def _temperatures(site_file: SiteFile, dates: list[dt.date],
                  shown: str) -> tuple[np.ndarray, np.ndarray]:
    """Each bay's daily mean and minimum (degC), shape (bays, days)."""
    site_mean, site_min = _series(dates, site_file.monthly, site_file.periods)
    if np.isnan(site_mean).any():
        first = dates[int(np.argmax(np.isnan(site_mean)))]
        raise InputError(f"no temperature for {first.isoformat()}", file=shown,
                         field="monthly" if site_file.monthly is not None else "periods",
                         fix="give a temperature for every month (or period) of the season")
    means, mins = [], []
    for bay in site_file.bays:
        if bay.monthly is not None:
            mean, low = _series(dates, bay.monthly, None)
            if np.isnan(mean).any():
                first = dates[int(np.argmax(np.isnan(mean)))]
                raise InputError(f"bay {bay.name} has no temperature for {first:%B %Y}",
                                 file=shown, field="bays.monthly",
                                 fix="give all the season's months")
        else:
            offset = bay.offset_k or 0.0
            mean, low = site_mean + offset, site_min + offset
        means.append(mean)
        mins.append(low)
    return np.vstack(means), np.vstack(mins)


def _refused(fleet: Fleet, profile_set: ProfileSet) -> list[tuple[int, str]]:
    """Batteries whose intake voltage the core rules refuse (reversed, dead or shorted cell,
    over-discharged lithium): they are not to be stored as they are."""
    refused = []
    for i, volts in enumerate(fleet.rows.column("rest_voltage_v")):
        if volts is None:
            continue
        why = voltage_refusal(fleet, i, volts, profile_set)
        if why is not None:
            refused.append((i, why))
    return refused


def voltage_refusal(fleet: Fleet, i: int, rest_voltage_v: float,
                    profile_set: ProfileSet) -> str | None:
    """Why the core rules (CP103, through the engine's own derive_state) refuse a rest
    voltage for battery ``i``, or None: the one check of an intake's voltage and of a
    reading's, so a reading is judged as a fresh intake would be."""
    from chargeplan.engine.planner import derive_state
    from chargeplan.errors import PlanRefused
    from chargeplan.model.battery import State

    nominal_v = fleet.rows.column("nominal_voltage_v")[i]  # (columns: no row model is made)
    data = battery_file(fleet.chemistry[i], int(fleet.cells[i]), float(fleet.capacity_ah[i]),
                        20.0, name=fleet.rows.column("id")[i])
    data = data.model_copy(update={"state": State.model_construct(
        rest_voltage_v=rest_voltage_v)})
    if nominal_v is not None:
        data = data.model_copy(update={"battery": data.battery.model_copy(
            update={"nominal_voltage_v": nominal_v})})
    try:
        derive_state(data, profiles=profile_set)
    except PlanRefused as refusal:
        return refusal.reason
    return None


def _maintainer_policy(site_file: SiteFile, fleet: Fleet, bay_mean: np.ndarray,
                       bay_min: np.ndarray, refused: np.ndarray) -> np.ndarray:
    """Lead-acid on a maintainer where the bay has mains and stays inside its charge window
    all season. Lithium never: it is not floated (rule CP206; BU-702)."""
    mains = np.array([b.mains for b in site_file.bays])[fleet.bay]
    in_window = ((bay_min.min(axis=1)[fleet.bay] >= fleet.charge_min_c)
                 & (bay_mean.max(axis=1)[fleet.bay] <= fleet.charge_max_c))
    return ((site_file.site.policy == "maintainer") & mains & in_window & fleet.lead
            & ~refused)


def _reading_events(readings: list[Reading], fleet: Fleet, dates: list[dt.date],
                    profile_set: ProfileSet, bay_mean: np.ndarray, on_maintainer: np.ndarray,
                    refused: np.ndarray) -> tuple[list[tuple[int, int, float]],
                                                  list[ReadingFlag]]:
    """Each reading as an intake on its date (day, battery, state of charge), and the flags
    staff must see: readings the plan cannot use, and the sheet's failed checks."""
    index = {battery: i for i, battery in enumerate(fleet.rows.column("id"))} if readings \
        else {}
    events, flags = [], []
    for r in readings:
        i, day = index.get(r.battery), (r.date - dates[0]).days
        if i is None:
            flags.append(ReadingFlag("unknown-battery", r.battery, r.date,
                                     "not in the inventory; check the id"))
            continue
        if not fleet.arrive[i] <= day <= fleet.depart[i]:
            flags.append(ReadingFlag("outside-season", r.battery, r.date,
                                     f"reading on {r.date.isoformat()} is outside its stay"))
            continue
        flags.extend(_check_flags(r, fleet, i))
        if refused[i] and r.measured:
            flags.append(ReadingFlag(
                "set-aside", r.battery, r.date, f"reading on {r.date.isoformat()} is not used: "
                "the battery was set aside at intake (see its note); if its test found it "
                "sound, enter it again with this reading as its intake"))
            continue
        found: list[tuple[float, str]] = []  # (state of charge, what it was read from)
        if r.rest_voltage_v is not None:
            found.extend(_from_voltage(r, fleet, i, profile_set, bool(on_maintainer[i]), flags))
        if r.state_of_charge_pct is not None:
            found.append((r.state_of_charge_pct, "the display"))
        if r.specific_gravity is not None:
            found.extend(_from_gravity(r, fleet, i, float(bay_mean[fleet.bay[i], day]), flags))
        if not found:
            continue
        soc, what = min(found)
        if max(found)[0] - soc > READINGS_DISAGREE_POINTS:
            each = ", ".join(f"{w} {s:.0f} %" for s, w in found)
            flags.append(ReadingFlag(
                "disagree", r.battery, r.date, f"the readings on {r.date.isoformat()} disagree "
                f"({each}): the plan takes the lower, {what}; a stratified electrolyte, a bad "
                "cell or a misread meter (check each cell)"))
        events.append((day, i, soc))
    return events, flags


#: Readings of one battery on one day further apart than this are flagged (percentage
#: points; common practice: a rest voltage and a hydrometer agree within about a tenth).
READINGS_DISAGREE_POINTS = 15.0


def _from_voltage(r: Reading, fleet: Fleet, i: int, profile_set: ProfileSet, maintained: bool,
                  flags: list[ReadingFlag]) -> list[tuple[float, str]]:
    """A rest voltage's state of charge, read off the curve as at intake; none where the core
    rules refuse the voltage (reversed, dead, a slipped decimal point) or it lies on
    LiFePO4's flat curve."""
    assert r.rest_voltage_v is not None
    why = voltage_refusal(fleet, i, r.rest_voltage_v, profile_set)
    if why is not None:
        flags.append(ReadingFlag(
            "implausible", r.battery, r.date, f"{r.rest_voltage_v:.2f} V on "
            f"{r.date.isoformat()} is not used: {why}. Measure again (meter on DC volts, red "
            "to +" + (", the battery disconnected from its maintainer for at least 4 h"
                      if maintained else ", no charger or load for at least 4 h")
            + "); if it reads the same, take it out of storage and have it tested"))
        return []
    table = profile_set.get(fleet.chemistry[i]).rest_voltage.table
    soc = float(soc_from_ocv(r.rest_voltage_v / fleet.cells[i], table))
    if flat_reading(fleet.profiles[i], soc):
        flags.append(ReadingFlag(
            "flat-curve", r.battery, r.date, f"{r.rest_voltage_v:.2f} V on "
            f"{r.date.isoformat()} is not usable for state of charge (LiFePO4's flat "
            "curve); the plan keeps its forecast unless the pack's display is given "
            "(state_of_charge)"))
        return []
    return [(soc, "the rest voltage")]


def _from_gravity(r: Reading, fleet: Fleet, i: int, temperature_c: float,
                  flags: list[ReadingFlag]) -> list[tuple[float, str]]:
    """A hydrometer reading's state of charge, corrected to the bay's mean temperature that
    day (TM 5-4210-230-14&P-1; BCI table), for vented (flooded) cells only."""
    from chargeplan.physics.electrolyte import (
        specific_gravity_corrected,
        state_of_charge_from_gravity_bci,
    )

    assert r.specific_gravity is not None
    profile = fleet.profiles[i]
    if not profile.vented:
        flags.append(ReadingFlag(
            "sealed", r.battery, r.date, f"specific gravity {r.specific_gravity:.3f} on "
            f"{r.date.isoformat()} is not used: {profile.name} cells are sealed and cannot be "
            "read with a hydrometer; give the rest voltage"))
        return []
    corrected = float(specific_gravity_corrected(r.specific_gravity, temperature_c))
    return [(float(state_of_charge_from_gravity_bci(corrected)), "the specific gravity")]


def _check_flags(r: Reading, fleet: Fleet, i: int) -> list[ReadingFlag]:
    """The round sheet's checks that failed, and staff's notes, for the procedure."""
    on = r.date.isoformat()
    out = []
    if r.terminals_case_ok is False:
        out.append(ReadingFlag(
            "damaged", r.battery, r.date, f"terminals or case not OK on {on}: do not charge it "
            "until it is checked; a cracked, bulging or leaking case takes it out of service "
            "(clean and tighten corroded terminals)"))
    if r.electrolyte_ok is False:
        out.append(ReadingFlag(
            "electrolyte", r.battery, r.date,
            f"electrolyte low on {on}: before charging add distilled water just to cover the "
            "plates, and top up to the level mark after the charge" if fleet.profiles[i].vented
            else f"electrolyte_level_ok: no on {on}, but its cells are sealed: a sealed "
            "battery that leaks is taken out of service"))
    if r.returned_to_bay is False:
        out.append(ReadingFlag("not-returned", r.battery, r.date,
                               f"not back in its bay on {on}: find it and return it"))
    if r.notes:
        out.append(ReadingFlag("note", r.battery, r.date, f"staff note on {on}: {r.notes}"))
    return out


def _reading_results(events: list[tuple[int, int, float]], plan: StoragePlan) -> None:
    """Each reading against the forecast it replaces."""
    for day, i, soc in events:
        before = plan.soc_daily[i, day - 1] if day > fleet_first(plan, i) else np.nan
        battery, date = plan.ids[i], plan.dates[day]
        if np.isfinite(before) and soc < before - FAST_LOSS_POINTS:
            plan.reading_flags.append(ReadingFlag(
                "fast-loss", battery, date, f"{soc:.0f} % measured on {date.isoformat()}, "
                f"{before:.0f} % predicted: it discharges faster than its chemistry should (a "
                "failing cell or a hidden load); test it. The plan restarts from the reading"))
        else:
            plan.reading_flags.append(ReadingFlag(
                "reset", battery, date, f"{soc:.0f} % measured on {date.isoformat()}"
                + (f" ({before:.0f} % predicted)" if np.isfinite(before) else "")
                + "; the plan restarts from the reading"))


def fleet_first(plan: StoragePlan, i: int) -> int:
    return int(plan.fleet.arrive[i])


def _season(site_file: SiteFile, fleet: Fleet, bay_mean: np.ndarray, bay_min: np.ndarray,
            on_maintainer: np.ndarray, refused: np.ndarray,
            events: list[tuple[int, int, float]]) -> Season:
    site = site_file.site
    kind_of = fleet.profile_index  # the profiles, numbered in order of appearance
    _found, firsts = np.unique(kind_of, return_index=True)
    first = [fleet.profiles[int(i)] for i in firsts]
    names = [b.name for b in site_file.bays]
    return Season(
        lead=fleet.lead, lfp=fleet.lfp, bay=fleet.bay, kind_of=kind_of,
        rate=np.array([p.storage.self_discharge.value for p in first]),
        reference_c=np.array([p.storage.reference.value for p in first]),
        doubling_k=np.array([p.storage.doubling.value for p in first]),
        arrive=fleet.arrive, depart=fleet.depart, intake_soc=fleet.intake_soc,
        target=fleet.storage_soc, threshold=fleet.threshold, draw_pct_day=fleet.draw_pct_day,
        connected=fleet.connected, may_disconnect=fleet.may_disconnect,
        charge_min_c=fleet.charge_min_c,
        charge_max_c=fleet.charge_max_c, on_maintainer=on_maintainer, refused=refused,
        bay_mean=bay_mean, bay_min=bay_min, mains=np.array([b.mains for b in site_file.bays]),
        warm=names.index(site.warm_room) if site.warm_room else -1,
        round_days=list(range(0, site.days, site.round_days)), readings=events,
        band=LITHIUM_STORAGE_BAND_PCT)


def plan_storage(
    site_file: SiteFile,
    inventory: Sequence[InventoryRow] | None = None,
    *,
    profiles: ProfileSet | None = None,
    inventory_file: str = "inventory",
    site_path: str = "site file",
    readings: list[Reading] | None = None,
    plan_top_ups: bool = True,
) -> StoragePlan:
    """Plan the season for every battery (see the module docstring)."""
    profile_set = profiles or ProfileSet(use_environment=False)
    fields = list(InventoryRow.model_fields)
    rows = Table.joined([Table.of_rows(site_file.inventory or [], fields),
                         Table.of_rows(inventory or [], fields)])
    if not rows:
        raise InputError("no batteries to store", file=site_path, field="inventory",
                         fix="list them under inventory: or give --inventory batteries.csv")
    days = site_file.site.days
    if len(rows) * days * 4 * 6 > MEMORY_LIMIT_BYTES:
        raise InputError(
            f"{len(rows)} batteries over {days} days would need about "
            f"{len(rows) * days * 24 / 1024**3:.1f} GB", file=inventory_file, field="inventory",
            fix="split the inventory into parts of about 500,000 batteries and plan each")
    dates = [site_file.site.start + dt.timedelta(days=d) for d in range(days)]
    fleet = resolve_fleet(site_file, rows, profile_set, inventory_file)
    bay_mean, bay_min = _temperatures(site_file, dates, site_path)
    refusals = _refused(fleet, profile_set)
    refused = np.zeros(fleet.n, dtype=bool)
    refused[[i for i, _ in refusals]] = True
    on_maintainer = _maintainer_policy(site_file, fleet, bay_mean, bay_min, refused)
    events, flags = _reading_events(readings or [], fleet, dates, profile_set, bay_mean,
                                   on_maintainer, refused)
    season = _season(site_file, fleet, bay_mean, bay_min, on_maintainer, refused, events)
    result = run_season(season)
    plan = StoragePlan(site_file, fleet, dates, season.round_days,
                       [b.name for b in site_file.bays], bay_mean, bay_min, on_maintainer,
                       refused, result.visits, result.soc_daily, result.bay_daily,
                       reading_flags=flags)
    _reading_results(events, plan)
    plan.notes.extend(Note(i, "refused", f"do not store it as it is: {why}") for i, why in refusals)
    _notes(plan)
    if plan_top_ups:
        _settings(plan, profile_set)
    return plan


def _notes(plan: StoragePlan) -> None:
    """What staff must know about single batteries, each with its code."""
    f, v = plan.fleet, plan.visits
    low = np.flatnonzero(f.lead & (np.nan_to_num(f.intake_soc, nan=100.0) < 50) & ~plan.refused)
    plan.notes.extend(map(Note, low.tolist(), repeat("lead-acid-low"), _texts_of(
        lambda soc: f"lead-acid at {soc} % at intake: after its charge, check it holds its "
        "charge before storing it", [f"{soc:.0f}" for soc in f.intake_soc[low].tolist()])))
    draws, loads = f.rows.column("parasitic_draw_a"), f.rows.column("loads")
    drawing = np.flatnonzero(f.connected & (f.draw_pct_day > 0)).tolist()

    def load_text(given: tuple[float, str | None]) -> str:
        draw = f"its {given[0] * 1000:.0f} mA load"
        return (f"{draw} stays connected (loads: connected): it drains the battery"
                if given[1] == "connected" else
                f"{draw} is left connected (loads: not given): it drains the battery; the plan "
                "disconnects it where it would freeze the battery. Write loads: disconnected if "
                "it may come off at intake, loads: connected if it must stay on")

    plan.notes.extend(map(Note, drawing, repeat("load-connected"), _texts_of(
        load_text, [(draws[i], loads[i]) for i in drawing])))
    _fast_losers(plan)
    waits = v.act == Act.WAIT
    since = np.full(f.n, len(plan.dates))
    np.minimum.at(since, v.battery[waits], v.day[waits])
    waiting = np.flatnonzero(since < len(plan.dates))
    lowest = np.nanmin(plan.soc_daily[waiting], axis=1) if waiting.size else []
    warmer = plan.warmer_room_words() if waiting.size else ""
    plan.notes.extend(map(Note, waiting.tolist(), repeat("no-charge-window"), _texts_of(
        lambda due: f"a charge is due from {plan.dates[due[0]].isoformat()} but no bay with "
        f"mains is inside its charge window; it falls to {due[1]} % this season: " + warmer,
        [(int(day), f"{low:.0f}") for day, low in zip(since[waiting].tolist(),
                                                      np.asarray(lowest).tolist(),
                                                      strict=True)])))
    coldest = plan.bay_min.min(axis=1)[f.bay]
    cold = np.flatnonzero(~f.lead & (coldest < LITHIUM_DISCHARGE_MIN_C))
    plan.notes.extend(map(Note, cold.tolist(), repeat("lithium-cold"), _texts_of(
        lambda low: f"its bay falls to {low:.0f} degC, below lithium's "
        f"{LITHIUM_DISCHARGE_MIN_C:.0f} degC discharge limit (BU-410 Table 1): store it where "
        "it stays warmer (the maker's datasheet gives its own storage range), and never "
        "charge or discharge it in that cold", coldest[cold].tolist())))
    for i in np.flatnonzero(plan.would_freeze):
        plan.notes.append(Note(int(i), "freezes-full", f"its bay falls to "
                               f"{plan.bay_min[f.bay[i]].min():.0f} degC, at or below the "
                               "freezing point of even a full battery: store it indoors"))


def _texts_of(text: Callable[[Any], str], values: list[Any]) -> list[str]:
    """``text`` of each value, made once for each distinct value (a note's text for a
    hundred thousand batteries is a few texts)."""
    made: dict[Any, str] = {}
    return [made[value] if value in made else made.setdefault(value, text(value))
            for value in values]


def _fast_losers(plan: StoragePlan) -> None:
    """Batteries that fall below their threshold within one round even when charged full."""
    f, v = plan.fleet, plan.visits
    order = np.argsort(v.battery, kind="stable")  # the visits are by day: now by battery, day
    b, before, after = v.battery[order], v.soc_before[order], v.soc_after[order]
    kind = v.kind[order]
    same = b[1:] == b[:-1]
    fell = same & (after[:-1] >= f.storage_soc[b[:-1]] - 0.5) & (kind[1:] == Kind.ROUND) & (
        before[1:] < f.threshold[b[1:]])
    lowest = np.full(f.n, np.inf)
    np.minimum.at(lowest, b[1:][fell], before[1:][fell])
    for i in np.flatnonzero(np.isfinite(lowest)):
        low = float(lowest[i])
        remedies = ("disconnect its load, put it on a maintainer, or round more often"
                    if f.lead[i] else "disconnect its load or round more often (lithium is "
                    "never put on a maintainer, rule CP206); an over-discharged lithium pack "
                    "is checked cell by cell before it is charged (BU-808a)")
        plan.notes.append(Note(int(i), "loses-fast", f"falls to {low:.0f} % between rounds even "
                               f"when charged full: {remedies}"))


def _settings(plan: StoragePlan, profile_set: ProfileSet) -> None:
    """The charger settings of every charge and the maintainer's hold of every check."""
    f, v = plan.fleet, plan.visits
    charge = np.flatnonzero(np.isin(v.act, CHARGES))
    # per charge: the bay's mean that day, and the charge before it in 5 % steps (-1 unknown)
    temp = np.round(plan.bay_mean[v.where[charge], v.day[charge]]).astype(int)
    before = v.soc_before[charge]
    soc = np.where(np.isnan(before), -1, before // 5 * 5).astype(int)
    kind = _kind_codes(f)
    storage = v.act[charge] == Act.TO_STORAGE
    codes = _pack(kind[v.battery[charge]], soc, temp, storage.astype(int))
    unique, which = np.unique(codes, return_inverse=True)
    first = _firsts(codes, unique)  # positions in charge
    keys = [(f.chemistry[b], int(f.cells[b]), int(soc[k]), int(temp[k]), bool(storage[k]))
            for b, k in zip(v.battery[charge[first]].tolist(), first.tolist(), strict=True)]
    plan.settings = charge_settings(keys, profile_set)
    plan.visit_setting = np.full(len(v), -1)
    plan.visit_setting[charge] = which
    # a battery on a maintainer is held from each visit (a check, or its intake charge) to
    # the next, at the warmest daily mean of its bay over that stretch (compensation lowers
    # the voltage as it warms, BU-410: set for the warmest, it never runs high)
    held = np.flatnonzero(plan.on_maintainer[v.battery] & np.isin(v.act, (Act.MAINTAINER,
                                                                       Act.TOP_UP)))
    stretch = _pack(v.bay[held], v.day[held], v.end_day[held])
    stretches, at = np.unique(stretch, return_inverse=True)
    first_of = held[_firsts(stretch, stretches)]
    warmest = np.array([plan.bay_mean[int(v.bay[k]), int(v.day[k]):int(v.end_day[k]) + 1].max()
                        for k in first_of.tolist()])
    plan.visit_hold_c = np.full(len(v), np.nan)
    plan.visit_hold_c[held] = warmest[at.ravel()] if held.size else []
    held_c = np.zeros(len(v), dtype=int)  # the hold's temperature, whole degrees
    held_c[held] = np.round(plan.visit_hold_c[held])
    hcodes = _pack(kind[v.battery[held]], held_c[held])
    hunique, hwhich = np.unique(hcodes, return_inverse=True)
    hkeys = [(f.chemistry[int(v.battery[k])], int(f.cells[int(v.battery[k])]), int(held_c[k]))
             for k in held[_firsts(hcodes, hunique)]]
    holds = np.array(maintainer_holds(hkeys, profile_set) or [np.nan])
    plan.visit_hold_v = np.full(len(v), np.nan)
    plan.visit_hold_v[held] = holds[hwhich] if held.size else []


def _kind_codes(f: Fleet) -> np.ndarray:
    """One integer per distinct (chemistry, cells) of the fleet (a chemistry is a profile:
    its number is the fleet's profile_index)."""
    pair = f.profile_index.astype(np.int64) * (int(f.cells.max(initial=0)) + 1) + f.cells
    _pairs, first, code = np.unique(pair, return_index=True, return_inverse=True)
    rank = np.empty(len(first), dtype=np.int64)
    rank[np.argsort(first)] = np.arange(len(first))  # numbered in order of appearance
    return rank[code.ravel()]


def _pack(*columns: np.ndarray) -> np.ndarray:
    """Small integer columns packed into one int64 key per row (each column offset to >= 0)."""
    code = np.zeros(len(columns[0]), dtype=np.int64)
    for column in columns:
        c = np.asarray(column, dtype=np.int64) + 1000
        code = code * 4096 + c
    return code


def _firsts(codes: np.ndarray, unique: np.ndarray) -> np.ndarray:
    """For each unique code, the position of its first row."""
    order = np.argsort(codes, kind="stable")
    return order[np.searchsorted(codes[order], unique)]
