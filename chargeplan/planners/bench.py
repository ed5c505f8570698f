"""The bench planner: which battery on which channel, in what order, for how long, and the
ventilation the room needs.

Compatibility comes from the core engine: each battery is planned with each kind of
channel, and a refusal is the reason it does not fit; a lithium battery also needs a
channel's lithium mode. Durations are the physics estimates (all plans simulated together).
The schedule is longest-first list scheduling (due times first), each battery on the
compatible channel where it finishes earliest, started only when the room's ventilation
(IEC 62485-2 cl. 7, for the batteries gassing at the same time) and the mains budget allow;
then a local search moves the last-finishing battery while that shortens the day. The lower
bound printed beside the result says how far from optimal it can be.
"""

from __future__ import annotations

import datetime as dt
import math
from bisect import insort
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from chargeplan.errors import InputError, PlanRefused
from chargeplan.loading import read_mapping, validate
from chargeplan.model.battery import BatteryFile
from chargeplan.model.bench import BenchBattery, BenchChannel, BenchFile
from chargeplan.model.charger import ChargerChannel
from chargeplan.plan import ChargePlan
from chargeplan.planners.ventilation import available_airflow
from chargeplan.profiles import ProfileSet

__all__ = [
    "CHARGER_EFFICIENCY",
    "BenchPlan",
    "Job",
    "load_bench",
    "plan_bench",
    "read_bench_batteries",
]

#: Mains power = battery power / this (common practice: switch-mode chargers near 85 %).
CHARGER_EFFICIENCY = 0.85
#: The most moves the local search makes (each moves the last-finishing battery).
LOCAL_SEARCH_MOVES = 50
#: A lead-acid battery with no probe is unfit when its temperature is this far from the
#: profile's reference (compensation needs the probe; common practice).
PROBE_NEEDED_K = 10.0

_CHANNEL_FIELDS = ("max_voltage_v", "min_voltage_v", "max_current_a", "min_current_a",
                   "voltage_step", "current_step", "temperature_probe",
                   "can_disable_high_voltage_stages")


def load_bench(path: str | Path) -> BenchFile:
    return validate(BenchFile, read_mapping(path, what="bench"), file=str(path))


def read_bench_batteries(path: str | Path) -> list[BenchBattery]:
    """The bench's batteries from a CSV (columns as the bench file's keys)."""
    from chargeplan.csvfile import read_rows

    return read_rows(path, BenchBattery)


@dataclass
class Job:
    battery: int
    channel: int
    start_min: float
    end_min: float
    airflow_m3_per_h: float
    power_w: float
    staggered: bool = False  # started later than its channel was free, for the room's limits


@dataclass
class BenchPlan:
    bench: BenchFile
    batteries: list[BenchBattery]
    fit: list[list[str]]  # [battery][channel]: "fit" or the reasons it does not
    plans: dict[tuple[int, int], ChargePlan]
    duration_min: dict[tuple[int, int], float]
    jobs: list[Job]
    unscheduled: dict[int, str]  # battery -> why it has no place
    room_airflow_m3_per_h: float
    peak_airflow_m3_per_h: float
    peak_power_w: float
    lower_bound_min: float
    notes: list[str] = field(default_factory=list)

    @property
    def makespan_min(self) -> float:
        return max((j.end_min for j in self.jobs), default=0.0)

    def clock(self, minutes: float) -> str:
        start = self.bench.hours.start
        moment = dt.datetime(2000, 1, 1, start.hour, start.minute) + dt.timedelta(
            minutes=minutes)
        days = (moment.date() - dt.date(2000, 1, 1)).days
        return moment.strftime("%H:%M") + (f" (+{days} d)" if days else "")

    def summary(self) -> str:
        names = [c.name for c in self.bench.channels]
        lines = [f"bench: {len(self.batteries)} batteries, {len(names)} channels; "
                 f"{len(self.jobs)} scheduled, finishing at {self.clock(self.makespan_min)}"]
        gap = (self.makespan_min / self.lower_bound_min - 1) * 100 if self.lower_bound_min else 0
        lines.append(f"  lower bound {self.clock(self.lower_bound_min)} for the scheduled "
                     f"batteries: at most {gap:.0f} % from the best possible order")
        lines.append(f"  ventilation: the room gives {self.room_airflow_m3_per_h:.3g} m3/h; "
                     f"peak need {self.peak_airflow_m3_per_h:.3g} m3/h (IEC 62485-2 cl. 7)")
        if self.bench.mains_budget_w:
            lines.append(f"  mains: peak {self.peak_power_w:.0f} W of "
                         f"{self.bench.mains_budget_w:.0f} W")
        for job in sorted(self.jobs, key=lambda j: (j.channel, j.start_min)):
            b = self.batteries[job.battery]
            due = ""
            if b.due is not None:
                due_min = _minutes(b.due) - _minutes(self.bench.hours.start)
                if job.end_min <= due_min + 1e-6:
                    due = "  due " + b.due.strftime("%H:%M") + ": met"
                else:
                    took = job.end_min - job.start_min
                    why = (f"its charge takes {took / 60:.1f} h" if took > due_min
                           else f"held back for ventilation or mains until "
                                f"{self.clock(job.start_min)}" if job.staggered
                           else f"waited for a channel until {self.clock(job.start_min)}")
                    due = "  due " + b.due.strftime("%H:%M") + f": MISSED ({why})"
            lines.append(f"  {names[job.channel]:<14} {b.id:<14} {self.clock(job.start_min)} -> "
                         f"{self.clock(job.end_min)}"
                         + (" (staggered for ventilation or mains)" if job.staggered else "")
                         + due)
        for i, why in self.unscheduled.items():
            lines.append(f"  ! {self.batteries[i].id}: not scheduled: {why}")
        lines += [f"  ! {note}" for note in self.notes]
        return "\n".join(lines) + "\n"


