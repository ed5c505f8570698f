"""The bench's documents: bench.md and bench.html (with an SVG timeline), and a setpoint file
for each battery whose channel loads files."""

from __future__ import annotations

from functools import lru_cache
from html import escape
from typing import Any

from chargeplan.cautions import DEFERRAL
from chargeplan.planners.bench import BenchPlan
from chargeplan.render.text import describe_exit

__all__ = ["BENCH_CAUTIONS", "bench_document", "gantt_svg", "setpoint_files"]

BENCH_CAUTIONS = (
    "Wear eye protection; keep an eyewash and running water at the bench.",
    "No sparks, flames or smoking within 0.5 m of a charging battery (IEC 62485-2); keep the "
    "room ventilated as worked out under Ventilation.",
    "Connect the battery before switching a channel on; switch off before disconnecting.",
    "Charge lithium on a non-combustible surface, away from anything that burns, and never "
    "leave it charging unattended unless its channel is marked for unattended use.",
    "Never charge a frozen battery, or lithium below 0 °C.",
)


def gantt_svg(plan: BenchPlan) -> str:
    """One row per channel, a bar per battery, the hours along the bottom."""
    names = [c.name for c in plan.bench.channels]
    span = max(plan.makespan_min, plan.bench.hours.minutes, 60.0)
    left, width, row_h = 110, 560, 26
    height = 30 + row_h * len(names) + 30

    def x(minutes: float) -> float:
        return left + width * minutes / span

    out = [f'<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 {left + width + 20} {height}" '
           'class="gantt" font-family="sans-serif" font-size="11" role="img" '
           'aria-label="The bench schedule: one row per channel">']
    for r, name in enumerate(names):
        y = 20 + r * row_h
        out.append(f'<text x="{left - 6}" y="{y + 16}" text-anchor="end">{escape(name)}</text>')
        out.append(f'<line x1="{left}" y1="{y + row_h}" x2="{left + width}" y2="{y + row_h}" '
                   'stroke="#ccc"/>')
    for job in plan.jobs:
        y = 20 + job.channel * row_h
        label = plan.batteries[job.battery].id
        out.append(f'<rect x="{x(job.start_min):.1f}" y="{y + 3}" '
                   f'width="{max(x(job.end_min) - x(job.start_min), 1):.1f}" height="{row_h - 6}" '
                   f'fill="{"#d9a441" if job.staggered else "#7ea6c9"}" stroke="#333"/>')
        out.append(f'<text x="{x(job.start_min) + 3:.1f}" y="{y + 17}">{escape(label)}</text>')
    day = plan.bench.hours.minutes
    out.append(f'<line x1="{x(day):.1f}" y1="14" x2="{x(day):.1f}" y2="{height - 26}" '
               'stroke="#a00" stroke-dasharray="4,3"/>')
    for hour in range(0, int(span // 60) + 1):
        tx = x(hour * 60)
        out.append(f'<text x="{tx:.1f}" y="{height - 10}" text-anchor="middle">'
                   f'{escape(plan.clock(hour * 60))}</text>')
    out.append("</svg>")
    return "\n".join(out)


def file_name(plan: BenchPlan, battery: int) -> str:
    """A setpoint file name for a battery that no other battery's can collide with."""
    import re

    safe = re.sub(r"[^A-Za-z0-9._-]", "_", plan.batteries[battery].id)
    return f"setpoints-{battery + 1:03d}-{safe}.json"


def _cards(plan: BenchPlan) -> list[dict[str, Any]]:
    cards = []
    names = [c.name for c in plan.bench.channels]
    for job in sorted(plan.jobs, key=lambda j: (j.start_min, j.channel)):
        charge = plan.plans[(job.battery, job.channel)]
        cards.append({
            "id": plan.batteries[job.battery].id,
            "channel": names[job.channel],
            "loads_files": plan.bench.channels[job.channel].loads_files,
            "file": file_name(plan, job.battery),
            "start": plan.clock(job.start_min), "end": plan.clock(job.end_min),
            "summary": charge.summary(),
            "stages": [{"label": s.kind.label, "voltage": f"{s.voltage_v:.2f} V",
                        "current": f"{s.current_a:.2f} A",
                        "ends": "; or ".join(describe_exit(e) for e in s.exits) or "disconnect"}
                       for s in charge.stages],
            "cautions": charge.cautions[:-1],
        })
    return cards


def _chemistry_cautions(plan: BenchPlan) -> list[str]:
    """The cautions of every chemistry on the bench, once each (the deferral is apart)."""
    seen: list[str] = []
    for job in plan.jobs:
        for line in plan.plans[(job.battery, job.channel)].cautions[:-1]:
            if line not in seen:
                seen.append(line)
    return seen


def _ventilation(plan: BenchPlan) -> list[str]:
    from chargeplan.physics.ventilation import opening_area_iec62485

    room = plan.bench.room
    lines = [f"The room gives {plan.room_airflow_m3_per_h:.3g} m3/h (the larger of its "
             f"airflow, {room.airflow_m3_per_h or 0:g} m3/h, and its openings, "
             f"{room.opening_area_cm2 or 0:g} cm2 / 28; IEC 62485-2 cl. 7)."]
    lines.append(f"At the busiest moment the batteries charging together need "
                 f"{plan.peak_airflow_m3_per_h:.3g} m3/h, or "
                 f"{float(opening_area_iec62485(plan.peak_airflow_m3_per_h)):.3g} cm2 of free "
                 "inlet and outlet (Q = 0.05 n Igas Crt 10^-3 on boost; A = 28 Q).")
    if room.airflow_m3_per_h is None and room.opening_area_cm2 is None:
        lines.append("No ventilation was given for the room: lead-acid batteries, which gas, "
                     "cannot be charged in it.")
    return lines


@lru_cache(maxsize=2)
def _environment(html: bool) -> Any:
    from jinja2 import Environment, PackageLoader, StrictUndefined

    env = Environment(loader=PackageLoader("chargeplan", "render/templates"), autoescape=html,
                      trim_blocks=True, lstrip_blocks=True, keep_trailing_newline=True,
                      undefined=StrictUndefined)
    env.filters["md"] = lambda text: str(text).replace("|", "\\|").replace("\n", " ")
    return env


def bench_document(plan: BenchPlan, *, html: bool = False) -> str:
    from markupsafe import Markup

    names = [c.name for c in plan.bench.channels]
    context = {
        "plan": plan, "names": names, "cards": _cards(plan),
        "matrix": [(plan.batteries[i].id, row) for i, row in enumerate(plan.fit)],
        "summary": plan.summary(), "cautions": BENCH_CAUTIONS, "deferral": DEFERRAL,
        "chemistry_cautions": _chemistry_cautions(plan),
        "ventilation": _ventilation(plan),
        "gantt": Markup(gantt_svg(plan)) if html else "",
    }
    name = "bench.html.j2" if html else "bench.md.j2"
    return str(_environment(html).get_template(name).render(**context))


def setpoint_files(plan: BenchPlan) -> dict[str, str]:
    """``setpoints/<battery>.json`` for each battery on a channel that loads files."""
    from chargeplan.firmware.charge_program import program_plan
    from chargeplan.firmware.setpoints import to_json
    from chargeplan.planners.bench import _battery_file

    files = {}
    for job in plan.jobs:
        channel = plan.bench.channels[job.channel]
        if channel.loads_files:  # the channel's firmware runs the charge program
            program = program_plan(_battery_file(plan.batteries[job.battery], channel))
            files[file_name(plan, job.battery)] = to_json(program)
    return files
