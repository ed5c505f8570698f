"""The storage planner's files: schedule.csv, batteries.csv, calendar.ics, procedure.md,
procedure.html and the warm room's bench batteries (the round sheets: storage_rounds).

Everything here formats values the planner finished (charge settings, hold voltages,
freezing points, margins); nothing is computed again. A text is made once per distinct
key of what it depends on and gathered per row (:mod:`chargeplan.render.columns`): a
season of a hundred thousand batteries has over a million visits but a few thousand
distinct action texts.
"""

from __future__ import annotations

from collections.abc import Callable
from functools import cache, cached_property, lru_cache
from types import SimpleNamespace
from typing import Any

import numpy as np

from chargeplan.fmt import duration
from chargeplan.planners.readings import REST_HOURS
from chargeplan.planners.storage import StoragePlan
from chargeplan.planners.storage_charges import ChargeSetting, scaled_current
from chargeplan.planners.storage_kernel import CHARGES, Act, Kind, Remedy
from chargeplan.profiles import ProfileSet
from chargeplan.render.columns import Column, by_key, csv_lines, csv_text, distinct, floats, pack

__all__ = ["SCHEDULE_COLUMNS", "FleetTexts", "action_column", "action_text", "batteries_csv",
           "bench_batteries", "calendar_events", "calendar_ics", "charge_columns", "charge_text",
           "procedure", "schedule_csv", "setting_currents", "storage_files",
           "storage_makers"]

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

#: The kernel's codes as plain ints: an IntEnum member looked up per visit is slow.
ACT = SimpleNamespace(**{a.name: int(a) for a in Act})
KIND = SimpleNamespace(**{k.name: int(k) for k in Kind})
CHARGING = frozenset(int(a) for a in CHARGES)

THAW = ("first check it is not frozen: bring it indoors and let it thaw above 0 °C; look for "
        "ice in the cells and a bulging or cracked case; never charge a frozen or bulging "
        "battery")


def _charge_frame(s: ChargeSetting) -> tuple[str, str | None]:
    """A setting's words before and after its current (None after: a refusal names none)."""
    if s.refused:
        return f"do not charge here: {s.refused}", None
    temp = f" (for {s.temperature_c:.0f} °C)" if s.compensated else ""
    time = f", about {duration(s.duration_s)}" if s.duration_s else ""
    return (f"{s.chemistry_setting} setting, {s.voltage_v:.2f} V{temp}, ",
            " A: " + " -> ".join(s.stages) + f", then disconnect{time}")


def amps(current_a: float) -> str:
    """A charger current in amperes with the digits a setting needs: 0.1 A steps from 1 A,
    three decimals below (a 0.05 Ah battery's 0.005 A is not '0.0')."""
    return f"{current_a:.1f}" if current_a >= 0.95 else f"{current_a:.3f}"


def _with_current(frame: tuple[str, str | None], current_a: float) -> str:
    head, tail = frame
    return head if tail is None else f"{head}{amps(current_a)}{tail}"


def charge_text(plan: StoragePlan, k: int) -> str:
    """The charger's settings for visit ``k`` (empty when it needs no charger)."""
    s = plan.setting_of(k)
    return "" if s is None else _with_current(_charge_frame(s), s.current_a)


def setting_currents(plan: StoragePlan, visits: np.ndarray) -> np.ndarray:
    """``plan.setting_of(k).current_a`` for each of ``visits`` at once (NaN where none): the
    setting's current scaled to the battery's capacity, as ``ChargeSetting.for_capacity``
    scales it."""
    per = np.array([s.current_a for s in plan.settings] + [np.nan])
    which = (plan.visit_setting[visits] if plan.visit_setting is not None
             else np.full(len(visits), -1))
    return scaled_current(per[which], plan.fleet.capacity_ah[plan.visits.battery[visits]])