def _minutes(t: dt.time) -> float:
    return t.hour * 60 + t.minute


def _battery_file(b: BenchBattery, channel: BenchChannel | None) -> BatteryFile:
    data: dict[str, Any] = {
        "battery": {"name": b.id, "chemistry": b.chemistry, "capacity": f"{b.capacity_ah} Ah"},
        "conditions": {"battery_temperature": f"{b.temperature_c} degC"},
    }
    if b.cells_in_series is not None:
        data["battery"]["cells_in_series"] = b.cells_in_series
    if b.nominal_voltage_v is not None:
        data["battery"]["nominal_voltage"] = f"{b.nominal_voltage_v} V"
    if b.state_of_charge_pct is not None:
        data["state"] = {"state_of_charge": f"{b.state_of_charge_pct} %"}
    elif b.rest_voltage_v is not None:
        data["state"] = {"rest_voltage": f"{b.rest_voltage_v} V"}
    model = BatteryFile.model_validate(data)
    if channel is not None:
        charger = {name: getattr(channel, name) for name in _CHANNEL_FIELDS}
        model = model.model_copy(update={"charger": ChargerChannel.model_construct(**charger)})
    return model


def plan_bench(bench: BenchFile, batteries: list[BenchBattery] | None = None, *,
               profiles: ProfileSet | None = None) -> BenchPlan:
    """Compatibility, durations and the schedule (see the module docstring)."""
    from chargeplan.estimate import estimate_plans

    profile_set = profiles or ProfileSet(use_environment=False)
    rows = list(bench.batteries or []) + list(batteries or [])
    ids = [b.id for b in rows]
    twice = sorted({i for i in ids if ids.count(i) > 1})
    if twice:
        raise InputError(f"battery id '{twice[0]}' is listed twice", field="batteries",
                         fix="give each battery its own id")
    if not rows:
        raise InputError("no batteries on the bench", field="batteries",
                         fix="list them under batteries: or give --batteries FILE.csv")
    channels = bench.channels
    day_min = bench.hours.minutes
    fit = [["fit"] * len(channels) for _ in rows]
    plans: dict[tuple[int, int], ChargePlan] = {}
    cache: dict[tuple[int, tuple[Any, ...]], ChargePlan | str] = {}
    from chargeplan.engine.planner import plan_charge

    for i, b in enumerate(rows):
        try:
            profile = profile_set.get(b.chemistry, field=f"batteries[{i}].chemistry")
        except InputError as error:
            raise error.in_file(f"battery {b.id}") from None
        for c, channel in enumerate(channels):
            reasons = []
            if profile.family == "lithium" and not channel.lithium_mode:
                reasons.append("no lithium mode")
            probe_far = abs(b.temperature_c - (profile.temperature.compensation.reference.value
                                              if profile.temperature.compensation else 25.0))
            if (profile.family == "lead_acid" and not channel.temperature_probe
                    and probe_far > PROBE_NEEDED_K):
                reasons.append(f"no probe where compensation needs one ({b.temperature_c:g} "
                               "degC)")
            signature = tuple(getattr(channel, name) for name in _CHANNEL_FIELDS)
            key = (i, signature)
            if key not in cache:
                try:
                    cache[key] = plan_charge(_battery_file(b, channel), profiles=profile_set)
                except PlanRefused as refusal:
                    cache[key] = refusal.reason
                except InputError as error:
                    cache[key] = f"{error.field}: {error.problem}" if error.field else str(error)
            got = cache[key]
            if isinstance(got, str):
                reasons.append(got)
            if reasons:
                fit[i][c] = "; ".join(reasons)
            else:
                assert isinstance(got, ChargePlan)
                plans[(i, c)] = got
    # estimate each distinct plan once, all together
    distinct = {id(p): p for p in plans.values()}
    if distinct:
        estimate_plans(list(distinct.values()), profiles=profile_set)
    duration: dict[tuple[int, int], float] = {}
    airflow = np.zeros(len(rows))
    power: dict[tuple[int, int], float] = {}
    from chargeplan.planners.ventilation import requirement

    for (i, c), p in plans.items():
        total = p.total_estimate()
        channel = channels[c]
        if total is None or any("would stop with a fault" in f.message for f in p.findings):
            fit[i][c] = ("current too low to finish: the model expects a stage to outlast its "
                         "safety timer (or has no estimate)")
            continue
        minutes = total[0] / 60.0
        if minutes > day_min and not channel.unattended:
            fit[i][c] = (f"current too low to finish in the day ({minutes / 60:.1f} h; the "
                         "channel may not run unattended)")
            continue
        watts = max(s.voltage_v * s.current_a for s in p.stages) / CHARGER_EFFICIENCY
        if channel.power_max_w is not None and watts > channel.power_max_w:
            fit[i][c] = f"needs {watts:.0f} W, the channel gives {channel.power_max_w:.0f} W"
            continue
        duration[(i, c)] = minutes
        power[(i, c)] = watts
        b = p.battery
        if b.family == "lead_acid":
            vented = profile_set.get(b.profile_id).vented
            airflow[i] = requirement(b.cells_in_series, b.capacity_ah,
                                     "vented" if vented else "vrla", "boost").airflow_m3_per_h
    plans = {k: v for k, v in plans.items() if k in duration}
    room = available_airflow(bench.room.airflow_m3_per_h, bench.room.opening_area_cm2)
    budget = bench.mains_budget_w or math.inf
    jobs, unscheduled, notes = _schedule(rows, channels, duration, airflow, power, room,
                                         budget, day_min, _minutes(bench.hours.start))
    for i, row in enumerate(fit):
        if i not in {j.battery for j in jobs} and i not in unscheduled:
            unscheduled[i] = "fits no channel: " + " | ".join(
                f"{channels[c].name}: {why}" for c, why in enumerate(row))
    lower = _lower_bound(rows, channels, duration, airflow, room, jobs)
    peak_air, peak_power = _peaks(jobs)
    return BenchPlan(bench, rows, fit, plans, duration, jobs, unscheduled, room, peak_air,
                     peak_power, lower, notes)


