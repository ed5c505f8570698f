"""The bench's scheduling kernel: pure, on numbers (minutes from the first day's midnight).

Longest-first list scheduling (due times first, most constrained first, longest first; the
best of the three), each battery on the compatible channel where it finishes earliest. A
job starts only inside working hours (someone connects it), not before its release (its
warm-up, or the moment of re-planning), and when the room's ventilation (IEC 62485-2 cl. 7)
and the mains budget allow; on an attended channel it also ends inside the same working
span. Work that does not fit goes to the next working span. A local search then moves the
last-finishing battery while that ends the bench sooner. Jobs already on charge never move.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from chargeplan.planners.bench_calendar import WorkCalendar

__all__ = ["LOCAL_SEARCH_MOVES", "Job", "Problem", "lower_bound", "peaks", "schedule"]

#: The most moves the local search makes (each moves the last-finishing battery).
LOCAL_SEARCH_MOVES = 50
_EPS = 1e-6


@dataclass
class Job:
    battery: int
    channel: int
    start_min: float
    end_min: float
    airflow_m3_per_h: float
    power_w: float
    staggered: bool = False  # started later than its channel was free, for the room's limits
    on_charge: bool = False  # already on charge when re-planned: it keeps channel and start


@dataclass
class Problem:
    duration: dict[tuple[int, int], float]  # minutes, for each battery and channel that fit
    power: dict[tuple[int, int], float]  # mains W
    airflow: dict[tuple[int, int], float]  # m3/h
    release: list[float]  # the earliest start of each battery
    due: list[float]  # minutes, math.inf when none
    attended: list[bool]  # per channel
    calendar: WorkCalendar
    room: float
    budget: float
    channel_free: list[float]  # when each channel is first free
    fixed: list[Job] = field(default_factory=list)
    #: (battery, channel) whose charge needs someone present to the end (lithium; a
    #: desulfation or equalization: bench.attended_always): it ends inside working hours
    #: even on an unattended channel
    watched: set[tuple[int, int]] = field(default_factory=set)

    def attends(self, i: int, c: int) -> bool:
        return self.attended[c] or (i, c) in self.watched

    def channels_of(self) -> dict[int, list[int]]:
        by: dict[int, list[int]] = {}
        for (i, c) in self.duration:
            by.setdefault(i, []).append(c)
        return by


class Usage:
    """The room's airflow and the mains power in use over time: a step function, kept as
    sorted breakpoints and the use on each step (numpy), so a window's peak is one slice."""

    def __init__(self) -> None:
        self.t = np.array([-math.inf])
        self.air = np.zeros(1)
        self.watts = np.zeros(1)

    def _cut(self, x: float) -> None:
        k = int(np.searchsorted(self.t, x, side="right"))
        if self.t[k - 1] != x:
            self.t = np.insert(self.t, k, x)
            self.air = np.insert(self.air, k, self.air[k - 1])
            self.watts = np.insert(self.watts, k, self.watts[k - 1])

    def add(self, job: Job, sign: float = 1.0) -> None:
        self._cut(job.start_min)
        self._cut(job.end_min)
        i = int(np.searchsorted(self.t, job.start_min, side="left"))
        j = int(np.searchsorted(self.t, job.end_min, side="left"))
        self.air[i:j] += sign * job.airflow_m3_per_h
        self.watts[i:j] += sign * job.power_w

    def fits(self, start: float, stop: float, air: float, watts: float, room: float,
             budget: float) -> bool:
        i = int(np.searchsorted(self.t, start, side="right")) - 1
        j = max(int(np.searchsorted(self.t, stop, side="left")), i + 1)
        return bool(self.air[i:j].max() + air <= room + 1e-9
                    and self.watts[i:j].max() + watts <= budget + 1e-9)

    def changes_after(self, t: float) -> np.ndarray:
        """The moments after ``t`` where the use falls (a job ends)."""
        k = int(np.searchsorted(self.t, t, side="right"))
        if k >= len(self.t):
            return self.t[:0]
        falls = ((self.air[k:] - self.air[k - 1:-1] < -1e-12)
                 | (self.watts[k:] - self.watts[k - 1:-1] < -1e-12))
        return self.t[k:][falls]