def _charge_words(plan: StoragePlan, k: int, i: int) -> str:
    v, f = plan.visits, plan.fleet
    act = int(v.act[k])
    if act == ACT.TOP_UP:
        return "charge it fully" if v.kind[k] != KIND.ROUND else "top up (charge it fully)"
    if act == ACT.COUNT_DOWN:
        return (f"charge it full (the known point), then take out {plan.take_out_ah(i):.1f} Ah "
                f"(counted by the charger or a meter) to its storage level of "
                f"{f.storage_soc[i]:.0f} %; never judge LiFePO4 by its voltage")
    if act == ACT.TO_STORAGE:
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
    if act == ACT.MAINTAINER:
        hold = plan.visit_hold_v[k] if plan.visit_hold_v is not None else np.nan
        at = f" set to {hold:.2f} V{_hold_for(plan, k)}"
        return (f"check the maintainer is connected and{at if np.isfinite(hold) else ''}; read "
                "its own display; do not measure the rest voltage while it is connected (to "
                f"measure, disconnect it for at least {REST_HOURS:g} h first)")
    if f.lfp[i]:
        return ("check the pack's own state-of-charge display; its rest voltage cannot tell "
                "20 % from 90 %")
    load = (f"disconnect its load for at least {REST_HOURS:g} h, measure, reconnect it"
            if plan.visit_connected[k] else
            f"measure the rested voltage (no charger or load for at least {REST_HOURS:g} h)")
    return load


def _hold_for(plan: StoragePlan, k: int) -> str:
    """What a maintainer's hold at visit ``k`` is set for (the warmest until the next visit)."""
    temp = plan.visit_hold_c[k] if plan.visit_hold_c is not None else np.nan
    return (f" (for up to {temp:.0f} °C, the bay's warmest month until the next round)"
            if np.isfinite(temp) else "")


def _maintainer_words(plan: StoragePlan, k: int) -> str:
    """After an intake charge of a battery on a maintainer: connect it, at which hold."""
    hold = plan.visit_hold_v[k] if plan.visit_hold_v is not None else np.nan
    if not np.isfinite(hold):
        return ""
    return f"then connect its maintainer, set to {hold:.2f} V{_hold_for(plan, k)}"


def _remedy_words(plan: StoragePlan, k: int) -> str:
    """The remedy of visit ``k`` as staff carry it out at the visit: against the freeze
    (lead-acid), or a lithium load that would drain it (BU-702)."""
    v = plan.visits
    remedy = int(v.remedy[k])
    if remedy == Remedy.DISCONNECT and not plan.fleet.lead[int(v.battery[k])]:
        return ("disconnect its load and leave it off until the release (it would drain "
                "the battery below its threshold before the next round; BU-702: lithium is "
                "stored with its loads off)")
    if not v.freeze[k] or remedy in (Remedy.NONE, Remedy.CHARGE_NOW):
        return ""
    head = "freeze risk: its charge would reach its freezing range before the next round"
    if remedy == Remedy.MOVE:
        return f"{head}: move it to {plan.bay_names[int(v.bay[k])]} and keep it there"
    if remedy == Remedy.DISCONNECT:
        return f"{head}: disconnect its load and leave it off until the release"
    return f"{head}: {freeze_action(plan, k)}"


def action_text(plan: StoragePlan, k: int) -> str:
    """What staff do at visit ``k``, in words."""
    v, f = plan.visits, plan.fleet
    i, act, kind = int(v.battery[k]), int(v.act[k]), int(v.kind[k])
    parts: list[str] = []
    if kind == KIND.READING:
        parts.append("reading taken: the plan restarts from it")
    if act == ACT.REFUSED:
        return "do not store it as it is (see the notes); set it aside for testing"
    if act == ACT.RELEASE and plan.refused[i]:
        return ("release: it was set aside, not stored (see the notes); hand it back with "
                "what its test found")
    if act == ACT.RELEASE:
        return ("spring release: " + ("measure the rested voltage and charge it fully above "
                                      "0 °C" if f.lead[i] else "charge it as the owner needs, "
                                      "above 0 °C only") + "; reconnect its loads; hand it back")
    if v.thaw[k]:
        parts.append(THAW)
    if act in CHARGING:
        parts += [p for p in (_where_words(plan, k, i), _charge_words(plan, k, i),
                              _maintainer_words(plan, k)) if p]
    elif act == ACT.DISCHARGE:
        parts.append(f"discharge it to its storage level ({f.storage_soc[i]:.0f} %): to "
                     f"{f.storage_voltage_v[i]:.2f} V at rest")
    elif act == ACT.WAIT:
        parts.append("a charge is due, but no bay with mains is inside its charge window "
                     "today: " + plan.warmer_room_words())
    elif act == ACT.STORE and kind != KIND.ROUND:
        parts.append("store it as it is" + ("" if f.lead[i] else " (inside 40-50 %)"))
    else:
        parts.append(_check_words(plan, k, i))
    remedy = _remedy_words(plan, k)
    if remedy:
        parts = [p for p in parts if not p.startswith("store it as it is")] + [remedy]
    if act != ACT.MAINTAINER and kind == KIND.INTAKE and f.lead[i]:
        parts.append("flooded: check the electrolyte level, top up with distilled water only"
                     if plan.chemistry[i] == "flooded" else "check terminals and case")
    return "; ".join(parts)