def _earliest(jobs: list[Job], free: float, minutes: float, airflow: float, watts: float,
              room: float, budget: float) -> float | None:
    """The earliest start at or after ``free`` at which a job of ``minutes`` keeps the room's
    airflow and the mains budget: tried at ``free`` and at each later end of a placed job,
    checked at every start inside the window (numpy over the jobs placed)."""
    if airflow > room + 1e-9 or watts > budget + 1e-9:
        return None
    later = jobs  # the caller passes only the jobs that end after ``free``
    if not later:
        return free
    first = [j for j in later if j.start_min < free + minutes]
    if _fits(first, free, free + minutes, airflow, watts, room, budget):
        return free
    starts = np.fromiter((j.start_min for j in later), float, len(later))
    ends = np.fromiter((j.end_min for j in later), float, len(later))
    air = np.fromiter((j.airflow_m3_per_h for j in later), float, len(later))
    power = np.fromiter((j.power_w for j in later), float, len(later))
    for t in np.unique(np.concatenate(([free], ends[ends > free]))):
        stop = t + minutes
        near = (starts < stop) & (ends > t)
        if not near.any():
            return float(t)
        s_, e_ = starts[near], ends[near]
        points = np.concatenate(([t], s_[(s_ > t) & (s_ < stop)]))
        inside = (s_[None, :] <= points[:, None]) & (points[:, None] < e_[None, :])
        if ((inside @ air[near]).max() + airflow <= room + 1e-9
                and (inside @ power[near]).max() + watts <= budget + 1e-9):
            return float(t)
    return None


