"""The storage planner's files: schedule.csv, calendar.ics, procedure.md and procedure.html."""

from __future__ import annotations

import csv
import datetime as dt
import hashlib
import io
from collections import defaultdict
from functools import lru_cache
from typing import Any

import numpy as np

from chargeplan.cautions import cautions_for
from chargeplan.csvfile import csv_row
from chargeplan.physics.ocv import ocv_from_soc
from chargeplan.planners.storage import StoragePlan
from chargeplan.profiles import ProfileSet

__all__ = ["calendar_ics", "procedure", "schedule_csv"]

SCHEDULE_COLUMNS = ("date", "battery", "owner", "chemistry", "bay", "predicted_soc_pct",
                    "action", "freeze_risk", "charge_plan")


def schedule_csv(plan: StoragePlan) -> str:
    """One row per battery per round: the predicted charge, what to do, the charge plan."""
    by_round = defaultdict(dict)
    for t in plan.top_ups:
        by_round[t.day][t.battery] = t
    waiting = defaultdict(set)
    for i, d in plan.postponed:
        waiting[d].add(i)
    out = io.StringIO()
    writer = csv.writer(out, lineterminator="\n")
    writer.writerow(SCHEDULE_COLUMNS)
    step = plan.round_step
    for r, d in enumerate(plan.round_days):
        date = plan.dates[d].isoformat()
        end = min(d + step, len(plan.dates))
        for i, row in enumerate(plan.rows):
            soc = float(plan.soc_at_rounds[i, r])
            t = by_round[d].get(i)
            if plan.on_maintainer[i]:
                action = "check the maintainer is connected and charging"
                charge = plan.maintainer.get(i, "on a maintainer")
            elif t is not None:
                if t.where != row.bay:
                    action = (f"move to {t.where}; wait until the battery itself is above "
                              "0 degC (measure it; hours to overnight), then top up")
                else:
                    action = "top up"
                if plan.family[i] == "lead_acid" and plan.bay_min is not None and (
                        plan.bay_index is not None and plan.bay_min[plan.bay_index[i], d] < 0):
                    action += "; first check it is not frozen (no ice, no bulging case)"
                charge = t.plan
            elif i in waiting[d]:
                action = ("top-up due, but no bay with mains is inside its charge window "
                          "today: move it to a warm room with mains")
                charge = ""
            else:
                action, charge = "measure the rested voltage", ""
            freeze = plan.first_freeze_day[i]
            risk = "yes" if d <= freeze < end else ""
            csv_row(writer, (date, row.id, row.owner, plan.chemistry[i], row.bay,
                             f"{soc:.0f}", action, risk, charge))
    return out.getvalue()


def calendar_ics(plan: StoragePlan) -> bytes:
    """One event per round day (RFC 5545, via icalendar), listing the batteries due."""
    import icalendar

    cal = icalendar.Calendar()
    cal.add("prodid", "-//chargeplan//storage rounds//EN")
    cal.add("version", "2.0")
    stamp = dt.datetime.combine(plan.dates[0], dt.time(0, 0), tzinfo=dt.UTC)
    by_day = defaultdict(list)
    for t in plan.top_ups:
        by_day[t.day].append(t)
    name = plan.site_file.site.name
    for d in plan.round_days:
        due = by_day.get(d, [])
        event = icalendar.Event()
        site_key = hashlib.sha256(name.encode()).hexdigest()[:12]
        event.add("uid", f"{plan.dates[d].isoformat()}-{site_key}@chargeplan")
        event.add("dtstamp", stamp)
        event.add("dtstart", plan.dates[d])
        event.add("dtend", plan.dates[d] + dt.timedelta(days=1))
        event.add("summary", f"Battery round, {name}: " + (
            f"{len(due)} top-up{'s' if len(due) != 1 else ''}" if due else "checks only"))
        lines = [f"Top up: {plan.rows[t.battery].id} ({plan.rows[t.battery].bay}"
                 + (f" -> {t.where}" if t.where != plan.rows[t.battery].bay else "") + ")"
                 for t in due]
        lines.append("Measure every stored battery's rested voltage; see procedure.md.")
        event.add("description", "\n".join(lines))
        cal.add_component(event)
    return cal.to_ical()


def _bands(plan: StoragePlan, profiles: ProfileSet) -> list[dict[str, Any]]:
    """Per chemistry and cell count present: the rested voltage that means 'charge now'."""
    seen: dict[tuple[str, int], dict[str, Any]] = {}
    for i in range(len(plan.rows)):
        key = (plan.chemistry[i], int(plan.cells[i]))
        if key in seen:
            continue
        profile = profiles.get(key[0])
        table = profile.rest_voltage.table
        threshold = float(plan.threshold[i])
        seen[key] = {
            "chemistry": profile.name, "cells": key[1],
            "threshold_pct": threshold,
            "charge_below_v": float(ocv_from_soc(threshold, table)) * key[1],
            "full_v": float(ocv_from_soc(100.0, table)) * key[1],
            "storage_v": float(ocv_from_soc(float(plan.target_soc[i]), table)) * key[1],
            "lithium": profile.family == "lithium",
        }
    return list(seen.values())


@lru_cache(maxsize=2)
def _environment(html: bool) -> Any:
    from jinja2 import Environment, PackageLoader, StrictUndefined

    return Environment(loader=PackageLoader("chargeplan", "render/templates"), autoescape=html,
                       trim_blocks=True, lstrip_blocks=True, keep_trailing_newline=True,
                       undefined=StrictUndefined)


def procedure(plan: StoragePlan, *, profiles: ProfileSet | None = None,
              html: bool = False) -> str:
    """The written winter procedure, per chemistry present, with cautions and the deferral."""
    profile_set = profiles or ProfileSet(use_environment=False)
    families = sorted(set(plan.family.tolist()))
    vented = any(profile_set.get(c).vented for c in set(plan.chemistry))
    cautions: list[str] = []
    for family in families:
        for line in cautions_for(family, vented=vented and family == "lead_acid")[:-1]:
            if line not in cautions:
                cautions.append(line)
    from chargeplan.cautions import DEFERRAL as deferral
    first = plan.first_freeze_day[plan.first_freeze_day >= 0]
    context = {
        "site": plan.site_file.site, "plan": plan, "bands": _bands(plan, profile_set),
        "families": families, "cautions": cautions, "deferral": deferral,
        "maintained": int(plan.on_maintainer.sum()), "top_ups": len(plan.top_ups),
        "first_freeze": plan.dates[int(first.min())].isoformat() if first.size else None,
        "coldest": float(np.min(plan.bay_min)) if plan.bay_min is not None else None,
        "notes": [(plan.rows[i].id, why) for i, why in plan.notes],
    }
    name = "storage.html.j2" if html else "storage.md.j2"
    return str(_environment(html).get_template(name).render(**context))
