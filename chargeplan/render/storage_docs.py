"""The storage planner's files: schedule.csv, calendar.ics, procedure.md and procedure.html.

Everything here formats values the planner finished (charge settings, hold voltages,
freezing points, margins); nothing is computed again.
"""

from __future__ import annotations

import csv
import io
from functools import lru_cache
from typing import Any

import numpy as np

from chargeplan.csvfile import csv_row
from chargeplan.fmt import duration
from chargeplan.planners.readings import REST_HOURS
from chargeplan.planners.storage import StoragePlan
from chargeplan.planners.storage_kernel import CHARGES, Act, Kind, Remedy
from chargeplan.profiles import ProfileSet

__all__ = ["SCHEDULE_COLUMNS", "action_text", "batteries_csv", "bench_batteries", "calendar_events",
           "calendar_ics", "charge_text", "procedure", "schedule_csv", "storage_files"]

SCHEDULE_COLUMNS = ("date", "battery", "owner", "chemistry", "bay", "predicted_soc_pct",
                    "action", "freeze_risk", "charge_plan", "visit", "soc_after_pct",
                    "charge_in", "charger_setting", "charge_voltage_v", "charge_current_a",
                    "charge_hours", "freeze_point_c", "bay_min_c", "freeze_margin_k",
                    "freeze_action", "reading")

#: Batteries named one by one in a calendar event; the rest are counted.
LISTED = 200

KIND_TEXT = {Kind.INTAKE: "intake", Kind.ROUND: "round", Kind.READING: "reading",
             Kind.RELEASE: "release"}

REMEDY_TEXT = {
    Remedy.NONE: "",
    Remedy.CHARGE_NOW: "charge it now, before the cold",
    Remedy.DISCONNECT: "disconnect its load",
    Remedy.MOVE: "move it to the warm room",
    Remedy.SOONER: "top it up again by {date}",
    Remedy.NOTHING: "no remedy on site: store it indoors",
}

THAW = ("first check it is not frozen: bring it indoors and let it thaw above 0 °C; look for "
        "ice in the cells and a bulging or cracked case; never charge a frozen or bulging "
        "battery")


def charge_text(plan: StoragePlan, k: int) -> str:
    """The charger's settings for visit ``k`` (empty when it needs no charger)."""
    s = plan.setting_of(k)
    if s is None:
        return ""
    if s.refused:
        return f"do not charge here: {s.refused}"
    temp = f" (for {s.temperature_c:.0f} °C)" if s.compensated else ""
    time = f", about {duration(s.duration_s)}" if s.duration_s else ""
    return (f"{s.chemistry_setting} setting, {s.voltage_v:.2f} V{temp}, {s.current_a:.1f} A: "
            + " -> ".join(s.stages) + f", then disconnect{time}")


def _charge_words(plan: StoragePlan, k: int, i: int) -> str:
    v, f = plan.visits, plan.fleet
    act = int(v.act[k])
    if act == Act.TOP_UP:
        return "charge it fully" if v.kind[k] != Kind.ROUND else "top up (charge it fully)"
    if act == Act.COUNT_DOWN:
        return (f"charge it full (the known point), then take out {plan.take_out_ah(i):.1f} Ah "
                f"(counted by the charger or a meter) to its storage level of "
                f"{f.storage_soc[i]:.0f} %; never judge LiFePO4 by its voltage")
    if act == Act.TO_STORAGE:
        return (f"charge it to its storage level ({f.storage_soc[i]:.0f} %, "
                f"{f.storage_voltage_v[i]:.2f} V at rest)")
    return ""


def _where_words(plan: StoragePlan, k: int, i: int) -> str:
    v = plan.visits
    where, home = plan.bay_names[int(v.where[k])], plan.bay_names[int(v.bay[k])]
    if where == home:
        return ""
    lithium = "" if plan.fleet.lead[i] else (", and wait until the battery itself is above "
                                            "0 °C (hours to overnight)")
    return f"move it to {where}{lithium}; after the charge return it to {home}"


