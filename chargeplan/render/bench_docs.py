"""The bench's documents: bench.md and bench.html (schedule table, SVG timeline, condensed
compatibility, findings), cards.html (setup cards by channel, then time), queues.html (a
queue card per channel), tags.html (a label sheet), logs.html (a log sheet per battery), and
a setpoint file for each battery whose channel loads files. Templates only format: every
value is the planner's."""

from __future__ import annotations

import math
import re
from functools import lru_cache
from typing import Any

from chargeplan import fmt
from chargeplan.cautions import DEFERRAL
from chargeplan.plan import ChargePlan
from chargeplan.planners.bench import (
    AFTER_CHECK_PASS_SOC_PCT,
    AFTER_CHECK_REST_H,
    BenchPlan,
    overcharge_stage,
)
from chargeplan.planners.bench_intake import COLD_INSTRUCTION
from chargeplan.planners.bench_notes import chemistry_cautions, headline
from chargeplan.render.bench_chart import gantt_svg
from chargeplan.render.text import describe_exit

__all__ = ["BENCH_CAUTIONS", "UNATTENDED_RULE", "bench_document", "bench_sheets", "file_name",
           "gantt_svg", "setpoint_files"]

#: What a channel marked ``unattended`` may do (chargeplan.planners.bench.attended_always):
#: the one place the bench's documents say it.
UNATTENDED_RULE = (
    "A channel marked for unattended use may run a lead-acid charge past closing; a lithium "
    "charge, a desulfation and an equalization always end while someone is there, on every "
    "channel.")


#: The bench's own cautions; each chemistry's follow from its plans (one source:
#: chargeplan.cautions.profile_cautions), never shortened or reworded here.
BENCH_CAUTIONS = (
    "Wear eye protection; keep an eyewash and running water at the bench.",
    "No sparks, flames or smoking within 0.5 m of a charging battery (IEC 62485-2); keep the "
    "room ventilated as worked out under Ventilation.",
    "Connect the battery before switching a channel on; switch off before disconnecting.",
    UNATTENDED_RULE,
)


def file_name(plan: BenchPlan, battery: int) -> str:
    """A setpoint file name for a battery that no other battery's can collide with."""
    safe = re.sub(r"[^A-Za-z0-9._-]", "_", plan.batteries[battery].id)
    return f"setpoints-{battery + 1:03d}-{safe}.json"


def _interlocks(plan: ChargePlan) -> list[str]:
    from chargeplan.render.document import _context

    return list(_context(plan, False)["interlocks"])


def _card(plan: BenchPlan, job: Any) -> dict[str, Any]:
    b = plan.batteries[job.battery]
    channel = plan.bench.channels[job.channel]
    charge = plan.plan_of(job)
    lithium = charge.battery.family == "lithium"
    setup = ["set the channel to its lithium mode" if lithium else
             "lead-acid mode: make sure the channel's lithium mode is off",
             "attach the temperature probe to the battery case" if channel.temperature_probe
             else "no probe on this channel: measure the battery temperature before and "
                  "during the charge"]
    if plan.warm_up_min[job.battery]:
        setup.insert(0, COLD_INSTRUCTION)
    if channel.loads_files:
        setup.append(f"load {file_name(plan, job.battery)}")
        overcharge = overcharge_stage(charge)
        if overcharge:  # a program runs the normal charge only (firmware.charge_program)
            setup.append(f"the file runs the normal charge only: when it ends, run the "
                         f"{overcharge} stage below by hand, staying with the battery")
    return {
        "id": b.id, "owner": b.owner or "", "channel": channel.name,
        "start": plan.clock(job.start_min), "end": plan.clock(job.end_min),
        "summary": charge.summary(), "setup": setup, "on_charge": job.on_charge,
        "findings": [(f.rule_id, f.severity.value, f.message) for f in charge.findings],
        "stages": [{"label": s.kind.label, "voltage": fmt.volts(s.voltage_v),
                    "current": fmt.amps(s.current_a),
                    "ends": "; or ".join(describe_exit(e) for e in s.exits) or "disconnect",
                    "timer": fmt.duration(s.timer_s) if s.timer_s is not None else "—"}
                   for s in charge.stages],
        "interlocks": _interlocks(charge),
        "cautions": charge.cautions[:-1],  # the plan's own list, whole (deferral apart)
        "chemistry": charge.battery.profile_name,
        "due": plan.clock(plan.due_min[job.battery]) if math.isfinite(
            plan.due_min[job.battery]) else "",
        "pass_v": f"{plan.pass_voltage_v[job.battery]:.2f} V",
        "cells": charge.battery.cells_in_series, "flooded": plan.options[
            (job.battery, job.channel)].gas_ma_per_ah > 0 and charge.battery.chemistry ==
        "flooded",
    }