def earliest(p: Problem, usage: Usage, t0: float, minutes: float, air: float, watts: float,
             attended: bool, limits: tuple[float, float]) -> float | None:
    """The earliest working moment at or after ``t0`` where the job fits: tried at ``t0``,
    at each later moment a placed job ends and at each later opening."""
    room, budget = limits
    if air > room + 1e-9 or watts > budget + 1e-9:
        return None
    bounded = math.isfinite(room) or math.isfinite(budget)
    times = {t0, *p.calendar.openings_after(t0)}
    if bounded:
        times.update(float(x) for x in usage.changes_after(t0))
    for t in sorted(times):
        got = p.calendar.next_start(t)
        if got is None:
            return None
        start, close = got
        if attended and start + minutes > close + _EPS:
            continue
        if not bounded or usage.fits(start, start + minutes, air, watts, room, budget):
            return start
    return None


def _place(p: Problem, i: int, channels: list[int], free: list[float], usage: Usage,
           limits: tuple[float, float]) -> Job | None:
    """The compatible channel where battery i finishes earliest (channels in order of their
    earliest possible finish; stops once no later channel can beat the best found)."""
    best: Job | None = None

    def ready(c: int) -> float:
        return max(free[c], p.release[i])

    for c in sorted(channels, key=lambda c: ready(c) + p.duration[(i, c)]):
        minutes = p.duration[(i, c)]
        if best is not None and ready(c) + minutes >= best.end_min:
            break
        start = earliest(p, usage, ready(c), minutes, p.airflow[(i, c)], p.power[(i, c)],
                         p.attends(i, c), limits)
        if start is None:
            continue
        unlimited = earliest(p, usage, ready(c), minutes, 0.0, 0.0, p.attends(i, c),
                             (math.inf, math.inf)) if start > ready(c) + 1e-9 else start
        job = Job(i, c, start, start + minutes, p.airflow[(i, c)], p.power[(i, c)],
                  staggered=unlimited is not None and start > unlimited + 1e-9)
        if best is None or job.end_min < best.end_min:
            best = job
    return best


def _limits(p: Problem, by: dict[int, list[int]]) -> tuple[float, float]:
    """The room and the budget, or infinity where even the largest set of batteries that can
    run at once (one a channel) stays inside, so that they need no checking."""
    top = len(p.attended)
    most_air = sum(sorted(max(p.airflow[(i, c)] for c in cs) for i, cs in by.items())[-top:])
    most_w = sum(sorted(max(p.power[(i, c)] for c in cs) for i, cs in by.items())[-top:])
    most_air += sum(j.airflow_m3_per_h for j in p.fixed)
    most_w += sum(j.power_w for j in p.fixed)
    return (math.inf if most_air <= p.room + 1e-9 else p.room,
            math.inf if most_w <= p.budget + 1e-9 else p.budget)


def _list_schedule(p: Problem, order: list[int], by: dict[int, list[int]],
                   limits: tuple[float, float]) -> tuple[list[Job], list[int]]:
    jobs = list(p.fixed)
    usage = Usage()
    free = list(p.channel_free)
    for j in p.fixed:
        free[j.channel] = max(free[j.channel], j.end_min)
        usage.add(j)
    left: list[int] = []
    for i in order:
        job = _place(p, i, by[i], free, usage, limits)
        if job is None:
            left.append(i)
            continue
        jobs.append(job)
        usage.add(job)
        free[job.channel] = max(free[job.channel], job.end_min)
    return _improve(p, jobs, usage, by, limits), left


