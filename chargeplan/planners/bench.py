"""The bench planner: which battery on which channel, on which day, in what order, and the
ventilation the room needs.

Intake (:mod:`~chargeplan.planners.bench_intake`): each battery planned by the core engine on
each kind of channel, with typed values; a refusal is the reason it does not fit. Policy
(here): durations from the physics estimates (all plans simulated together), the working
spans that are too short, the gas each charge makes (IEC 62485-2 cl. 7), the warm-up of a
cold battery and a re-plan's progress. Kernel (:mod:`~chargeplan.planners.bench_schedule`):
list scheduling in working hours under the room's airflow and the mains budget. Notes
(:mod:`~chargeplan.planners.bench_notes`): the summary and what moved.
"""

from __future__ import annotations

import datetime as dt
import math
from dataclasses import dataclass, field
from pathlib import Path

from chargeplan.errors import InputError
from chargeplan.loading import read_mapping, validate
from chargeplan.model.bench import BenchBattery, BenchFile
from chargeplan.model.profile import Profile
from chargeplan.plan import HIGH_VOLTAGE_STAGES, ChargePlan, ExitKind, Finding, Severity
from chargeplan.planners.bench_calendar import HORIZON_DAYS, WorkCalendar, work_calendar
from chargeplan.planners.bench_intake import (
    CHARGER_EFFICIENCY,
    COLD_INSTRUCTION,
    Misfit,
    Option,
    plan_options,
)
from chargeplan.planners.bench_progress import Progress
from chargeplan.planners.bench_schedule import Job, Problem, lower_bound, peaks, schedule
from chargeplan.planners.ventilation import available_airflow, charge_airflow
from chargeplan.profiles import ProfileSet

__all__ = ["CHARGER_EFFICIENCY", "BenchPlan", "Job", "attended_always", "load_bench", "plan_bench",
           "read_bench_batteries", "replan_at", "replan_bench"]

#: The after-charge check: the rested voltage 12-24 h after charging (common practice)
#: should read at least the profile's OCV-table voltage at this state of charge (common
#: practice, from memory: a battery that took its charge rests near its 100 % row; below the
#: 90 % row it did not, or a cell is weak).
AFTER_CHECK_PASS_SOC_PCT = 90.0
AFTER_CHECK_REST_H = (12, 24)


def load_bench(path: str | Path) -> BenchFile:
    return validate(BenchFile, read_mapping(path, what="bench"), file=str(path))


def read_bench_batteries(path: str | Path) -> list[BenchBattery]:
    """The bench's batteries from a CSV (columns as the bench file's keys)."""
    from chargeplan.csvfile import read_rows

    return read_rows(path, BenchBattery)


@dataclass
class BenchPlan:
    bench: BenchFile
    batteries: list[BenchBattery]
    calendar: WorkCalendar
    misfits: list[list[list[Misfit]]]  # [battery][channel]: empty where it fits
    options: dict[tuple[int, int], Option]
    jobs: list[Job]
    unscheduled: dict[int, str]  # battery -> why it has no place
    room_airflow_m3_per_h: float
    peak_airflow_m3_per_h: float
    peak_power_w: float
    start_min: float  # the first working moment planned from
    lower_bound_min: float
    warm_up_min: list[float]
    pass_voltage_v: list[float]  # the after-charge check's pass line, per battery
    due_min: list[float]
    progress: Progress = field(default_factory=Progress)
    replanned: bool = False
    notes: list[str] = field(default_factory=list)
    intake: _Intake | None = field(default=None, repr=False)

    @property
    def fit(self) -> list[list[str]]:
        """[battery][channel]: "fit", or the reasons it does not."""
        return [["; ".join(m.text for m in cell) if cell else "fit" for cell in row]
                for row in self.misfits]

    @property
    def plans(self) -> dict[tuple[int, int], ChargePlan]:
        return {k: o.plan for k, o in self.options.items()}

    @property
    def duration_min(self) -> dict[tuple[int, int], float]:
        return {k: o.minutes for k, o in self.options.items()}

    def plan_of(self, job: Job) -> ChargePlan:
        return self.options[(job.battery, job.channel)].plan

    @property
    def makespan_min(self) -> float:
        return max((j.end_min for j in self.jobs), default=self.start_min)

    def moment(self, minutes: float) -> dt.datetime:
        return self.calendar.at(minutes)

    def clock(self, minutes: float) -> str:
        """'Mon 12-07 08:00': short, with the day, for sheets and the summary."""
        return self.moment(minutes).strftime("%a %m-%d %H:%M")

    def summary(self) -> str:
        from chargeplan.planners.bench_notes import summary

        return summary(self)