def freeze_action(plan: StoragePlan, k: int) -> str:
    v = plan.visits
    if not v.freeze[k]:
        return ""
    remedy = int(v.remedy[k])
    text = REMEDY_TEXT[Remedy(remedy)]
    if remedy == Remedy.SOONER:
        text = text.format(date=plan.dates[int(v.remedy_day[k])].isoformat())
    return text


def _reading_cells(plan: StoragePlan, chosen: np.ndarray) -> Column:
    if not plan.reading_flags:
        return Column.constant("", len(chosen))
    index = {battery: i for i, battery in enumerate(plan.ids)}
    flags: dict[tuple[int, int], str] = {}
    for flag in plan.reading_flags:
        i = index.get(flag.battery)
        if i is not None:
            pair, text = (i, (flag.date - plan.dates[0]).days), f"{flag.code}: {flag.text}"
            flags[pair] = f"{flags[pair]}; {text}" if pair in flags else text
    if not flags:
        return Column.constant("", len(chosen))
    v = plan.visits
    return distinct(flags.get(pair, "") for pair in zip(v.battery[chosen].tolist(),
                                                        v.day[chosen].tolist(), strict=True))


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


def _action_keys(plan: StoragePlan, chosen: np.ndarray, chemistry: Column) -> np.ndarray:
    """What action_text depends on, per visit, as one integer."""
    v, f = plan.visits, plan.fleet
    b = v.battery[chosen]
    act = v.act[chosen]
    cap = np.where(act == Act.COUNT_DOWN, np.round(f.capacity_ah[b] * 10), 0)
    holds = plan.visit_hold_v[chosen] if plan.visit_hold_v is not None else np.zeros(len(b))
    hold = np.nan_to_num(np.round(holds * 100), nan=-1)
    temps = plan.visit_hold_c[chosen] if plan.visit_hold_c is not None else np.zeros(len(b))
    temp = np.nan_to_num(np.round(temps), nan=-99)
    load = plan.visit_connected[chosen]
    chem = chemistry.codes[b]
    frozen = np.where(v.freeze[chosen] | (v.remedy[chosen] == Remedy.DISCONNECT),
                      v.remedy[chosen] + 1, 0)
    remedy_day = np.where(v.freeze[chosen], v.remedy_day[chosen], 0)
    return pack(v.kind[chosen], act, v.thaw[chosen], v.where[chosen], v.bay[chosen], chem,
                f.cells[b], load, cap, hold, temp, frozen, remedy_day, plan.refused[b])


def action_column(plan: StoragePlan, chosen: np.ndarray, texts: FleetTexts) -> Column:
    """action_text of each of the visits ``chosen``, made once per distinct key."""
    return by_key(chosen, _action_keys(plan, chosen, texts.chemistry),
                  lambda k: action_text(plan, k))