def _check_words(plan: StoragePlan, k: int, i: int) -> str:
    v, f = plan.visits, plan.fleet
    act = int(v.act[k])
    if act == Act.MAINTAINER:
        hold = plan.visit_hold_v[k] if plan.visit_hold_v is not None else np.nan
        at = f" holding {hold:.2f} V (for this month's {plan.bay_mean[v.bay[k], v.day[k]]:.0f} °C)"
        return (f"check the maintainer is connected and{at if np.isfinite(hold) else ''}; read "
                "its own display; do not measure the rest voltage while it is connected (to "
                f"measure, disconnect it for at least {REST_HOURS:g} h first)")
    if f.lfp[i]:
        return ("check the pack's own state-of-charge display; its rest voltage cannot tell "
                "20 % from 90 %")
    load = (f"disconnect its load for at least {REST_HOURS:g} h, measure, reconnect it"
            if f.connected[i] and f.draw_pct_day[i] > 0 else
            f"measure the rested voltage (no charger or load for at least {REST_HOURS:g} h)")
    return load


def action_text(plan: StoragePlan, k: int) -> str:
    """What staff do at visit ``k``, in words."""
    v, f = plan.visits, plan.fleet
    i, act = int(v.battery[k]), int(v.act[k])
    parts: list[str] = []
    if v.kind[k] == Kind.READING:
        parts.append("reading taken: the plan restarts from it")
    if act == Act.REFUSED:
        return "do not store it as it is (see the notes); set it aside for testing"
    if act == Act.RELEASE:
        return ("spring release: " + ("measure the rested voltage and charge it fully above "
                                      "0 °C" if f.lead[i] else "charge it as the owner needs, "
                                      "above 0 °C only") + "; reconnect its loads; hand it back")
    if v.thaw[k]:
        parts.append(THAW)
    if act in CHARGES:
        parts += [p for p in (_where_words(plan, k, i), _charge_words(plan, k, i)) if p]
    elif act == Act.DISCHARGE:
        parts.append(f"discharge it to its storage level ({f.storage_soc[i]:.0f} %): to "
                     f"{f.storage_voltage_v[i]:.2f} V at rest")
    elif act == Act.WAIT:
        parts.append("a charge is due, but no bay with mains is inside its charge window "
                     "today: move it to a warm room with mains")
    elif act == Act.STORE and v.kind[k] != Kind.ROUND:
        parts.append("store it as it is" + ("" if f.lead[i] else " (inside 40-50 %)"))
    else:
        parts.append(_check_words(plan, k, i))
    if act != Act.MAINTAINER and v.kind[k] == Kind.INTAKE and f.lead[i]:
        parts.append("flooded: check the electrolyte level, top up with distilled water only"
                     if plan.chemistry[i] == "flooded" else "check terminals and case")
    return "; ".join(parts)


def freeze_action(plan: StoragePlan, k: int) -> str:
    v = plan.visits
    remedy = int(v.remedy[k])
    text = REMEDY_TEXT[Remedy(remedy)]
    if remedy == Remedy.SOONER:
        text = text.format(date=plan.dates[int(v.remedy_day[k])].isoformat())
    return text


def _reading_cells(plan: StoragePlan, chosen: np.ndarray) -> list[str]:
    index = {row.id: i for i, row in enumerate(plan.rows)}
    flags: dict[tuple[int, int], str] = {}
    for flag in plan.reading_flags:
        i = index.get(flag.battery)
        if i is not None:
            flags[(i, (flag.date - plan.dates[0]).days)] = f"{flag.code}: {flag.text}"
    if not flags:
        return [""] * len(chosen)
    v = plan.visits
    return [flags.get((int(v.battery[k]), int(v.day[k])), "") for k in chosen]


def _by_key(chosen: np.ndarray, key: np.ndarray, make: Any) -> list[Any]:
    """A column made once per distinct key (rows x columns of integers)."""
    if not len(chosen):
        return []
    _unique, first, inverse = np.unique(key, axis=0, return_index=True, return_inverse=True)
    made = [make(int(chosen[j])) for j in first]
    return [made[i] for i in inverse.ravel()]


def _fmt(values: np.ndarray, places: int, blank: str = "") -> list[str]:
    return [f"{x:.{places}f}" if x == x else blank for x in values.tolist()]


#: Visits above which schedule.csv keeps only the visits with something to do (intake,
#: charges, discharges, waits, readings, freeze risks); batteries.csv sums up each battery.
SCHEDULE_ALL_MAX = 200_000