def _due_min(b: BenchBattery, calendar: WorkCalendar, first_day: dt.date) -> float:
    if b.due is None:
        return math.inf
    moment = b.due if isinstance(b.due, dt.datetime) else dt.datetime.combine(first_day, b.due)
    return calendar.minutes(moment)


def _timer_fault(plan: ChargePlan) -> bool:
    """The model expects a stage to run into its safety timer (the charger would stop with a
    fault), or a stage has no estimate: read from the estimates, not from any wording."""
    for s in plan.stages:
        e = s.estimate
        if e is None:
            return True
        if e.per_day or s.timer_s is None:
            continue
        planned_end = min((x.value for x in s.exits if x.kind == ExitKind.DURATION),
                          default=math.inf)
        if s.timer_s < planned_end and (e.duration_s or 0.0) >= s.timer_s - 1e-6:
            return True
    return False


def _policy(rows: list[BenchBattery], bench: BenchFile, fit: list[list[Option | list[Misfit]]],
            found: list[Profile], calendar: WorkCalendar) -> None:
    """Durations, power and airflow onto the options; misfits where a charge runs into its
    timer or outlasts every working span of an attended channel."""
    longest = calendar.longest_span_min
    for i, row in enumerate(fit):
        for c, got in enumerate(row):
            if not isinstance(got, Option):
                continue
            channel = bench.channels[c]
            total = got.plan.total_estimate()
            if total is None or _timer_fault(got.plan):
                row[c] = [Misfit("bench.timer", "the model expects a stage to outlast its "
                                 "safety timer (the charger would stop with a fault): use a "
                                 "channel with a larger current")]
                continue
            got.minutes = total[0] / 60.0
            watched = overcharge_stage(got.plan)
            if got.minutes > longest + 1e-6 and (watched or not channel.unattended
                                                 or attended_always(got.plan)):
                if watched:
                    text = (f"{got.minutes / 60:.1f} h with {watched} (needs a person there), "
                            f"past every {longest / 60:.1f} h working span: run the {watched} "
                            "on a later charge of its own, or on longer working hours")
                elif attended_always(got.plan):
                    text = (f"its lithium charge takes {got.minutes / 60:.1f} h, longer than "
                            f"the longest working span ({longest / 60:.1f} h), and a lithium "
                            "charge is never left unattended, even on an unattended channel: "
                            "use a channel with a larger current, or longer working hours")
                else:
                    text = (f"its charge takes {got.minutes / 60:.1f} h, longer than the "
                            f"longest working span ({longest / 60:.1f} h) on a channel that "
                            "may not run unattended: use an unattended channel or one with a "
                            "larger current")
                row[c] = [Misfit("bench.span", text)]
                continue
            top = max(got.plan.stages, key=lambda s: s.voltage_v * s.current_a)
            got.power_w = top.voltage_v * top.current_a / CHARGER_EFFICIENCY
            if found[i].family == "lead_acid":
                got.airflow_m3_per_h, got.gas_ma_per_ah, _ = charge_airflow(
                    got.plan, found[i],
                    channel_may_equalize=not channel.can_disable_high_voltage_stages,
                    channel_max_current_a=channel.max_current_a)


def attended_always(plan: ChargePlan) -> bool:
    """Whether a charge needs someone there to the end on any channel: a lithium charge
    (its caution: "do not leave the charge unattended", chargeplan.cautions) or one with a
    desulfation or equalization (:func:`overcharge_stage`). Such a charge ends inside the
    working span it starts in, even on a channel marked ``unattended``."""
    return plan.battery.family == "lithium" or overcharge_stage(plan) is not None


def overcharge_stage(plan: ChargePlan) -> str | None:
    """The stage of a charge that needs someone present to the end (desulfation or
    equalization: CP203 and CP205 say "stay nearby"), or None."""
    return next((s.kind.value for s in plan.stages if s.kind in HIGH_VOLTAGE_STAGES), None)