def _charged(plan: StoragePlan, chosen: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Each of the visits ``chosen``: its setting (an index into plan.settings, -1 for none)
    and whether it is charged (it has a setting, and the engine did not refuse it)."""
    setting = (plan.visit_setting[chosen] if plan.visit_setting is not None
               else np.full(len(chosen), -1))
    refused = np.array([s.refused != "" for s in plan.settings] + [True])
    return setting, ~refused[np.where(setting >= 0, setting, len(plan.settings))]


def charge_columns(plan: StoragePlan, chosen: np.ndarray) -> list[Column]:
    """charge_text of each of the visits ``chosen``, then the charger's setting, voltage,
    current and hours (blank where it is not charged): made once per setting and capacity."""
    settings = plan.settings
    setting, charged = _charged(plan, chosen)
    key = pack(setting, np.round(plan.fleet.capacity_ah[plan.visits.battery[chosen]] * 10))
    _unique, first, codes = np.unique(key, return_index=True, return_inverse=True)
    frames = [_charge_frame(s) for s in settings]
    each, current = setting[first].tolist(), setting_currents(plan, chosen[first]).tolist()
    texts = [_with_current(frames[s], a) if s >= 0 else ""
             for s, a in zip(each, current, strict=True)]
    shown = [s if c else -1 for s, c in zip(each, charged[first].tolist(), strict=True)]

    def cells(cell: Any) -> list[str]:
        made = [cell(s) for s in settings]
        return [made[s] if s >= 0 else "" for s in shown]

    currents = [amps(a) if s >= 0 else "" for a, s in zip(current, shown, strict=True)]
    codes = codes.ravel()
    return [Column(texts, codes), Column(cells(lambda s: s.chemistry_setting), codes),
            Column(cells(lambda s: f"{s.voltage_v:.2f}"), codes), Column(currents, codes),
            Column(cells(lambda s: f"{s.hours:.1f}"), codes)]


class FleetTexts:
    """Each battery's id, owner and chemistry as columns over the batteries, and the id and
    owner as CSV fields once asked for: made once for all of a plan's files (a fleet of a
    hundred thousand takes a while)."""

    def __init__(self, plan: StoragePlan) -> None:
        f = plan.fleet
        every = np.arange(f.n)
        self.ids = Column(plan.ids, every)
        self.owners = Column(f.rows.column("owner"), every)
        self.chemistry = distinct(f.chemistry)

    @cached_property
    def id_fields(self) -> Column:
        return self.ids.as_fields()

    @cached_property
    def owner_fields(self) -> Column:
        return self.owners.as_fields()


def _columns(plan: StoragePlan, chosen: np.ndarray, texts: FleetTexts) -> list[Column]:
    v = plan.visits
    b = v.battery[chosen]
    charge_plan, *setting_cells = charge_columns(plan, chosen)
    _setting, charged = _charged(plan, chosen)
    return [
        Column([d.isoformat() for d in plan.dates], v.day[chosen]), texts.id_fields.of(b),
        texts.owner_fields.of(b), texts.chemistry.of(b),
        Column(plan.bay_names, v.bay[chosen]), floats(v.soc_before[chosen], ".0f",
                                                      blank="unknown"),
        action_column(plan, chosen, texts), Column(["", "yes"], v.freeze[chosen].astype(np.intp)),
        charge_plan, Column([KIND_TEXT[k] for k in sorted(KIND_TEXT)], v.kind[chosen]),
        floats(v.soc_after[chosen], ".0f", blank=""),
        Column(["", *plan.bay_names], np.where(charged, v.where[chosen] + 1, 0)),
        *setting_cells,
        floats(v.freeze_c[chosen], ".1f", blank=""), floats(v.low_c[chosen], ".1f", blank=""),
        floats(v.margin_k[chosen], ".1f", blank=""),
        by_key(chosen, pack(v.remedy[chosen], v.remedy_day[chosen], v.freeze[chosen]),
               lambda k: freeze_action(plan, k)),
        _reading_cells(plan, chosen)]


def schedule_csv(plan: StoragePlan, texts: FleetTexts | None = None) -> str:
    """One row per visit (intake, each round, each reading, the release): the predicted charge,
    what to do, the charger's settings, the freeze check with its margin. Above
    SCHEDULE_ALL_MAX visits, only the visits with something to do (``texts``: the plan's
    FleetTexts, when made already, as storage_files makes them once for all its files)."""
    return csv_text(SCHEDULE_COLUMNS, csv_lines(_columns(plan, schedule_rows(plan),
                                                         texts or FleetTexts(plan))))


BATTERY_COLUMNS = ("battery", "owner", "chemistry", "bay", "on_maintainer", "intake_action",
                   "charges", "charger_hours", "lowest_predicted_soc_pct", "freeze_risk_rounds",
                   "bay_at_release", "notes")


def batteries_csv(plan: StoragePlan, texts: FleetTexts | None = None) -> str:
    """One row per battery: its season in short (the schedule's visits add up to these;
    ``texts`` as for schedule_csv)."""
    v, f = plan.visits, plan.fleet
    texts = texts or FleetTexts(plan)
    charging = np.isin(v.act, CHARGES)
    charges = np.bincount(v.battery[charging], minlength=f.n)
    hours_of = np.array([s.hours for s in plan.settings] + [0.0])
    each = hours_of[plan.visit_setting] if plan.visit_setting is not None else np.zeros(len(v))
    hours = np.bincount(v.battery, weights=np.where(charging, each, 0.0), minlength=f.n)
    freeze = np.bincount(v.battery[v.freeze], minlength=f.n)
    lowest = np.fmin.reduce(plan.soc_daily, axis=1)  # NaN (absent) skipped; all NaN: NaN
    intake = np.flatnonzero(v.kind == Kind.INTAKE)
    actions = action_column(plan, intake, texts)
    arrived = v.battery[intake]
    latest = len(arrived) - 1 - np.unique(arrived[::-1], return_index=True)[1]  # its last intake
    intake_action = np.full(f.n, len(actions.texts))  # the last entry: blank (no intake)
    intake_action[arrived[latest]] = actions.codes[latest]
    notes: list[str | None] = [None] * f.n  # each battery's note codes, joined by spaces
    for note in plan.notes:
        codes = notes[note.battery]
        notes[note.battery] = note.code if codes is None else codes + " " + note.code
    last = plan.bay_daily[np.arange(f.n), f.depart]
    return csv_text(BATTERY_COLUMNS, csv_lines([
        texts.id_fields, texts.owner_fields, texts.chemistry, distinct(f.rows.column("bay")),
        Column(["", "yes"], plan.on_maintainer.astype(np.intp)),
        Column([*actions.texts, ""], intake_action), distinct(charges.tolist()),
        floats(hours, ".1f"), floats(np.where(np.isfinite(lowest), lowest, np.nan), ".0f",
                                     blank=""),
        distinct(freeze.tolist()), Column(plan.bay_names, last),
        distinct(codes or "" for codes in notes)]))


def calendar_events(plan: StoragePlan) -> list[Any]:
    """One event per day with visits (each round with a battery in store, each arrival,
    reading or extra top-up day) and one per release day (each battery's departure, or the
    season's end), with stable UIDs."""
    import datetime as dt
    import hashlib

    from chargeplan.render.ics import EventSpec

    name = plan.site_file.site.name
    site_key = hashlib.sha256(name.encode()).hexdigest()[:12]
    v = plan.visits
    events = []
    charging = np.flatnonzero(np.isin(v.act, CHARGES) & (v.kind != Kind.RELEASE))
    charge_day = v.day[charging]
    rounds = set(plan.round_days)
    for d in sorted(set(v.day[v.kind != Kind.RELEASE].tolist())):
        due = charging[charge_day == d]
        lines = [f"Charge: {plan.ids[v.battery[k]]} (in {plan.bay_names[v.where[k]]})"
                 for k in due[:LISTED]]
        if len(due) > LISTED:
            lines.append(f"and {len(due) - LISTED} more charges: see schedule.csv")
        lines.append("Check every stored battery; see rounds.html and procedure.md.")
        events.append(EventSpec(
            f"{plan.dates[d].isoformat()}-{site_key}@chargeplan", plan.dates[d],
            plan.dates[d] + dt.timedelta(days=1),
            f"Battery {'round' if d in rounds else 'visit'}, {name}: " + (
                f"{len(due)} charge{'s' if len(due) != 1 else ''}" if len(due) else "checks only"),
            "\n".join(lines)))
    release = np.flatnonzero(v.kind == Kind.RELEASE)
    release_day = v.day[release]
    for d in sorted(set(release_day.tolist())):
        leaving = v.battery[release[release_day == d]]
        ids = [plan.ids[int(b)] for b in leaving[:LISTED]]
        count = len(leaving)
        events.append(EventSpec(
            f"release-{plan.dates[d].isoformat()}-{site_key}@chargeplan", plan.dates[d],
            plan.dates[d] + dt.timedelta(days=1),
            f"{'Spring release' if d == len(plan.dates) - 1 else 'Release'}, {name}: {count} "
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


def bench_batteries(plan: StoragePlan, texts: FleetTexts | None = None) -> dict[str, str]:
    """Per day on which the warm room charges, its charge jobs as a bench batteries CSV
    (``chargeplan bench FILE --batteries warm-room-DATE.csv``; ``texts`` as for
    schedule_csv). A battery's temperature is that of the bay it comes from (its minimum that
    day), so the bench warms cold lithium before its charge."""
    site = plan.site_file.site
    if site.warm_room is None:
        return {}
    warm = plan.bay_names.index(site.warm_room)
    v, f = plan.visits, plan.fleet
    chosen = np.flatnonzero(np.isin(v.act, CHARGES) & (v.where == warm))
    b, day, soc = v.battery[chosen], v.day[chosen], v.soc_before[chosen]
    # the battery's own temperature as it comes in: its bay's minimum that day (the cold it
    # sat in, so the bench plans a lithium warm-up, CP104), the room's mean if it lives there
    home = v.bay[chosen]
    temperature = np.where(home == warm, plan.bay_mean[warm, day], plan.bay_min[home, day])
    texts = texts or FleetTexts(plan)
    lines = np.array(csv_lines([
        texts.id_fields.of(b), texts.chemistry.of(b), distinct(f.cells[b].tolist()),
        floats(f.capacity_ah[b], "g", suffix=" Ah"),
        floats(np.where(np.isfinite(soc), soc, np.nan), ".0f", blank="", suffix=" %"),
        floats(temperature, ".0f", suffix=" degC")]), dtype=object)
    return {f"warm-room-{plan.dates[d].isoformat()}.csv":
            csv_text(BENCH_COLUMNS, lines[day == d].tolist())
            for d in sorted(set(day.tolist()))}


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


def procedure(plan: StoragePlan, *, profiles: ProfileSet | None = None, html: bool = False,
              sections: tuple[str, list[Any]] | None = None) -> str:
    """The written winter procedure for this site, with cautions and the deferral
    (``sections``: procedure_sections of the plan, when made already)."""
    from chargeplan.render.storage_sections import procedure_sections

    title, sections = sections or procedure_sections(
        plan, profiles or ProfileSet(use_environment=False))
    name = "storage.html.j2" if html else "storage.md.j2"
    return str(_environment(html).get_template(name).render(title=title, sections=sections))


def storage_files(plan: StoragePlan, profiles: ProfileSet, previous_folder: Any = None,
                  now: Any = None) -> dict[str, str | bytes]:
    """Every file the storage command writes into its folder, by name. The calendar already
    in ``previous_folder`` is read first, so changed and cancelled rounds are signalled."""
    return {name: make() for name, make in storage_makers(plan, profiles, previous_folder,
                                                            now).items()}


def storage_makers(plan: StoragePlan, profiles: ProfileSet, previous_folder: Any = None,
                   now: Any = None) -> dict[str, Callable[[], str | bytes]]:
    """:func:`storage_files` as a function a file, each to be called once, in order (the
    command line's write_all writes a file while the next is made). The calendar already in
    ``previous_folder`` is read here, before anything is written."""
    from pathlib import Path

    from chargeplan.render.ics import read_previous
    from chargeplan.render.storage_rounds import readings_template, round_sheets, sheets
    from chargeplan.render.storage_sections import procedure_sections

    previous = read_previous(Path(previous_folder) / "calendar.ics") if previous_folder else {}
    # made once and shared: the batteries' texts, the procedure's sections, and the sheets
    # (the round sheets and the readings template show the same lines)
    texts = FleetTexts(plan)
    sections = cache(lambda: procedure_sections(plan, profiles))
    found = cache(lambda: sheets(plan, texts))
    bench = bench_batteries(plan, texts)

    return {
        "procedure.md": lambda: procedure(plan, profiles=profiles, sections=sections()),
        "procedure.html": lambda: procedure(plan, profiles=profiles, html=True,
                                            sections=sections()),
        "schedule.csv": lambda: schedule_csv(plan, texts),
        "batteries.csv": lambda: batteries_csv(plan, texts),
        "calendar.ics": lambda: calendar_ics(plan, previous, now),
        **{name: (lambda text=text: text) for name, text in bench.items()},
        "rounds.md": lambda: round_sheets(plan, found=found()),
        "rounds.html": lambda: round_sheets(plan, html=True, found=found()),
        "readings.csv": lambda: readings_template(plan, found=found()),
    }
