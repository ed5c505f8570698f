"""The bench's files for a workshop: schedule.csv and schedule.ics (and reading back the
schedule already in the output folder, to say what moved and to raise SEQUENCE)."""

from __future__ import annotations

import csv
import datetime as dt
import hashlib
import io
import math
from pathlib import Path

from chargeplan.plan import Severity
from chargeplan.planners.bench import BenchPlan

__all__ = ["SCHEDULE_COLUMNS", "bench_outputs", "previous_schedule", "schedule_csv", "schedule_ics",
           "schedule_rows", "warning_ids"]

SCHEDULE_COLUMNS = ("battery", "channel", "start", "end", "chemistry", "due", "warnings",
                    "owner", "status")


def _iso(moment: dt.datetime) -> str:
    return moment.isoformat(timespec="minutes")


def warning_ids(plan: BenchPlan, battery: int, channel: int) -> list[str]:
    """The rule ids of a plan's warnings, once each, in order."""
    ids: list[str] = []
    for f in plan.options[(battery, channel)].plan.findings:
        if f.severity != Severity.INFO and f.rule_id not in ids:
            ids.append(f.rule_id)
    return ids


def schedule_rows(plan: BenchPlan) -> list[dict[str, str]]:
    names = [c.name for c in plan.bench.channels]
    rows = []
    for job in sorted(plan.jobs, key=lambda j: (j.start_min, j.channel)):
        b = plan.batteries[job.battery]
        due = plan.due_min[job.battery]
        rows.append({"battery": b.id, "channel": names[job.channel],
                     "start": _iso(plan.moment(job.start_min)),
                     "end": _iso(plan.moment(job.end_min)), "chemistry": b.chemistry,
                     "due": _iso(plan.moment(due)) if math.isfinite(due) else "",
                     "warnings": " ".join(warning_ids(plan, job.battery, job.channel)),
                     "owner": b.owner or "",
                     "status": "on charge" if job.on_charge else "planned"})
    for i in plan.unscheduled:
        b = plan.batteries[i]
        rows.append({"battery": b.id, "channel": "", "start": "", "end": "",
                     "chemistry": b.chemistry, "due": "", "warnings": "",
                     "owner": b.owner or "", "status": "not scheduled"})
    for i in plan.progress.faulted:
        b = plan.batteries[i]
        rows.append({"battery": b.id, "channel": "", "start": "", "end": "",
                     "chemistry": b.chemistry, "due": "", "warnings": "",
                     "owner": b.owner or "", "status": "faulted: inspect"})
    return rows


def schedule_csv(plan: BenchPlan) -> str:
    from chargeplan.csvfile import csv_row

    out = io.StringIO()
    writer = csv.writer(out, lineterminator="\n")
    csv_row(writer, SCHEDULE_COLUMNS)
    for row in schedule_rows(plan):
        csv_row(writer, (row[k] for k in SCHEDULE_COLUMNS))
    return out.getvalue()


def previous_schedule(folder: str | Path) -> dict[str, tuple[str, str, str]]:
    """battery -> (channel, start, end) from the schedule.csv already in ``folder``."""
    from chargeplan.csvfile import csv_reader, csv_rows

    path = Path(folder) / "schedule.csv"
    if not path.is_file():
        return {}
    shown, reader = csv_reader(path)
    errors: list[str] = []
    return {row["battery"]: (row.get("channel", ""), row.get("start", ""), row.get("end", ""))
            for _line, row in csv_rows(reader, shown, errors)
            if row.get("battery") and row.get("start")}


def _uid(battery_id: str) -> str:
    return hashlib.sha256(battery_id.encode()).hexdigest()[:16] + "-bench@chargeplan"


def schedule_ics(plan: BenchPlan, previous_ics: str | Path | None = None) -> bytes:
    """One event per job; the UID is the battery's. Compared with the calendar at
    ``previous_ics`` (render/ics.py): an unchanged job keeps its SEQUENCE and DTSTAMP, a
    changed one gets SEQUENCE raised and the plan's day as its DTSTAMP, and a job no longer
    planned (finished, or taken off the bench) is dropped, not cancelled."""
    from chargeplan.render.ics import EventSpec, read_previous, write_calendar

    before = read_previous(previous_ics) if previous_ics is not None else {}
    names = [c.name for c in plan.bench.channels]
    # the plan's day, not the clock: a re-plan that changes nothing writes the same bytes
    stamp = dt.datetime.combine(plan.calendar.origin.date(), dt.time(0, 0), tzinfo=dt.UTC)
    events = []
    for job in sorted(plan.jobs, key=lambda j: (j.start_min, j.channel)):
        b = plan.batteries[job.battery]
        warnings = warning_ids(plan, job.battery, job.channel)
        events.append(EventSpec(
            _uid(b.id), plan.moment(job.start_min), plan.moment(job.end_min),
            f"Charge {b.id} on {names[job.channel]}",
            f"{b.chemistry}, {b.capacity_ah:g} Ah"
            + (f"; warnings {' '.join(warnings)}" if warnings else "")
            + "; see cards.html for the setup",
            location=f"bench channel {names[job.channel]}"))
    return write_calendar(events, before, prodid="-//chargeplan//charging bench//EN",
                          now=stamp, cancel_missing=False)


def bench_outputs(plan: BenchPlan, folder: str | Path) -> tuple[dict[str, str | bytes],
                                                                list[str]]:
    """Every file of the ``-o`` folder, and what moved against the schedule already there."""
    from chargeplan.planners.bench_notes import moved
    from chargeplan.render.bench_docs import bench_document, bench_sheets, setpoint_files

    out = Path(folder)
    changes = moved(previous_schedule(out), plan) if (out / "schedule.csv").is_file() else []
    files: dict[str, str | bytes] = {
        "bench.md": bench_document(plan), "bench.html": bench_document(plan, html=True),
        **bench_sheets(plan), "schedule.csv": schedule_csv(plan),
        "schedule.ics": schedule_ics(plan, out / "schedule.ics"), **setpoint_files(plan)}
    return files, changes
