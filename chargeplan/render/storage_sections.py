"""The storage procedure as sections (title, paragraphs, items, one table), so the Markdown
and the HTML carry the same passages: both templates only lay these out."""

from __future__ import annotations

from collections import Counter
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from chargeplan.cautions import DEFERRAL, caution_groups
from chargeplan.planners.readings import REST_HOURS
from chargeplan.planners.storage import StoragePlan
from chargeplan.planners.storage_kernel import CHARGES, Kind
from chargeplan.profiles import ProfileSet

__all__ = ["LISTED_MAX", "Section", "procedure_sections"]

#: Batteries listed one by one in a section; beyond this, counted (the schedule lists all).
LISTED_MAX = 200
#: Flooded electrolyte level and specific gravity every this many rounds (common practice).
ELECTROLYTE_EVERY = 3


@dataclass
class Section:
    title: str
    paragraphs: list[str] = field(default_factory=list)
    items: list[str] = field(default_factory=list)
    header: list[str] = field(default_factory=list)
    rows: list[list[str]] = field(default_factory=list)

    def passages(self) -> list[str]:
        return [self.title, *self.paragraphs, *self.items, *self.header,
                *(c for r in self.rows for c in r)]


def _overview(plan: StoragePlan) -> Section:
    v, site = plan.visits, plan.site_file.site
    intake = np.isin(v.act, CHARGES) & (v.kind == Kind.INTAKE)
    dates = ", ".join(plan.dates[d].isoformat() for d in plan.round_days)
    return Section("Season", paragraphs=[
        f"Season {plan.dates[0].isoformat()} to {plan.dates[-1].isoformat()}; rounds every "
        f"{plan.round_step} days: {dates}.",
        f"{len(plan.rows)} batteries; {int(plan.on_maintainer.sum())} on a maintainer; "
        f"{int(intake.sum())} charges at intake ({plan.intake_charger_hours():.1f} "
        f"charger-hours in all); {plan.top_up_count()} top-ups on rounds; "
        f"{int(v.freeze.sum())} intervals with a freeze risk.",
    ], items=[] if site.warm_room is None else [f"Warm room: {site.warm_room}."])


def _bays(plan: StoragePlan) -> Section:
    header = ["bay", "mains", "coldest minimum", "batteries", "use"]
    count = Counter(plan.fleet.bay.tolist())
    rows = []
    for b, bay in enumerate(plan.site_file.bays):
        use = "warm room" if bay.name == plan.site_file.site.warm_room else "storage"
        rows.append([bay.name, "yes" if bay.mains else "no",
                     f"{plan.bay_min[b].min():.0f} °C", str(count.get(b, 0)), use])
    return Section("Bays", header=header, rows=rows)


def _battery_rows(plan: StoragePlan, chosen: np.ndarray, cells: Any) -> tuple[list[list[str]],
                                                                              list[str]]:
    rows = [cells(int(k)) for k in chosen[:LISTED_MAX]]
    more = [] if len(chosen) <= LISTED_MAX else [
        f"{len(chosen) - LISTED_MAX} more: see schedule.csv."]
    return rows, more


def _intake(plan: StoragePlan) -> Section:
    from chargeplan.render.storage_docs import action_text, charge_text

    v, f = plan.visits, plan.fleet
    chosen = np.flatnonzero(v.kind == Kind.INTAKE)

    def cells(k: int) -> list[str]:
        i = int(v.battery[k])
        found = "unknown" if np.isnan(v.soc_before[k]) else f"{v.soc_before[k]:.0f} %"
        return [plan.dates[int(v.day[k])].isoformat(), plan.ids[i], f.rows.column("owner")[i],
                plan.bay_names[int(v.bay[k])], plan.chemistry[i], found, action_text(plan, k),
                charge_text(plan, k)]

    rows, more = _battery_rows(plan, chosen, cells)
    return Section("Intake", items=[
        "Lead-acid is charged fully; lithium is brought to its storage level, 40-50 % "
        "(BU-702); LiFePO4 by charge counted from a known point: charge it full, then take "
        "out the Ah stated, never by its voltage on the flat curve.",
        "In cold weather, thaw a lead-acid battery first; look for ice and a bulging or "
        "cracked case, and never charge a frozen battery.",
        "Label each battery with its id and bay; leave its load as the table says.",
        *more], header=["date", "battery", "owner", "bay", "chemistry", "found", "action",
                        "charger"], rows=rows)