def schedule_rows(plan: StoragePlan) -> np.ndarray:
    """The visits schedule.csv lists (see SCHEDULE_ALL_MAX)."""
    v = plan.visits
    if len(v) <= SCHEDULE_ALL_MAX:
        return np.arange(len(v))
    routine = np.isin(v.act, (Act.CHECK, Act.MAINTAINER, Act.STORE, Act.RELEASE))
    return np.flatnonzero(~routine | (v.kind == Kind.INTAKE) | (v.kind == Kind.READING)
                          | v.freeze)


def _action_keys(plan: StoragePlan, chosen: np.ndarray) -> np.ndarray:
    """What action_text depends on, per visit, as integers."""
    v, f = plan.visits, plan.fleet
    b = v.battery[chosen]
    act = v.act[chosen]
    cap = np.where(act == Act.COUNT_DOWN, np.round(f.capacity_ah[b] * 10), 0)
    holds = plan.visit_hold_v[chosen] if plan.visit_hold_v is not None else np.zeros(len(b))
    hold = np.where(act == Act.MAINTAINER, np.nan_to_num(np.round(holds * 100), nan=-1), 0)
    temp = np.where(act == Act.MAINTAINER, np.round(plan.bay_mean[v.bay[chosen],
                                                                  v.day[chosen]]), 0)
    load = f.connected[b] & (f.draw_pct_day[b] > 0)
    chem = np.unique(np.array(f.chemistry), return_inverse=True)[1].ravel()[b]
    return np.column_stack([v.kind[chosen], act, v.thaw[chosen], v.where[chosen], v.bay[chosen],
                            chem, f.cells[b], load, cap, hold, temp]).astype(np.int64)


def _setting_cells(settings: list[Any], charged: np.ndarray) -> list[list[str]]:
    if not charged.any():
        blank = [""] * len(charged)
        return [blank, blank, blank, blank]
    pairs = list(zip(settings, charged.tolist(), strict=True))
    return [[s.chemistry_setting if c else "" for s, c in pairs],
            [f"{s.voltage_v:.2f}" if c else "" for s, c in pairs],
            [f"{s.current_a:.1f}" if c else "" for s, c in pairs],
            [f"{s.hours:.1f}" if c else "" for s, c in pairs]]


def _columns(plan: StoragePlan, chosen: np.ndarray) -> list[list[Any]]:
    v, f = plan.visits, plan.fleet
    b = v.battery[chosen]
    ids = np.array([r.id for r in f.rows], dtype=object)
    owners = np.array([r.owner for r in f.rows], dtype=object)
    chems = np.array(f.chemistry, dtype=object)
    bays = np.array(plan.bay_names, dtype=object)
    dates = np.array([d.isoformat() for d in plan.dates], dtype=object)
    setting = (plan.visit_setting[chosen] if plan.visit_setting is not None
               else np.full(len(chosen), -1))
    charged = setting >= 0
    if charged.any():
        refused = np.array([s.refused != "" for s in plan.settings])[np.maximum(setting, 0)]
        charged &= ~refused
    charge_key = np.column_stack([setting, np.round(f.capacity_ah[b] * 10)]).astype(np.int64)
    settings = _by_key(chosen, charge_key, plan.setting_of)
    return [
        dates[v.day[chosen]].tolist(), ids[b].tolist(), owners[b].tolist(), chems[b].tolist(),
        bays[v.bay[chosen]].tolist(), _fmt(v.soc_before[chosen], 0, "unknown"),
        _by_key(chosen, _action_keys(plan, chosen), lambda k: action_text(plan, k)),
        np.where(v.freeze[chosen], "yes", "").tolist(),
        _by_key(chosen, charge_key, lambda k: charge_text(plan, k)),
        [KIND_TEXT[Kind(x)] for x in v.kind[chosen].tolist()], _fmt(v.soc_after[chosen], 0),
        np.where(charged, bays[v.where[chosen]], "").tolist(),
        *_setting_cells(settings, charged),
        _fmt(v.freeze_c[chosen], 1), _fmt(v.low_c[chosen], 1), _fmt(v.margin_k[chosen], 1),
        _by_key(chosen, np.column_stack([v.remedy[chosen], v.remedy_day[chosen]]),
                lambda k: freeze_action(plan, k)),
        _reading_cells(plan, chosen)]


