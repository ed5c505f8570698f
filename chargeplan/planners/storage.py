"""The storage planner: winter procedures, top-up dates and freeze checks for an inventory.

Every battery's state of charge is followed day by day as numpy arrays (batteries x days):
self-discharge from its profile, doubled per 10 K of warming (BU-802b), at its bay's mean
temperature, plus any parasitic draw. At each staff round the planner looks ahead to the
next round and tops up a battery that would fall below its threshold, or, for lead-acid,
whose electrolyte would freeze on a coming cold day (US Army TM 5-1185 Table III). Lithium is
never charged in a bay below 0 degC: it goes to the warm room, or waits for a warmer round.
Top-ups are charge plans from the core engine, timed by the physics.
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from chargeplan.csvfile import InputErrors, csv_reader, csv_rows, read_rows
from chargeplan.errors import InputError
from chargeplan.loading import read_mapping, validate
from chargeplan.model.storage import InventoryRow, SiteFile
from chargeplan.physics.electrolyte import freezing_point_tm5_1185, specific_gravity_bci
from chargeplan.physics.ocv import soc_from_ocv
from chargeplan.physics.self_discharge import self_discharge_rate
from chargeplan.profiles import ProfileSet

__all__ = ["FREEZE_MARGIN_K", "StoragePlan", "load_site", "plan_storage", "read_inventory"]

#: A lead-acid battery is topped up when a coming day's minimum is within this of its
#: electrolyte's freezing point (common practice: keep a margin).
FREEZE_MARGIN_K = 3.0
#: Percentage points below the prediction at which a reading is flagged (common practice).
FAST_LOSS_POINTS = 10.0
#: Rows per battery and bytes per cell of the day arrays the planner may use at most.
MEMORY_LIMIT_BYTES = 6 * 1024**3


def load_site(path: str | Path) -> SiteFile:
    return validate(SiteFile, read_mapping(path, what="storage site"), file=str(path))


def read_inventory(path: str | Path) -> list[InventoryRow]:
    """The inventory CSV; every bad row is reported (with its line) before anything is done."""
    return read_rows(path, InventoryRow)


READING_COLUMNS = ("date", "battery", "rest_voltage")


def read_readings(path: str | Path) -> list[tuple[dt.date, str, float]]:
    """The readings log: CSV columns date (YYYY-MM-DD), battery, rest_voltage ('12.41 V')."""
    from chargeplan.units import parse_quantity

    shown, reader = csv_reader(path)
    if reader.fieldnames is None:
        raise InputError("is empty", file=shown,
                         fix="write the header date,battery,rest_voltage, then one row a reading")
    missing = [c for c in READING_COLUMNS if c not in [f.strip() for f in reader.fieldnames]]
    if missing:
        raise InputError(f"has no {', '.join(missing)} column", file=shown, field=missing[0],
                         fix="write the header date,battery,rest_voltage")
    readings: list[tuple[dt.date, str, float]] = []
    errors: list[str] = []
    for line, data in csv_rows(reader, shown, errors):
        where = f"{shown}: line {line}"
        try:
            date = dt.date.fromisoformat(data.get("date", ""))
        except ValueError:
            errors.append(f"{where}: date: '{data.get('date', '')}' is not a date; write it as "
                          "YYYY-MM-DD, e.g. 2026-12-01")
            continue
        if not data.get("battery"):
            errors.append(f"{where}: battery: is empty; give the battery id")
            continue
        try:
            volts = parse_quantity(data.get("rest_voltage", ""), "voltage")
        except ValueError as error:
            errors.append(f"{where}: rest_voltage: {error}")
            continue
        readings.append((date, data["battery"], volts))
    if errors:
        raise InputErrors(errors)
    return readings


def _temperatures(site_file: SiteFile, dates: list[dt.date]) -> tuple[np.ndarray, np.ndarray]:
    """Each bay's daily mean and minimum (°C), shape (bays, days)."""

    def series(monthly, periods) -> tuple[np.ndarray, np.ndarray]:
        mean = np.full(len(dates), np.nan)
        low = np.full(len(dates), np.nan)
        if monthly is not None:
            by_month = {m.month: m for m in monthly}
            for d, day in enumerate(dates):
                m = by_month.get(day.month)
                if m is not None:
                    mean[d], low[d] = m.mean_c, m.min_c
        else:
            for period in periods:
                for d, day in enumerate(dates):
                    if period.start <= day <= period.end:
                        mean[d], low[d] = period.mean_c, period.min_c
        return mean, low

    site_mean, site_min = series(site_file.monthly, site_file.periods)
    if np.isnan(site_mean).any():
        first = dates[int(np.argmax(np.isnan(site_mean)))]
        raise InputError(f"no temperature for {first.isoformat()}", field="monthly",
                         fix="give a temperature for every month (or period) of the season")
    means, mins = [], []
    for bay in site_file.bays:
        if bay.monthly is not None:
            mean, low = series(bay.monthly, None)
            if np.isnan(mean).any():
                raise InputError(f"bay {bay.name} has no temperature for some months",
                                 field="bays.monthly", fix="give all the season's months")
        else:
            offset = bay.offset_k or 0.0
            mean, low = site_mean + offset, site_min + offset
        means.append(mean)
        mins.append(low)
    return np.vstack(means), np.vstack(mins)