def _maintainers(plan: StoragePlan) -> Section:
    v = plan.visits
    held = (np.isfinite(plan.visit_hold_v) if plan.visit_hold_v is not None
            else np.zeros(len(v), dtype=bool))
    every = np.flatnonzero(held)  # every setting, visit by visit
    picked = every[:LISTED_MAX]
    rows = [[plan.ids[int(v.battery[k])], plan.bay_names[int(v.bay[k])],
             plan.dates[int(v.day[k])].isoformat(), plan.dates[int(v.end_day[k])].isoformat(),
             f"{plan.visit_hold_v[k]:.2f} V", f"{plan.visit_hold_c[k]:.0f} °C"]
            for k in picked] if plan.visit_hold_c is not None else []
    return Section("Maintainers", items=[
        "Only lead-acid goes on a maintainer; lithium is never floated (rule CP206): it is "
        "kept at its storage level and checked on rounds.",
        "The hold voltage follows the bay's temperature: set it at each round as listed, for "
        "the warmest month until the next round (a hold set for a colder month runs high as "
        "the bay warms, BU-410).",
        "Never measure the rest voltage of a battery on a maintainer: read the maintainer's "
        f"display, or disconnect it for at least {REST_HOURS:g} h first.",
        *([f"The table lists the first {LISTED_MAX} of {every.size} settings; the round sheets "
           "and schedule.csv give each one."] if every.size > LISTED_MAX else [])],
        header=["battery", "bay", "from", "to", "hold voltage", "for up to"], rows=rows)


def _rounds(plan: StoragePlan) -> Section:
    bands = plan.bands()
    return Section(f"Rounds (every {plan.round_step} days)", items=[
        f"Measure the rested voltage (no charger or load for at least {REST_HOURS:g} h) and "
        "act on it; the round sheet lists each battery with its expected reading.",
        f"Flooded: check the electrolyte level and specific gravity every {ELECTROLYTE_EVERY} "
        "rounds; top up with distilled water only, after charging.",
        "Every round: terminals clean and tight, case not cracked or bulging, vents clear.",
        "After a top-up in the warm room, return the battery to its bay.",
        "Wherever lead-acid charges (the warm room, or a bay with mains): keep it ventilated "
        "while it charges (hydrogen, IEC 62485-2 cl. 7; each such room's check follows), no "
        "sparks or flames within 0.5 m.",
        *(["LiFePO4: its rest voltage is flat from about 20 to 90 % and cannot be acted on: "
           "read the pack's own state-of-charge display (write it as state_of_charge in "
           "readings.csv), or count the charge from full"] if any(b["flat"] for b in bands)
          else []),
    ], header=["battery", "charge below", "storage level", "full"], rows=[
        [f"{b['chemistry']}, {b['cells']} cells",
         f"{b['threshold_pct']:.0f} % (by the pack's display)" if b["flat"] else
         f"{b['charge_below_v']:.2f} V ({b['threshold_pct']:.0f} %)",
         "not by voltage (flat curve)" if b["flat"] else f"{b['storage_v']:.2f} V",
         f"{b['full_v']:.2f} V"]
        for b in bands])


def _freeze(plan: StoragePlan) -> Section:
    from chargeplan.render.storage_docs import freeze_action

    v = plan.visits
    chosen = np.flatnonzero(v.freeze)

    def cells(k: int) -> list[str]:
        i = int(v.battery[k])
        return [plan.dates[int(v.day[k])].isoformat(),
                plan.dates[int(v.end_day[k])].isoformat(), plan.ids[i],
                plan.bay_names[int(v.bay[k])], f"{v.freeze_c[k]:.0f} °C", f"{v.low_c[k]:.0f} °C",
                f"{v.margin_k[k]:.1f} K", freeze_action(plan, k) or "charged"]

    rows, more = _battery_rows(plan, chosen, cells)
    frozen = np.flatnonzero(plan.first_freeze_day >= 0)
    freezes = [] if not frozen.size else [
        "Under this plan these batteries freeze (the bay's minimum reaches their electrolyte's "
        "freezing point): " + ", ".join(
            f"{plan.ids[int(i)]} on {plan.dates[int(plan.first_freeze_day[i])].isoformat()}"
            for i in frozen[:LISTED_MAX])
        + (f" and {frozen.size - LISTED_MAX} more" if frozen.size > LISTED_MAX else "")
        + ". Store them indoors, above freezing, before then; a frozen battery is never "
        "charged, and its case may crack."]
    return Section("Freeze risk", paragraphs=[
        "Each interval in which a lead-acid battery's predicted charge reaches its freezing "
        "range (its electrolyte's freezing point, US Army TM 5-1185 Table III, within 3 K of "
        "the bay's minimum), with the margin (bay minimum minus freezing point) after the "
        "action." if chosen.size else "No lead-acid battery reaches its freezing range under "
        "this plan." if not frozen.size else "No interval of a visited battery is listed.",
        *freezes], items=more,
        header=["from", "to", "battery", "bay", "freezes at", "bay minimum", "margin",
                "action"] if chosen.size else [], rows=rows)