def schedule_csv(plan: StoragePlan) -> str:
    """One row per visit (intake, each round, each reading, the release): the predicted charge,
    what to do, the charger's settings, the freeze check with its margin. Above
    SCHEDULE_ALL_MAX visits, only the visits with something to do."""
    out = io.StringIO()
    writer = csv.writer(out, lineterminator="\n")
    writer.writerow(SCHEDULE_COLUMNS)
    chosen = schedule_rows(plan)
    for row in zip(*_columns(plan, chosen), strict=True):
        csv_row(writer, row)
    return out.getvalue()


BATTERY_COLUMNS = ("battery", "owner", "chemistry", "bay", "on_maintainer", "intake_action",
                   "charges", "charger_hours", "lowest_predicted_soc_pct", "freeze_risk_rounds",
                   "bay_at_release", "notes")


def batteries_csv(plan: StoragePlan) -> str:
    """One row per battery: its season in short (the schedule's visits add up to these)."""
    v, f = plan.visits, plan.fleet
    charging = np.isin(v.act, CHARGES)
    charges = np.bincount(v.battery[charging], minlength=f.n)
    hours_of = np.array([s.hours for s in plan.settings] + [0.0])
    each = hours_of[plan.visit_setting] if plan.visit_setting is not None else np.zeros(len(v))
    hours = np.bincount(v.battery, weights=np.where(charging, each, 0.0), minlength=f.n)
    freeze = np.bincount(v.battery[v.freeze], minlength=f.n)
    lowest = np.min(np.where(np.isnan(plan.soc_daily), np.inf, plan.soc_daily), axis=1)
    intake = np.flatnonzero(v.kind == Kind.INTAKE)
    texts = _by_key(intake, _action_keys(plan, intake), lambda k: action_text(plan, k))
    intake_text = dict(zip(v.battery[intake].tolist(), texts, strict=True))
    notes: dict[int, list[str]] = {}
    for note in plan.notes:
        notes.setdefault(note.battery, []).append(note.code)
    last = plan.bay_daily[np.arange(f.n), f.depart]
    out = io.StringIO()
    writer = csv.writer(out, lineterminator="\n")
    writer.writerow(BATTERY_COLUMNS)
    for i, row in enumerate(f.rows):
        csv_row(writer, (row.id, row.owner, f.chemistry[i], row.bay,
                         "yes" if plan.on_maintainer[i] else "", intake_text.get(i, ""),
                         int(charges[i]), f"{hours[i]:.1f}",
                         f"{lowest[i]:.0f}" if np.isfinite(lowest[i]) else "", int(freeze[i]),
                         plan.bay_names[int(last[i])], " ".join(notes.get(i, []))))
    return out.getvalue()


def calendar_events(plan: StoragePlan) -> list[Any]:
    """One event per round day and one per release day (each battery's departure, or the
    season's end), with stable UIDs."""
    import datetime as dt
    import hashlib

    from chargeplan.render.ics import EventSpec

    name = plan.site_file.site.name
    site_key = hashlib.sha256(name.encode()).hexdigest()[:12]
    v = plan.visits
    events = []
    charging = np.isin(v.act, CHARGES) & (v.kind != Kind.RELEASE)
    for d in plan.round_days:
        due = np.flatnonzero(charging & (v.day == d))
        lines = [f"Charge: {plan.rows[v.battery[k]].id} (in {plan.bay_names[v.where[k]]})"
                 for k in due[:LISTED]]
        if len(due) > LISTED:
            lines.append(f"and {len(due) - LISTED} more charges: see schedule.csv")
        lines.append("Check every stored battery; see rounds.html and procedure.md.")
        events.append(EventSpec(
            f"{plan.dates[d].isoformat()}-{site_key}@chargeplan", plan.dates[d],
            plan.dates[d] + dt.timedelta(days=1), f"Battery round, {name}: " + (
                f"{len(due)} charge{'s' if len(due) != 1 else ''}" if len(due) else "checks only"),
            "\n".join(lines)))
    for d in sorted(set(v.day[v.kind == Kind.RELEASE].tolist())):
        ids = [plan.rows[int(b)].id for b in v.battery[(v.kind == Kind.RELEASE) & (v.day == d)]
               [:LISTED]]
        count = int(((v.kind == Kind.RELEASE) & (v.day == d)).sum())
        events.append(EventSpec(
            f"release-{plan.dates[d].isoformat()}-{site_key}@chargeplan", plan.dates[d],
            plan.dates[d] + dt.timedelta(days=1), f"Spring release, {name}: {count} "
            f"batter{'ies' if count != 1 else 'y'}", "Release: " + ", ".join(ids)
            + (f" and {count - LISTED} more" if count > LISTED else "")
            + "\nMeasure, charge as procedure.md says, reconnect loads, hand back."))
    return events