def _fits(jobs: list[Job], start: float, stop: float, airflow: float, watts: float,
          room: float, budget: float) -> bool:
    """Whether a job over [start, stop) fits beside ``jobs`` (all overlapping or not)."""
    running = [j for j in jobs if j.start_min < stop and j.end_min > start]
    if not running:
        return True
    points = [start, *(j.start_min for j in running if start < j.start_min < stop)]
    for t in points:
        here = [j for j in running if j.start_min <= t < j.end_min]
        if (sum(j.airflow_m3_per_h for j in here) + airflow > room + 1e-9
                or sum(j.power_w for j in here) + watts > budget + 1e-9):
            return False
    return True


def _ending_after(placed: list[Job], t: float) -> list[Job]:
    """The placed jobs (kept sorted by end) that end after ``t``: the only ones a job
    starting at or after ``t`` can overlap."""
    from bisect import bisect_right

    return placed[bisect_right(placed, t, key=lambda j: j.end_min):]


def _schedule(rows, channels, duration, airflow, power, room, budget, day_min, day_start):
    """The best of three list-scheduling orders (due first; most constrained first; longest
    first), each improved by the local search: fewest left out, then fewest due times
    missed, then the earliest finish."""
    by_battery: dict[int, list[int]] = {}
    for (i, c) in duration:
        by_battery.setdefault(i, []).append(c)

    def longest(i: int) -> float:
        return -min(duration[(i, c)] for c in by_battery[i])

    def due(i: int) -> float:
        """Minutes from the start of the working day."""
        return _minutes(rows[i].due) - day_start if rows[i].due is not None else math.inf

    orders = [
        sorted(by_battery, key=lambda i: (due(i), longest(i))),
        sorted(by_battery, key=lambda i: (len(by_battery[i]), due(i), longest(i))),
        sorted(by_battery, key=longest),
    ]
    best = None
    for order in orders:
        result = _list_schedule(order, rows, channels, duration, airflow, power, room, budget,
                                day_min, by_battery)
        jobs = result[0]
        missed = sum(1 for j in jobs if rows[j.battery].due is not None
                     and j.end_min > due(j.battery) + 1e-6)
        score = (len(result[1]), missed, max((j.end_min for j in jobs), default=0.0))
        if best is None or score < best[0]:
            best = (score, result)
    assert best is not None
    return best[1]