def _estimate(fit: list[list[Option | list[Misfit]]], profiles: ProfileSet) -> None:
    from chargeplan.estimate import estimate_plans

    distinct = {id(o.plan): o.plan for row in fit for o in row if isinstance(o, Option)}
    if distinct:
        estimate_plans(list(distinct.values()), profiles=profiles)


def _cold_findings(rows: list[BenchBattery], fit, warm_ups: list[float]) -> None:
    seen: set[int] = set()
    for i, row in enumerate(fit):
        if not warm_ups[i]:
            continue
        for got in row:
            if isinstance(got, Option) and id(got.plan) not in seen:
                seen.add(id(got.plan))
                got.plan.findings.insert(0, Finding(
                    Severity.WARNING, "CP104",
                    f"the battery was at {rows[i].temperature_c:g} °C, below its lowest charge "
                    f"temperature: warm it for at least {warm_ups[i] / 60:g} h first; "
                    f"{COLD_INSTRUCTION}"))


def _pass_line(b: BenchBattery, profile: Profile, options: dict[int, Option], i: int) -> float:
    from chargeplan.physics.ocv import ocv_from_soc

    cells = options[i].plan.battery.cells_in_series if i in options else (b.cells_in_series
                                                                        or 0)
    return float(ocv_from_soc(AFTER_CHECK_PASS_SOC_PCT, profile.rest_voltage.table)) * cells


def _fits_nowhere(row: list[list[Misfit]]) -> str:
    """A short line: each distinct reason once, cut to its first clause."""
    reasons: list[str] = []
    for cell in row:
        for m in cell:
            text = f"{m.code} {m.text.split(';')[0].split(': ')[0][:80]}"
            if text not in reasons:
                reasons.append(text)
    return "fits no channel: " + "; ".join(reasons) + " (see the compatibility table)"


def _rows(bench: BenchFile, batteries: list[BenchBattery] | None) -> list[BenchBattery]:
    rows = list(bench.batteries or []) + list(batteries or [])
    ids = [b.id for b in rows]
    twice = sorted({i for i in ids if ids.count(i) > 1})
    if twice:
        raise InputError(f"battery id '{twice[0]}' is listed twice", field="batteries",
                         fix="give each battery its own id")
    if not rows:
        raise InputError("no batteries on the bench", field="batteries",
                         fix="list them under batteries: or give --batteries FILE.csv")
    return rows


def plan_bench(bench: BenchFile, batteries: list[BenchBattery] | None = None, *,
               profiles: ProfileSet | None = None, now: dt.datetime | None = None,
               progress: Progress | None = None, today: dt.date | None = None,
               file: str | None = None) -> BenchPlan:
    """Compatibility, durations and the schedule (see the module docstring).

    ``now`` and ``progress`` re-plan a bench under way: batteries on charge keep their
    channel and start, finished ones are dropped, faulted ones listed for inspection, and
    nothing new starts before ``now``. Errors that name no file name ``file``."""
    try:
        return _plan_bench(bench, batteries, profiles=profiles, now=now, progress=progress,
                           today=today)
    except InputError as error:
        if file is None or error.file is not None:
            raise
        raise error.in_file(file) from None


@dataclass
class _Intake:
    """What the engine and the physics said, before any scheduling: reused by a re-plan."""

    bench: BenchFile
    rows: list[BenchBattery]
    first_day: dt.date
    misfits: list[list[list[Misfit]]]
    options: dict[tuple[int, int], Option]
    profiles: list[Profile]
    warm_ups: list[float]


def _intake(bench: BenchFile, batteries: list[BenchBattery] | None,
            profiles: ProfileSet | None, today: dt.date | None) -> _Intake:
    profile_set = profiles or ProfileSet(use_environment=False)
    rows = _rows(bench, batteries)
    first_day = bench.date or today or dt.date.today()
    fit, found, warm_ups = plan_options(rows, bench.channels, profile_set)
    _cold_findings(rows, fit, warm_ups)
    _estimate(fit, profile_set)
    _policy(rows, bench, fit, found, work_calendar(bench.hours, first_day))
    options = {(i, c): o for i, row in enumerate(fit) for c, o in enumerate(row)
               if isinstance(o, Option)}
    misfits = [[[] if isinstance(o, Option) else o for o in row] for row in fit]
    return _Intake(bench, rows, first_day, misfits, options, found, warm_ups)