def _improve(p: Problem, jobs: list[Job], usage: Usage, by: dict[int, list[int]],
             limits: tuple[float, float]) -> list[Job]:
    """Move the last-finishing battery while that ends the bench sooner."""
    for _ in range(min(len(jobs), LOCAL_SEARCH_MOVES)):
        movable = [j for j in jobs if not j.on_charge]
        if not movable:
            break
        last = max(movable, key=lambda j: j.end_min)
        others = [j for j in jobs if j is not last]
        free = list(p.channel_free)
        for j in others:
            free[j.channel] = max(free[j.channel], j.end_min)
        usage.add(last, -1.0)
        moved = _place(p, last.battery, by[last.battery], free, usage, limits)
        if moved is None or moved.end_min >= last.end_min - _EPS:
            usage.add(last)
            break
        usage.add(moved)
        jobs = [*others, moved]
    return jobs


def schedule(p: Problem) -> tuple[list[Job], list[int]]:
    """The best of three list-scheduling orders, each improved by the local search: fewest
    left out, then fewest due times missed, then the earliest finish. Returns the jobs
    (with the fixed ones) and the batteries left out."""
    by = p.channels_of()
    limits = _limits(p, by)

    def longest(i: int) -> float:
        return -min(p.duration[(i, c)] for c in by[i])

    orders = [sorted(by, key=lambda i: (p.due[i], longest(i), i)),
              sorted(by, key=lambda i: (len(by[i]), p.due[i], longest(i), i)),
              sorted(by, key=lambda i: (longest(i), i))]
    best = None
    for order in orders:
        jobs, left = _list_schedule(p, order, by, limits)
        missed = sum(1 for j in jobs if j.end_min > p.due[j.battery] + _EPS)
        score = (len(left), missed, max((j.end_min for j in jobs), default=0.0))
        if best is None or score < best[0]:
            best = (score, jobs, left)
    assert best is not None
    return best[1], best[2]


def lower_bound(p: Problem, jobs: list[Job], start: float) -> float:
    """A moment no order can finish the scheduled batteries before: the longest of one
    battery's shortest charge after its release, the channel-time spread over the channels,
    the gas volume over the room's airflow, the energy over the mains budget, and the
    batteries that each take more than half the room or the budget in a row; counted in
    working time when every channel is attended (every job then lies inside working hours)."""
    placed = {j.battery for j in jobs if not j.on_charge}
    if not placed:
        return max((j.end_min for j in jobs), default=start)
    by = p.channels_of()
    fits = {i: by[i] for i in placed}
    minutes = {i: min(p.duration[(i, c)] for c in cs) for i, cs in fits.items()}
    spread = sum(minutes.values()) / len(p.attended)
    gas = (sum(min(p.airflow[(i, c)] for c in fits[i]) * minutes[i] for i in placed) / p.room
           if p.room > 0 and math.isfinite(p.room) else 0.0)
    energy = (sum(min(p.power[(i, c)] for c in fits[i]) * minutes[i] for i in placed)
              / p.budget if math.isfinite(p.budget) else 0.0)
    # batteries that each take more than half the room or the budget never run together
    heavy_air = sum(minutes[i] for i in placed
                    if min(p.airflow[(i, c)] for c in fits[i]) > p.room / 2 + 1e-9)
    heavy_w = sum(minutes[i] for i in placed
                  if min(p.power[(i, c)] for c in fits[i]) > p.budget / 2 + 1e-9)
    work = max(spread, gas, energy, heavy_air, heavy_w)
    single = max(p.calendar.next_start(max(start, p.release[i]))[0] + minutes[i]  # type: ignore[index]
                 for i in placed)
    if all(p.attended):
        return max(single, p.calendar.after_working(start, work))
    return max(single, start + work)


def peaks(jobs: list[Job]) -> tuple[float, float]:
    air = power = 0.0
    for t in {j.start_min for j in jobs}:
        running = [j for j in jobs if j.start_min <= t < j.end_min]
        air = max(air, sum(j.airflow_m3_per_h for j in running))
        power = max(power, sum(j.power_w for j in running))
    return air, power