def _ventilations(plan: StoragePlan) -> list[Section]:
    """One ventilation check for each bay in which lead-acid charges (IEC 62485-2 cl. 7)."""
    return [s for bay in plan.charging_bays() if (s := _ventilation(plan, bay)) is not None]


def _ventilation(plan: StoragePlan, bay: int) -> Section | None:
    days = plan.ventilation(bay)
    if not days:
        return None
    worst = max(days, key=lambda d: d.airflow_m3_per_h)
    room = plan.bay_names[bay]
    shown = [d for d in days if d.ok is not True][:LISTED_MAX]
    given = worst.available_m3_per_h
    verdict = ("its ventilation is not given: make sure it gives at least that" if given is None
               else f"it gives {given:.3g} m3/h: " + ("enough on every day" if all(
                   d.ok for d in days) else "not enough on the days listed; stagger the charges"))
    return Section(f"Ventilation of {room}", paragraphs=[
        f"Lead-acid charges in {room} on {len(days)} days; with all of a day's charges "
        f"running at once the most is {worst.batteries} "
        f"batter{'ies' if worst.batteries != 1 else 'y'} on {worst.date.isoformat()}, "
        f"needing {worst.airflow_m3_per_h:.3g} m3/h of air, or free openings of "
        f"{worst.opening_area_cm2:.0f} cm2 for inlet and outlet each (IEC 62485-2 cl. 7: Q = "
        f"0.05 n Igas C 10^-3, boost gas current); {verdict}."],
        header=["date", "lead-acid charging", "air needed", "openings needed"] if shown else [],
        rows=[[d.date.isoformat(), str(d.batteries), f"{d.airflow_m3_per_h:.3g} m3/h",
               f"{d.opening_area_cm2:.0f} cm2"] for d in shown])


def _readings(plan: StoragePlan) -> Section | None:
    if not plan.reading_flags:
        return None
    return Section("Readings", items=[f"{f.battery} ({f.code}): {f.text}"
                                      for f in plan.reading_flags[:LISTED_MAX]])


def _closing(plan: StoragePlan, profiles: ProfileSet) -> list[Section]:
    # every profile's own list (chargeplan.cautions.profile_cautions: the family's, the
    # vented line, the profile's), as its plans carry it; lead-acid before lithium
    cautions = [line for _family, lines in caution_groups(
        profiles.get(c) for c in set(plan.chemistry)) for line in lines]
    out = [Section("Cold rules", items=[
        "Never charge lithium below 0 °C: bring it to the warm room first and wait until the "
        "cells themselves are above 0 °C.",
        "Never charge a frozen lead-acid battery: a discharged battery freezes far sooner than "
        "a full one; keep lead-acid charged through cold spells."]),
        Section("Release in spring", paragraphs=[
            f"Release on {plan.dates[-1].isoformat()} (or each battery's own departure date): "
            "measure, charge lead-acid fully and lithium as the owner needs, above 0 °C, "
            "reconnect loads, hand it back."])]
    if plan.notes:
        out.append(Section("Batteries to act on", items=[
            f"{plan.ids[n.battery]}: {n.text}" for n in plan.notes[:LISTED_MAX]]))
    out.append(Section("Cautions", items=cautions, paragraphs=[DEFERRAL]))
    return out


def procedure_sections(plan: StoragePlan, profiles: ProfileSet) -> tuple[str, list[Section]]:
    sections = [_overview(plan), _bays(plan), _intake(plan), _maintainers(plan), _rounds(plan),
                _freeze(plan), *_ventilations(plan), _readings(plan), *_closing(plan, profiles)]
    return (f"Winter storage procedure: {plan.site_file.site.name}",
            [s for s in sections if s is not None])