def _cards(plan: BenchPlan) -> list[dict[str, Any]]:
    return [_card(plan, job) for job in sorted(plan.jobs, key=lambda j: (j.channel,
                                                                          j.start_min))]


def _matrix(plan: BenchPlan) -> tuple[list[tuple[str, list[str]]], list[tuple[str, str, str]]]:
    """The compatibility matrix condensed: each distinct reason once, under a short code."""
    codes: dict[tuple[str, str], str] = {}
    legend: list[tuple[str, str, str]] = []
    rows = []
    for i, row in enumerate(plan.misfits):
        cells = []
        for cell in row:
            short = []
            for m in cell:
                key = (m.code, m.text)
                if key not in codes:
                    codes[key] = _letters(len(codes))
                    legend.append((codes[key], m.code, m.text))
                short.append(codes[key])
            cells.append(",".join(short) if short else "ok")
        rows.append((plan.batteries[i].id, cells))
    return rows, legend


def _letters(n: int) -> str:
    out = ""
    n += 1
    while n:
        n, r = divmod(n - 1, 26)
        out = chr(97 + r) + out
    return out


def _schedule(plan: BenchPlan) -> list[dict[str, str]]:
    from chargeplan.render.bench_files import warning_ids

    names = [c.name for c in plan.bench.channels]
    rows = []
    for job in sorted(plan.jobs, key=lambda j: (j.start_min, j.channel)):
        b = plan.batteries[job.battery]
        due = plan.due_min[job.battery]
        rows.append({"id": b.id, "channel": names[job.channel],
                     "start": plan.clock(job.start_min), "end": plan.clock(job.end_min),
                     "chemistry": b.chemistry,
                     "due": "" if not math.isfinite(due) else plan.clock(due) + (
                         " met" if job.end_min <= due + 1e-6 else " MISSED"),
                     "warnings": " ".join(warning_ids(plan, job.battery, job.channel)),
                     "note": "on charge" if job.on_charge else (
                         "staggered" if job.staggered else "")})
    return rows


def _findings(plan: BenchPlan) -> list[tuple[str, list[tuple[str, str]]]]:
    """Every finding of every scheduled battery's plan, a line per battery."""
    return [(plan.batteries[job.battery].id,
             [(f.rule_id, f.message) for f in plan.plan_of(job).findings])
            for job in sorted(plan.jobs, key=lambda j: (j.channel, j.start_min))
            if plan.plan_of(job).findings]


def _ventilation(plan: BenchPlan) -> list[str]:
    from chargeplan.physics.ventilation import opening_area_iec62485

    room = plan.bench.room
    lines = [f"The room gives {plan.room_airflow_m3_per_h:.3g} m3/h (the larger of its "
             f"airflow, {room.airflow_m3_per_h or 0:g} m3/h, and its openings, "
             f"{room.opening_area_cm2 or 0:g} cm2 / 28; IEC 62485-2 cl. 7). At the busiest "
             f"moment the batteries charging together need {plan.peak_airflow_m3_per_h:.3g} "
             f"m3/h, or {float(opening_area_iec62485(plan.peak_airflow_m3_per_h)):.3g} cm2 of "
             "free inlet and outlet (Q = 0.05 n Igas Crt 10^-3, Igas at each charge's most "
             "gassing stage; A = 28 Q)."]
    if room.airflow_m3_per_h is None and room.opening_area_cm2 is None:
        lines.append("No ventilation was given for the room: lead-acid batteries, which gas, "
                     "cannot be charged in it.")
    return lines