def calendar_ics(plan: StoragePlan, previous: dict[str, Any] | None = None,
                 now: Any = None) -> bytes:
    """The rounds and releases (RFC 5545), compared with the calendar written before."""
    from chargeplan.render.ics import write_calendar

    return write_calendar(calendar_events(plan), previous or {},
                          prodid="-//chargeplan//storage rounds//EN", now=now)


BENCH_COLUMNS = ("id", "chemistry", "cells_in_series", "capacity", "state_of_charge",
                 "temperature")


def bench_batteries(plan: StoragePlan) -> dict[str, str]:
    """Per day on which the warm room charges, its charge jobs as a bench batteries CSV
    (``chargeplan bench FILE --batteries warm-room-DATE.csv``)."""
    site = plan.site_file.site
    if site.warm_room is None:
        return {}
    warm = plan.bay_names.index(site.warm_room)
    v, f = plan.visits, plan.fleet
    chosen = np.flatnonzero(np.isin(v.act, CHARGES) & (v.where == warm))
    files: dict[str, str] = {}
    for d in sorted(set(v.day[chosen].tolist())):
        out = io.StringIO()
        writer = csv.writer(out, lineterminator="\n")
        writer.writerow(BENCH_COLUMNS)
        for k in chosen[v.day[chosen] == d]:
            i = int(v.battery[k])
            soc = v.soc_before[k]
            csv_row(writer, (f.rows[i].id, f.chemistry[i], int(f.cells[i]),
                             f"{f.capacity_ah[i]:g} Ah", f"{soc:.0f} %" if np.isfinite(soc)
                             else "", f"{plan.bay_mean[warm, d]:.0f} degC"))
        files[f"warm-room-{plan.dates[d].isoformat()}.csv"] = out.getvalue()
    return files


@lru_cache(maxsize=2)
def _environment(html: bool) -> Any:
    from jinja2 import Environment, PackageLoader, StrictUndefined

    env = Environment(loader=PackageLoader("chargeplan", "render/templates"), autoescape=html,
                      trim_blocks=True, lstrip_blocks=True, keep_trailing_newline=True,
                      undefined=StrictUndefined)
    if not html:
        from chargeplan.render.markdown import register

        register(env)  # md_text: user text in Markdown shown as written, never run
    return env


def procedure(plan: StoragePlan, *, profiles: ProfileSet | None = None,
              html: bool = False) -> str:
    """The written winter procedure for this site, with cautions and the deferral."""
    from chargeplan.render.storage_sections import procedure_sections

    title, sections = procedure_sections(plan, profiles or ProfileSet(use_environment=False))
    name = "storage.html.j2" if html else "storage.md.j2"
    return str(_environment(html).get_template(name).render(title=title, sections=sections))


def storage_files(plan: StoragePlan, profiles: ProfileSet, previous_folder: Any = None,
                  now: Any = None) -> dict[str, str | bytes]:
    """Every file the storage command writes into its folder, by name. The calendar already
    in ``previous_folder`` is read first, so changed and cancelled rounds are signalled."""
    from pathlib import Path

    from chargeplan.render.ics import read_previous
    from chargeplan.render.storage_rounds import readings_template, round_sheets

    previous = read_previous(Path(previous_folder) / "calendar.ics") if previous_folder else {}

    return {
        "procedure.md": procedure(plan, profiles=profiles),
        "procedure.html": procedure(plan, profiles=profiles, html=True),
        "schedule.csv": schedule_csv(plan),
        "batteries.csv": batteries_csv(plan),
        "calendar.ics": calendar_ics(plan, previous, now),
        **bench_batteries(plan),
        "rounds.md": round_sheets(plan),
        "rounds.html": round_sheets(plan, html=True),
        "readings.csv": readings_template(plan),
    }