@dataclass
class TopUp:
    battery: int
    day: int
    soc_before: float
    where: str  # the bay it is charged in
    plan: str = ""  # the charge plan, in one sentence, with its time


@dataclass
class StoragePlan:
    site_file: SiteFile
    rows: list[InventoryRow]
    dates: list[dt.date]
    round_days: list[int]
    chemistry: list[str]
    family: np.ndarray
    cells: np.ndarray
    start_soc: np.ndarray
    target_soc: np.ndarray
    threshold: np.ndarray
    on_maintainer: np.ndarray
    soc_at_rounds: np.ndarray  # (batteries, rounds), before any top-up that round
    top_ups: list[TopUp]
    first_freeze_day: np.ndarray  # day index, -1 for none (under the plan)
    would_freeze: np.ndarray  # bool: freezes even when full
    postponed: list[tuple[int, int]]  # (battery, day) lithium top-ups waiting for 0 degC
    notes: list[tuple[int, str]] = field(default_factory=list)  # (battery, why)
    bay_min: np.ndarray | None = None
    bay_index: np.ndarray | None = None
    soc_daily: np.ndarray | None = None  # (batteries, days), at the end of each day
    maintainer: dict[int, str] = field(default_factory=dict)  # battery -> its hold setting

    def compare_readings(self, readings: list[tuple[dt.date, str, float]],
                         profiles: ProfileSet | None = None) -> list[str]:
        """Flag batteries whose measured rest voltage says they discharge much faster than
        predicted (a failing cell or a hidden load): more than FAST_LOSS_POINTS below."""
        profile_set = profiles or ProfileSet(use_environment=False)
        index = {row.id: i for i, row in enumerate(self.rows)}
        flags = []
        for date, battery, volts in readings:
            i = index.get(battery)
            if i is None or self.soc_daily is None:
                flags.append(f"{battery}: not in the inventory")
                continue
            day = (date - self.dates[0]).days
            if not 0 <= day < len(self.dates):
                flags.append(f"{battery}: reading on {date.isoformat()} is outside the season")
                continue
            table = profile_set.get(self.chemistry[i]).rest_voltage.table
            measured = float(soc_from_ocv(volts / self.cells[i], table))
            topped = [t for t in self.top_ups if t.battery == i and t.day == day]
            # on a top-up day, the reading is taken before the top-up
            predicted = topped[0].soc_before if topped else float(self.soc_daily[i, day])
            if profile_set.get(self.chemistry[i]).rest_voltage.in_flat_band(measured, predicted):
                continue  # LiFePO4's flat curve: a rest voltage cannot tell 30 % from 80 %
            if measured < predicted - FAST_LOSS_POINTS:
                flags.append(f"{battery}: {measured:.0f} % measured on {date.isoformat()}, "
                             f"{predicted:.0f} % predicted: it discharges faster than its "
                             "chemistry should (a failing cell or a hidden load); test it")
        return flags

    def summary(self) -> str:
        from collections import Counter

        counts = Counter(self.chemistry)
        lines = [f"{self.site_file.site.name}: {len(self.rows)} batteries, "
                 f"{self.dates[0].isoformat()} to {self.dates[-1].isoformat()} "
                 f"({len(self.dates)} d), rounds every {len(self.dates) and self.round_step} d"]
        lines.append("  by chemistry: " + ", ".join(f"{k} {v}" for k, v in sorted(counts.items())))
        lines.append(f"  on a maintainer: {int(self.on_maintainer.sum())}")
        lines.append(f"  top-ups across the season: {len(self.top_ups)}")
        first = self.first_freeze_day[self.first_freeze_day >= 0]
        lines.append("  first freeze-risk date: " + (self.dates[int(first.min())].isoformat()
                                                     if first.size else "none under this plan"))
        if self.postponed:
            lines.append(f"  lithium top-ups waiting for a bay above 0 degC: {len(self.postponed)}")
        for i, why in self.notes:
            lines.append(f"  ! {self.rows[i].id}: {why}")
        return "\n".join(lines) + "\n"

    @property
    def round_step(self) -> int:
        return int(self.site_file.site.round_interval_s // 86400)


def _damaged(rows: list[InventoryRow], profiles_of: list[Any], profile_set: ProfileSet,
             notes: list[tuple[int, str]]) -> list[int]:
    """Batteries whose intake voltage the core rules refuse (reversed, dead or shorted cell,
    wrong cell count, over-discharged lithium): they are not to be stored as they are."""
    from chargeplan.engine.planner import derive_state
    from chargeplan.errors import PlanRefused
    from chargeplan.model.battery import BatteryFile

    refused = []
    for i, row in enumerate(rows):
        if row.rest_voltage_v is None:
            continue
        battery: dict[str, Any] = {"name": row.id, "chemistry": row.chemistry,
                                   "capacity": f"{row.capacity_ah} Ah"}
        if row.cells_in_series is not None:
            battery["cells_in_series"] = row.cells_in_series
        if row.nominal_voltage_v is not None:
            battery["nominal_voltage"] = f"{row.nominal_voltage_v} V"
        data = {"battery": battery, "state": {"rest_voltage": f"{row.rest_voltage_v} V"},
                "conditions": {"battery_temperature": "20 degC"}}
        try:
            derive_state(BatteryFile.model_validate(data), profiles=profile_set)
        except PlanRefused as refusal:
            refused.append(i)
            notes.append((i, f"do not store it as it is: {refusal.reason}"))
    return refused


def _cells(row: InventoryRow, profile) -> int | None:
    from chargeplan.engine.rules.derive import NOMINAL_TOLERANCE, cell_counts

    if row.cells_in_series is not None:
        return row.cells_in_series
    assert row.nominal_voltage_v is not None
    fits = cell_counts(row.nominal_voltage_v, profile.nominal_cell_voltage.value,
                       NOMINAL_TOLERANCE[profile.family])
    return fits[0] if len(fits) == 1 else None


def plan_storage(
    site_file: SiteFile,
    inventory: list[InventoryRow] | None = None,
    *,
    profiles: ProfileSet | None = None,
    inventory_file: str = "inventory",
    plan_top_ups: bool = True,
) -> StoragePlan:
    """Plan the season for every battery (see the module docstring)."""
    profile_set = profiles or ProfileSet(use_environment=False)
    rows = list(site_file.inventory or []) + list(inventory or [])
    if not rows:
        raise InputError("no batteries to store", field="inventory",
                         fix="list them under inventory: or give --inventory batteries.csv")
    site = site_file.site
    days = site.days
    n = len(rows)
    if n * days * 4 * 6 > MEMORY_LIMIT_BYTES:
        raise InputError(
            f"{n} batteries over {days} days would need about "
            f"{n * days * 24 / 1024**3:.1f} GB", field="inventory",
            fix="split the inventory into parts of about 500,000 batteries and plan each")
    dates = [site.start + dt.timedelta(days=d) for d in range(days)]
    bay_names = [b.name for b in site_file.bays]
    bay_mean, bay_min = _temperatures(site_file, dates)

    # per battery, as arrays
    errors = []
    profiles_of, cells, bay_index = [], np.zeros(n, dtype=int), np.zeros(n, dtype=int)
    for i, row in enumerate(rows):
        where = f"{inventory_file}: battery {row.id}"
        try:
            profile = profile_set.get(row.chemistry, field="chemistry")
        except InputError as error:
            errors.append(f"{where}: chemistry: {error.problem}; {error.fix}")
            continue
        count = _cells(row, profile)
        if count is None:
            errors.append(f"{where}: nominal_voltage: no single cell count fits; give "
                          "cells_in_series")
            continue
        if row.bay not in bay_names:
            errors.append(f"{where}: bay: '{row.bay}' is not a bay of the site; use one of "
                          f"{', '.join(bay_names)}")
            continue
        profiles_of.append(profile)
        cells[i] = count
        bay_index[i] = bay_names.index(row.bay)
    if errors:
        raise InputErrors(errors)
    family = np.array([p.family for p in profiles_of])
    lead = family == "lead_acid"
    cap = np.array([r.capacity_ah for r in rows])
    rate = np.array([p.storage.self_discharge.value for p in profiles_of])  # %/day at reference
    ref = np.array([p.storage.reference.value for p in profiles_of])
    doubling = np.array([p.storage.doubling.value for p in profiles_of])
    draw = np.array([r.parasitic_draw_a or 0.0 for r in rows]) * 24.0 / cap * 100.0  # %/day
    intake = np.zeros(n)
    storage_level = np.full(n, 100.0)
    threshold = np.zeros(n)
    notes: list[tuple[int, str]] = []
    for i, (row, profile) in enumerate(zip(rows, profiles_of, strict=True)):
        table = profile.rest_voltage.table
        if row.state_of_charge_pct is not None:
            intake[i] = row.state_of_charge_pct
        else:
            assert row.rest_voltage_v is not None
            intake[i] = float(soc_from_ocv(row.rest_voltage_v / cells[i], table))
        if profile.family == "lithium":
            storage_level[i] = float(soc_from_ocv(profile.charge.storage_voltage.value, table))
            threshold[i] = site.lithium_top_up_pct or profile.storage.top_up_below.value
        else:
            threshold[i] = site.lead_acid_top_up_pct or profile.storage.top_up_below.value
        if profile.family == "lithium" and intake[i] > storage_level[i] + 15:
            notes.append((i, f"lithium at {intake[i]:.0f} % at intake: discharge it to about "
                             f"{storage_level[i]:.0f} % before storage (BU-702)"))
        if profile.family == "lithium" and intake[i] < 10:
            notes.append((i, "lithium nearly empty at intake: check it before storage; charge "
                             "it to the storage level above 0 degC"))
        if profile.family == "lead_acid" and intake[i] < 50:
            notes.append((i, f"lead-acid at {intake[i]:.0f} % at intake: charge it fully at "
                             "intake and check it holds its charge before storing"))
        if row.parasitic_draw_a:
            notes.append((i, f"a {row.parasitic_draw_a * 1000:.0f} mA load is connected: "
                             "disconnect it, or it drains the battery"))
    # after intake: lead-acid charged full, lithium to its storage level (not above as found)
    start = np.where(lead, 100.0, np.maximum(np.minimum(intake, 100.0), storage_level))
    start = np.where(~lead & (intake > storage_level), intake, start)

    # the charge-temperature window of each battery (its profile's, inside the envelope)
    low_c = np.array([max(p.temperature.charge_min.value, p.envelope.charge_temperature_min.value)
                      for p in profiles_of])
    high_c = np.array([min(p.temperature.charge_max.value, p.envelope.charge_temperature_max.value)
                       for p in profiles_of])
    low_c = np.where(lead, low_c, np.maximum(low_c, 0.0))  # never lithium below 0 degC
    floats = np.array(["float" not in p.envelope.forbidden_stages for p in profiles_of])

    # maintainers: mains, a whole season inside the charge window, lithium only with a lithium
    # maintainer and never a chemistry that must not be floated (NMC)
    bays = site_file.bays
    mains_bay = np.array([b.mains for b in bays])
    mains = mains_bay[bay_index]
    season_min = bay_min.min(axis=1)[bay_index]
    season_max = bay_mean.max(axis=1)[bay_index]
    in_window = (season_min >= low_c) & (season_max <= high_c)
    li_ok = np.array([b.lithium_maintainer for b in bays])[bay_index] & floats
    excluded = np.zeros(n, dtype=bool)
    for i in _damaged(rows, profiles_of, profile_set, notes):
        excluded[i] = True
    on_maintainer = ((site.policy == "maintainer") & mains & in_window & (lead | li_ok)
                     & ~excluded)

    # daily loss, %/day: self-discharge at the bay's mean temperature plus the draw
    loss = self_discharge_rate(rate[:, None], bay_mean[bay_index], ref[:, None],
                               doubling[:, None]) + draw[:, None]
    loss = loss.astype(np.float32)
    step = max(1, int(site.round_interval_s // 86400))
    round_days = list(range(0, days, step))
    soc = start.copy()
    soc_daily = np.zeros((n, days), dtype=np.float32)  # at the end of each day
    soc_rounds = np.zeros((n, len(round_days)), dtype=np.float32)
    first_freeze = np.full(n, -1)
    warm = bay_names.index(site.warm_room) if site.warm_room else None
    top_ups: list[TopUp] = []
    postponed: list[tuple[int, int]] = []
    pending = np.zeros(n, dtype=bool)
    waiting_since = np.full(n, -1)
    flagged = np.zeros(n, dtype=bool)
    cum = np.cumsum(loss, axis=1, dtype=np.float64)
    full_freeze = float(freezing_point_tm5_1185(specific_gravity_bci(100.0)))
    would_freeze = lead & (season_min <= full_freeze)
    target = np.where(lead, 100.0, storage_level)

    def chargeable(bay: np.ndarray | int, d: int, level: np.ndarray) -> np.ndarray:
        """Inside the charge window in that bay today (lead-acid: and not frozen)."""
        ok = (bay_min[bay, d] >= low_c) & (bay_mean[bay, d] <= high_c)
        frozen = bay_min[bay, d] <= freezing_point_tm5_1185(specific_gravity_bci(level))
        return ok & ~(lead & frozen)

    for r, d in enumerate(round_days):
        soc_rounds[:, r] = soc
        end = min(d + step, days)
        before = cum[:, d - 1] if d > 0 else 0.0
        ahead = cum[:, d:end] - (before[:, None] if d > 0 else 0.0)  # loss by each coming day
        predicted = soc[:, None] - ahead
        full = soc >= target - 0.5
        short = ~on_maintainer & ~excluded & (predicted[:, -1] < threshold)
        for i in np.flatnonzero(short & full & ~flagged):
            flagged[i] = True
            notes.append((int(i), f"loses {ahead[i, -1]:.0f} % between rounds even when full: "
                                  "put it on a maintainer, disconnect its load, or round more "
                                  "often"))
        need = short | (pending & ~on_maintainer)
        if lead.any():
            freeze = freezing_point_tm5_1185(specific_gravity_bci(np.clip(predicted, 0, 100)))
            cold = (bay_min[:, d:end][bay_index] <= freeze + FREEZE_MARGIN_K).any(axis=1)
            need |= lead & ~on_maintainer & ~excluded & cold & (soc < 100.0)
        need &= ~full
        # where to charge: its own bay if it has mains and is inside the window, else the
        # warm room; otherwise wait for a later round (and say so)
        here = chargeable(bay_index, d, soc) & mains
        there = (chargeable(warm, d, soc) & mains_bay[warm]) if warm is not None else (
            np.zeros(n, dtype=bool))
        go = need & (here | there)
        wait = need & ~go
        for i in np.flatnonzero(wait):
            postponed.append((int(i), d))
            if waiting_since[i] < 0:
                waiting_since[i] = d
        waiting_since[go] = -1
        pending = wait
        for i in np.flatnonzero(go):
            where = bay_names[bay_index[i]] if here[i] else bay_names[warm]  # type: ignore[index]
            top_ups.append(TopUp(int(i), d, float(soc[i]), where))
        soc = np.where(go, target, soc)
        for day in range(d, end):
            soc = np.where(on_maintainer, soc, np.maximum(soc - loss[:, day], 0.0))
            soc_daily[:, day] = soc
            if lead.any():
                freeze_now = freezing_point_tm5_1185(specific_gravity_bci(soc))
                hit = lead & (bay_min[bay_index, day] <= freeze_now) & (first_freeze < 0)
                first_freeze[hit] = day
    for i in sorted({i for i, _d in postponed}):
        low = float(soc_daily[i].min())
        since = dates[min(d for j, d in postponed if j == i)].isoformat()
        notes.append((int(i), f"a top-up is due from {since} but no bay with mains is inside "
                              f"its charge window; it falls to {low:.0f} % this season: move "
                              "it to a warm room with mains"))
    for i in np.flatnonzero(would_freeze):
        notes.append((int(i), f"its bay falls to {bay_min[bay_index[i]].min():.0f} degC, at "
                              "or below the freezing point of even a full battery: store it "
                              "indoors"))
    plan = StoragePlan(site_file, rows, dates, round_days, [p.id for p in profiles_of], family,
                       cells, start, target, threshold,
                       on_maintainer, soc_rounds, top_ups, first_freeze, would_freeze,
                       postponed, notes, bay_min, bay_index, soc_daily)
    if plan_top_ups and top_ups:
        _plan_top_ups(plan, profile_set, bay_mean, bay_names)
    if plan_top_ups and on_maintainer.any():
        _maintainer_voltages(plan, profile_set, bay_mean)
    return plan


def _maintainer_voltages(plan: StoragePlan, profiles: ProfileSet, bay_mean: np.ndarray) -> None:
    """The maintainer's hold voltage for each battery on one: the core engine's storage hold
    at the bay's mean temperature over the season (compensated for lead-acid)."""
    from chargeplan.engine.planner import plan_charge
    from chargeplan.errors import PlanRefused
    from chargeplan.model.battery import BatteryFile
    from chargeplan.plan import StageKind

    made: dict[tuple[Any, ...], str] = {}
    assert plan.bay_index is not None
    for i in np.flatnonzero(plan.on_maintainer):
        temp = round(float(bay_mean[plan.bay_index[i]].mean()))
        key = (plan.chemistry[i], int(plan.cells[i]), round(plan.rows[i].capacity_ah), temp)
        if key not in made:
            data = {"battery": {"name": "maintainer", "chemistry": key[0],
                                "cells_in_series": key[1], "capacity": f"{max(key[2], 1)} Ah"},
                    "state": {"state_of_charge": "90 %"},
                    "conditions": {"battery_temperature": f"{temp} degC"},
                    "storage": {"duration": f"{len(plan.dates)} d"}}
            try:
                hold = plan_charge(BatteryFile.model_validate(data),
                                   profiles=profiles).stage(StageKind.STORAGE_HOLD)
                made[key] = (f"on a maintainer at {hold.voltage_v:.2f} V (for {temp} degC)"
                             if hold else "on a maintainer")
            except PlanRefused as refusal:
                made[key] = f"not on a maintainer: {refusal.reason}"
        plan.maintainer[int(i)] = made[key]


def _plan_top_ups(plan: StoragePlan, profiles: ProfileSet, bay_mean: np.ndarray,
                  bay_names: list[str]) -> None:
    """A charge plan for each top-up, made once per kind of battery and conditions, and all
    of them estimated together (one simulation of every kind)."""
    from chargeplan.engine.planner import plan_charge
    from chargeplan.errors import PlanRefused
    from chargeplan.estimate import estimate_plans
    from chargeplan.fmt import duration
    from chargeplan.model.battery import BatteryFile

    keys: list[tuple[Any, ...]] = []
    kinds: dict[tuple[Any, ...], int] = {}
    plans, refused = [], {}
    for top_up in plan.top_ups:
        i = top_up.battery
        row = plan.rows[i]
        temp = round(float(bay_mean[bay_names.index(top_up.where), top_up.day]))
        soc = int(top_up.soc_before // 5 * 5)
        key = (plan.chemistry[i], int(plan.cells[i]), round(row.capacity_ah), soc, temp)
        keys.append(key)
        if key in kinds or key in refused:
            continue
        remaining = max(len(plan.dates) - top_up.day, 1)
        data = {
            "battery": {"name": f"top-up {row.id}", "chemistry": key[0],
                        "cells_in_series": key[1], "capacity": f"{max(key[2], 1)} Ah"},
            "state": {"state_of_charge": f"{soc} %"},
            "conditions": {"battery_temperature": f"{temp} degC"},
        }
        if plan.family[top_up.battery] == "lithium":  # to its storage level, then stop
            data["storage"] = {"duration": f"{remaining} d"}
        try:
            plans.append(plan_charge(BatteryFile.model_validate(data), profiles=profiles))
            kinds[key] = len(plans) - 1
        except PlanRefused as refusal:
            refused[key] = f"do not charge here: {refusal.reason}"
    if plans:
        estimate_plans(plans, profiles=profiles)
    text = {}
    for key, index in kinds.items():
        charge = plans[index]
        total = charge.total_estimate()
        timed = [s.kind.label for s in charge.stages
                 if not (s.estimate and s.estimate.per_day)]
        text[key] = (" -> ".join(timed) + (", then disconnect" if len(timed) < len(
            charge.stages) else "") + (f", about {duration(total[0])}" if total else ""))
    for top_up, key in zip(plan.top_ups, keys, strict=True):
        top_up.plan = text.get(key) or refused[key]
