"""The bench's notes: the printed summary, why a battery found no place, and what moved
since the schedule already in the output folder."""

from __future__ import annotations

import math
from typing import TYPE_CHECKING, Any

from chargeplan.cautions import FAMILY_LABELS, groups_text
from chargeplan.physics.ventilation import opening_area_iec62485

if TYPE_CHECKING:
    from chargeplan.planners.bench import BenchPlan
    from chargeplan.planners.bench_schedule import Problem

__all__ = ["headline", "moved", "summary", "why_not"]


def why_not(p: Problem, i: int) -> str:
    """Why battery i found no place: the room's ventilation, the mains budget, or the days."""
    channels = [c for (b, c) in p.duration if b == i]
    air = min(p.airflow[(i, c)] for c in channels)
    watts = min(p.power[(i, c)] for c in channels)
    if air > p.room + 1e-9:
        return (f"gasses {air:.3g} m3/h alone; the room gives {p.room:.3g} m3/h: it needs "
                f"{air:.3g} m3/h of airflow or {float(opening_area_iec62485(air)):.3g} cm2 "
                "openings (IEC 62485-2 cl. 7)")
    if watts > p.budget + 1e-9:
        return f"needs {watts:.0f} W alone; the mains budget is {p.budget:.0f} W"
    days = len(p.calendar.working_days())
    return (f"no room within the {days} working days planned (channels, ventilation and mains "
            "all taken): add channels, airflow of more than "
            f"{p.room:.3g} m3/h, or plan it later")


def _due_text(plan: BenchPlan, i: int, end: float) -> str:
    due = plan.due_min[i]
    if not math.isfinite(due):
        return ""
    when = plan.clock(due)
    return f"  due {when}: " + ("met" if end <= due + 1e-6 else "MISSED")


def headline(plan: BenchPlan) -> list[str]:
    """The summary's first lines: what was scheduled, the bound, ventilation and mains."""
    return summary(plan).splitlines()[:4 if plan.bench.mains_budget_w else 3]


def summary(plan: BenchPlan) -> str:
    names = [c.name for c in plan.bench.channels]
    work = plan.calendar.working_between
    span = work(plan.start_min, plan.makespan_min)
    bound = work(plan.start_min, plan.lower_bound_min)
    gap = (span / bound - 1) * 100 if bound > 1e-9 else 0.0
    lines = [f"bench: {len(plan.batteries)} batteries, {len(names)} channels; "
             f"{len(plan.jobs)} scheduled from {plan.clock(plan.start_min)}, finishing "
             f"{plan.clock(plan.makespan_min)}",
             f"  lower bound {plan.clock(plan.lower_bound_min)} for the scheduled batteries: "
             f"at most {max(gap, 0.0):.0f} % from the best possible order (in working time)",
             f"  ventilation: the room gives {plan.room_airflow_m3_per_h:.3g} m3/h; peak need "
             f"{plan.peak_airflow_m3_per_h:.3g} m3/h (IEC 62485-2 cl. 7)"]
    if plan.bench.mains_budget_w:
        lines.append(f"  mains: peak {plan.peak_power_w:.0f} W of "
                     f"{plan.bench.mains_budget_w:.0f} W")
    for job in sorted(plan.jobs, key=lambda j: (j.channel, j.start_min)):
        b = plan.batteries[job.battery]
        lines.append(f"  {names[job.channel]:<12} {b.id:<14} {plan.clock(job.start_min)} -> "
                     f"{plan.clock(job.end_min)}"
                     + (" (on charge)" if job.on_charge else "")
                     + (" (staggered)" if job.staggered else "")
                     + _due_text(plan, job.battery, job.end_min))
    for i, why in plan.unscheduled.items():
        lines.append(f"  ! {plan.batteries[i].id}: not scheduled: {why}")
    for i in plan.progress.faulted:
        lines.append(f"  ! {plan.batteries[i].id}: faulted: off the schedule; inspect it")
    for i in plan.progress.finished:
        lines.append(f"  done: {plan.batteries[i].id}")
    lines += [f"  ! {note}" for note in plan.notes]
    return "\n".join(lines) + "\n\n" + groups_text(chemistry_cautions(plan))


def chemistry_cautions(plan: Any) -> list[tuple[str, list[str]]]:
    """The cautions of every chemistry on the bench, once each, grouped by family (the
    deferral is apart): each line as the plans carry it."""
    groups: dict[str, list[str]] = {}
    for job in sorted(plan.jobs, key=lambda j: j.battery):
        charge = plan.plan_of(job)
        label = FAMILY_LABELS[charge.battery.family]
        seen = groups.setdefault(label, [])
        seen.extend(line for line in charge.cautions[:-1] if line not in seen)
    return sorted(groups.items())


def moved(previous: dict[str, tuple[str, str, str]], plan: BenchPlan) -> list[str]:
    """What changed against a schedule already written: ``previous`` maps a battery id to
    its (channel, start, end) as schedule.csv holds them."""
    from chargeplan.render.bench_files import schedule_rows

    now = {r["battery"]: (r["channel"], r["start"], r["end"]) for r in schedule_rows(plan)}
    out = []
    for bid, (channel, start, end) in now.items():
        before = previous.get(bid)
        if before is None:
            out.append(f"new: {bid} on {channel} {start} -> {end}")
        elif before != (channel, start, end):
            out.append(f"moved: {bid} from {before[0]} {before[1]} -> {before[2]} to {channel} "
                       f"{start} -> {end}")
    out += [f"off the schedule: {bid}" for bid in previous if bid not in now]
    return out