def _plan_bench(bench: BenchFile, batteries: list[BenchBattery] | None, *,
                profiles: ProfileSet | None, now: dt.datetime | None,
                progress: Progress | None, today: dt.date | None) -> BenchPlan:
    return _scheduled(_intake(bench, batteries, profiles, today), now, progress)


def replan_bench(plan: BenchPlan, *, now: dt.datetime, progress: Progress | None = None
                 ) -> BenchPlan:
    """The bench planned again at ``now`` from ``progress``, reusing ``plan``'s compatibility
    and estimates (nothing about the batteries or channels changed; to add a battery, add it
    to the bench file and plan it again)."""
    return _scheduled(plan.intake, now, progress)


def _scheduled(intake: _Intake, now: dt.datetime | None, progress: Progress | None
               ) -> BenchPlan:
    bench, rows, options = intake.bench, intake.rows, intake.options
    days = HORIZON_DAYS + (max(0, (now.date() - intake.first_day).days) if now else 0)
    calendar = work_calendar(bench.hours, intake.first_day, days)
    first = {}
    for (i, _c), o in options.items():
        first.setdefault(i, o)
    state = progress or Progress()
    start = calendar.first_open if now is None else max(calendar.first_open,
                                                          calendar.minutes(now))
    fixed, dropped = state.apply(rows, bench.channels, options, calendar, start)
    due = [_due_min(b, calendar, intake.first_day) for b in rows]
    room = available_airflow(bench.room.airflow_m3_per_h, bench.room.opening_area_cm2)
    problem = Problem(
        duration={k: o.minutes for k, o in options.items() if k[0] not in dropped},
        power={k: o.power_w for k, o in options.items()},
        airflow={k: o.airflow_m3_per_h for k, o in options.items()},
        release=[start + w for w in intake.warm_ups], due=due,
        attended=[not c.unattended for c in bench.channels], calendar=calendar, room=room,
        budget=bench.mains_budget_w or math.inf, channel_free=[start] * len(bench.channels),
        fixed=fixed, watched={k for k, o in options.items() if attended_always(o.plan)})
    jobs, left = schedule(problem)
    from chargeplan.planners.bench_notes import why_not

    unscheduled = {i: why_not(problem, i) for i in left}
    placed = {j.battery for j in jobs}
    for i, row in enumerate(intake.misfits):
        if i not in placed and i not in unscheduled and i not in dropped:
            unscheduled[i] = _fits_nowhere(row)
    air, power = peaks(jobs)
    notes = (["some batteries start later than their channel is free, so that the room's "
              "ventilation (or the mains budget) is never exceeded"]
             if any(j.staggered for j in jobs) else [])
    return BenchPlan(
        bench, rows, calendar, intake.misfits, options, jobs, unscheduled, room, air, power,
        start, lower_bound(problem, jobs, start), intake.warm_ups,
        [_pass_line(b, intake.profiles[i], first, i) for i, b in enumerate(rows)], due, state,
        replanned=bool(state.rows) or (now is not None and start > calendar.first_open + 1e-9),
        notes=notes, intake=intake)


def replan_at(now: str | None, progress: str | Path | None) -> tuple[dt.datetime | None,
                                                                      Progress | None]:
    """``--now`` and ``--progress`` read for a re-plan (a progress file needs ``--now``)."""
    from chargeplan.model.bench import local_datetime
    from chargeplan.planners.bench_progress import read_progress

    moment = None
    if now is not None:
        try:
            moment = local_datetime(now)
        except ValueError as error:
            problem, _, fix = str(error).partition("; ")
            raise InputError(problem, field="--now", fix=fix or "give the bench's local time, "
                             "e.g. --now 2026-12-07T13:00") from None
    if progress is not None and moment is None:
        raise InputError("a progress file needs the moment it describes", field="--progress",
                         fix="add --now, e.g. --now 2026-12-07T13:00")
    return moment, read_progress(progress) if progress is not None else None