def _list_schedule(order, rows, channels, duration, airflow, power, room, budget, day_min,
                   by_battery):
    notes: list[str] = []
    unscheduled: dict[int, str] = {}
    jobs: list[Job] = []
    free = [0.0] * len(channels)

    # at most one battery a channel runs at once: if even the largest such set stays inside
    # the room's airflow and the budget, the limits never bind and need no checking
    top = len(channels)
    most_air = sum(sorted(float(airflow[i]) for i in by_battery)[-top:])
    most_power = sum(sorted(max(power[(i, c)] for c in by_battery[i])
                            for i in by_battery)[-top:])
    if most_air <= room + 1e-9:
        room = math.inf
    if most_power <= budget + 1e-9:
        budget = math.inf

    def place(i: int, channel_free: list[float], placed: list[Job]) -> Job | None:
        """The compatible channel where battery i finishes earliest. Channels are tried in
        order of their earliest possible finish, and the search stops once no later channel
        can beat the best found."""
        best: Job | None = None
        for c in sorted(by_battery[i], key=lambda c: channel_free[c] + duration[(i, c)]):
            minutes = duration[(i, c)]
            if best is not None and channel_free[c] + minutes >= best.end_min:
                break
            start = _earliest(_ending_after(placed, channel_free[c]), channel_free[c],
                              minutes, float(airflow[i]), power[(i, c)], room, budget)
            if start is None:
                continue
            if start + minutes > day_min and not channels[c].unattended:
                continue
            job = Job(i, c, start, start + minutes, float(airflow[i]), power[(i, c)],
                      staggered=start > channel_free[c] + 1e-9)
            if best is None or job.end_min < best.end_min:
                best = job
        return best

    for i in order:
        if airflow[i] > room + 1e-9:
            from chargeplan.physics.ventilation import opening_area_iec62485

            unscheduled[i] = (f"gasses {airflow[i]:.3g} m3/h alone; the room gives {room:.3g} "
                              f"m3/h: it needs {airflow[i]:.3g} m3/h of airflow or "
                              f"{float(opening_area_iec62485(airflow[i])):.3g} cm2 openings")
            continue
        job = place(i, free, jobs)
        if job is None:
            unscheduled[i] = _why_not(i, free, jobs, by_battery, duration, airflow, power,
                                      channels, room, budget, day_min)
            continue
        insort(jobs, job, key=lambda j: j.end_min)
        free[job.channel] = job.end_min
    # local search: move the last-finishing battery while that ends the bench sooner
    for _ in range(min(len(jobs), LOCAL_SEARCH_MOVES)):
        if not jobs:
            break
        last = max(jobs, key=lambda j: j.end_min)
        others = [j for j in jobs if j is not last]
        channel_free = [max([j.end_min for j in others if j.channel == c], default=0.0)
                        for c in range(len(channels))]
        moved = place(last.battery, channel_free, others)
        if moved is None or moved.end_min >= last.end_min - 1e-6:
            break
        jobs = others
        insort(jobs, moved, key=lambda j: j.end_min)
    if any(j.staggered for j in jobs):
        notes.append("some batteries start later than their channel is free, so that the room's "
                     "ventilation (or the mains budget) is never exceeded")
    return jobs, unscheduled, notes


def _why_not(i, free, jobs, by_battery, duration, airflow, power, channels, room, budget,
             day_min) -> str:
    """Why battery i found no place: the day, the room's ventilation or the mains budget."""
    from chargeplan.physics.ventilation import opening_area_iec62485

    ends = [free[c] + duration[(i, c)] for c in by_battery[i]]
    if all(e > day_min and not channels[c].unattended for c, e in zip(by_battery[i], ends,
                                                                      strict=True)):
        late = min(e - day_min for e in ends)
        return (f"its channels are taken: it would end at least {late:.0f} min after the "
                "working day; give it a channel that may run unattended, or another day")
    peak = 0.0
    watts = 0.0
    for c in by_battery[i]:
        running = [j for j in jobs if j.end_min > free[c]
                   and j.start_min < free[c] + duration[(i, c)]]
        peak = max(peak, sum(j.airflow_m3_per_h for j in running) + float(airflow[i]))
        watts = max(watts, sum(j.power_w for j in running) + power[(i, c)])
    if peak > room + 1e-9:
        return (f"the room's ventilation ({room:.3g} m3/h) is taken by batteries gassing at the "
                f"same time, even staggered within the day: charging it beside them needs "
                f"{peak:.3g} m3/h of airflow or {float(opening_area_iec62485(peak)):.3g} cm2 "
                "of openings (IEC 62485-2 cl. 7)")
    if watts > budget + 1e-9:
        return (f"the mains budget ({budget:.0f} W) is taken, even staggered within the day: "
                f"it needs {watts:.0f} W at once")
    return "no compatible channel is free within the working day"


def _lower_bound(rows, channels, duration, airflow, room, jobs) -> float:
    placed = {j.battery for j in jobs}
    shortest: dict[int, float] = {}
    for (b, _c), d in duration.items():
        if b in placed:
            shortest[b] = min(d, shortest.get(b, math.inf))
    if not shortest:
        return 0.0
    longest = max(shortest.values())
    spread = sum(shortest.values()) / len(channels)
    gas = sum(airflow[i] * shortest[i] for i in placed) / room if room > 0 else 0.0
    return max(longest, spread, gas)


def _peaks(jobs: list[Job]) -> tuple[float, float]:
    air = power = 0.0
    for t in {j.start_min for j in jobs}:
        running = [j for j in jobs if j.start_min <= t < j.end_min]
        air = max(air, sum(j.airflow_m3_per_h for j in running))
        power = max(power, sum(j.power_w for j in running))
    return air, power