def _unscheduled(plan: BenchPlan) -> list[tuple[str, str]]:
    out = [(plan.batteries[i].id, why) for i, why in plan.unscheduled.items()]
    out += [(plan.batteries[i].id, "faulted: off the schedule; inspect it before charging "
             "again") for i in plan.progress.faulted]
    return out


def _md(text: object) -> str:
    """User and engine text made safe inside a Markdown table cell or line (one escaping
    for every Markdown document: chargeplan.render.markdown.md_text)."""
    from chargeplan.render.markdown import md_text

    return md_text(text)


@lru_cache(maxsize=2)
def _environment(html: bool) -> Any:
    from jinja2 import Environment, PackageLoader, StrictUndefined

    env = Environment(loader=PackageLoader("chargeplan", "render/templates"), autoescape=html,
                      trim_blocks=True, lstrip_blocks=True, keep_trailing_newline=True,
                      undefined=StrictUndefined)
    env.filters["md"] = _md
    return env


def _context(plan: BenchPlan, html: bool) -> dict[str, Any]:
    from markupsafe import Markup

    matrix, legend = _matrix(plan)
    return {
        "plan": plan, "names": [c.name for c in plan.bench.channels],
        "headline": headline(plan), "schedule": _schedule(plan),
        "matrix": matrix, "legend": legend, "findings": _findings(plan),
        "unscheduled": _unscheduled(plan), "cautions": BENCH_CAUTIONS, "deferral": DEFERRAL,
        "chemistry_cautions": chemistry_cautions(plan), "ventilation": _ventilation(plan),
        "gantt": Markup(gantt_svg(plan)) if html else "", "cards": _cards(plan),
        "queues": _queues(plan), "rest_h": AFTER_CHECK_REST_H,
        "pass_soc": AFTER_CHECK_PASS_SOC_PCT, "unattended_rule": UNATTENDED_RULE,
    }


def _queues(plan: BenchPlan) -> list[dict[str, Any]]:
    out = []
    for c, channel in enumerate(plan.bench.channels):
        jobs = sorted((j for j in plan.jobs if j.channel == c), key=lambda j: j.start_min)
        out.append({"name": channel.name, "unattended": channel.unattended,
                    "jobs": [{"id": plan.batteries[j.battery].id,
                              "start": plan.clock(j.start_min), "end": plan.clock(j.end_min),
                              "chemistry": plan.batteries[j.battery].chemistry}
                             for j in jobs]})
    return out


def bench_document(plan: BenchPlan, *, html: bool = False) -> str:
    name = "bench.html.j2" if html else "bench.md.j2"
    return str(_environment(html).get_template(name).render(**_context(plan, html)))


def bench_sheets(plan: BenchPlan) -> dict[str, str]:
    """cards.html, queues.html, tags.html and logs.html."""
    context = _context(plan, True)
    env = _environment(True)
    return {f"{name}.html": str(env.get_template(f"bench_{name}.html.j2").render(**context))
            for name in ("cards", "queues", "tags", "logs")}


def setpoint_files(plan: BenchPlan) -> dict[str, str]:
    """``setpoints-<n>-<battery>.json`` for each battery on a channel that loads files: the
    charge program (setpoint document version 4) its channel's firmware runs."""
    from chargeplan.firmware.charge_program import program_plans
    from chargeplan.firmware.setpoints import to_json
    from chargeplan.planners.bench_intake import battery_file, channel_for

    names, sources = [], []
    for job in plan.jobs:
        channel = plan.bench.channels[job.channel]
        if channel.loads_files:  # the channel's firmware runs the charge program
            planned = plan.plan_of(job)
            current_a = max(stage.current_a for stage in planned.stages)
            names.append(file_name(plan, job.battery))
            sources.append(battery_file(plan.batteries[job.battery],
                                        channel_for(channel, current_a),
                                        planned.battery.temperature_c))
    # the programs' estimates are simulated together (one batch, not one run each)
    files = {name: to_json(program) for name, program in zip(
        names, program_plans(sources), strict=True)}
    return files
