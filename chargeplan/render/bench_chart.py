"""The bench timeline as inline SVG: a row per channel, a bar per battery labelled with its
id and chemistry (never colour alone), due markers, labelled closing times, a legend, and the
batteries with no place listed under it."""

from __future__ import annotations

import math
from html import escape

from chargeplan.planners.bench import BenchPlan

__all__ = ["gantt_svg"]

_CHEMISTRY = {"flooded": "FLD", "agm": "AGM", "gel": "GEL", "lifepo4": "LFP", "nmc": "NMC"}
_CHAR_W = 6.0  # px per character at font-size 11 (sans-serif, about)


def _label(plan: BenchPlan, battery: int) -> str:
    b = plan.batteries[battery]
    return f"{b.id} {_CHEMISTRY.get(b.chemistry, b.chemistry.upper()[:3])}"


def gantt_svg(plan: BenchPlan) -> str:
    names = [c.name for c in plan.bench.channels]
    t0 = plan.start_min
    ends = [plan.makespan_min, t0 + 60.0]
    closes = [c for c in plan.calendar.closes if c > t0 and c <= plan.makespan_min + 1e-6]
    nxt = next((c for c in plan.calendar.closes if c > plan.makespan_min), None)
    if nxt is not None and nxt - plan.makespan_min < 12 * 60:
        closes.append(nxt)
        ends.append(nxt)
    span = max(ends) - t0
    left, width, row_h = 110, 820, 26
    top = 20
    unscheduled = [plan.batteries[i].id for i in plan.unscheduled]
    height = top + row_h * len(names) + 40 + 36 + (16 if unscheduled else 0)

    def x(minutes: float) -> float:
        return left + width * (minutes - t0) / span

    out = [f'<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 {left + width + 30} {height}" '
           'class="gantt" font-family="sans-serif" font-size="11" role="img" '
           'aria-label="The bench schedule: one row per channel">']
    for r, name in enumerate(names):
        y = top + r * row_h
        out.append(f'<text x="{left - 6}" y="{y + 16}" text-anchor="end">{escape(name)}</text>')
        out.append(f'<line x1="{left}" y1="{y + row_h}" x2="{left + width}" y2="{y + row_h}" '
                   'stroke="#ccc"/>')
    for job in plan.jobs:
        y = top + job.channel * row_h
        x0, x1 = x(job.start_min), x(job.end_min)
        dash = ' stroke-dasharray="4,2"' if job.staggered else ""
        out.append(f'<rect x="{x0:.1f}" y="{y + 3}" width="{max(x1 - x0, 1):.1f}" '
                   f'height="{row_h - 6}" fill="#dbe7f3" stroke="#234"{dash}/>')
        label = _label(plan, job.battery)
        inside = len(label) * _CHAR_W + 6 <= x1 - x0
        lx = x0 + 3 if inside else x1 + 3
        out.append(f'<text x="{lx:.1f}" y="{y + 17}">{escape(label)}</text>')
        due = plan.due_min[job.battery]
        if math.isfinite(due) and t0 <= due <= t0 + span:
            dx = x(due)
            out.append(f'<path d="M{dx:.1f},{y + 1} l4,-5 h-8 z" fill="#a00"><title>due '
                       f'{escape(plan.clock(due))}</title></path>')
    bottom = top + row_h * len(names)
    for c in closes:
        out.append(f'<line x1="{x(c):.1f}" y1="{top - 6}" x2="{x(c):.1f}" y2="{bottom}" '
                   'stroke="#a00" stroke-dasharray="4,3"/>')
        out.append(f'<text x="{x(c) - 2:.1f}" y="{top - 8}" text-anchor="end" fill="#a00">'
                   f'closes {escape(plan.moment(c).strftime("%H:%M"))}</text>')
    step = 60 * max(1, math.ceil(span / 60 / 14))
    first = math.ceil(t0 / step) * step
    for k in range(int((t0 + span - first) // step) + 1):
        t = first + k * step
        out.append(f'<text x="{x(t):.1f}" y="{bottom + 14}" text-anchor="middle">'
                   f'{escape(plan.moment(t).strftime("%H:%M"))}</text>')
    ly = bottom + 34
    out.append(f'<rect x="{left}" y="{ly - 9}" width="14" height="10" fill="#dbe7f3" '
               f'stroke="#234"/><text x="{left + 18}" y="{ly}">charging (id, chemistry)</text>')
    out.append(f'<rect x="{left + 170}" y="{ly - 9}" width="14" height="10" fill="#dbe7f3" '
               f'stroke="#234" stroke-dasharray="4,2"/><text x="{left + 188}" y="{ly}">'
               'staggered for ventilation or mains</text>')
    out.append(f'<path d="M{left + 404},{ly} l4,-8 h-8 z" fill="#a00"/>'
               f'<text x="{left + 412}" y="{ly}">due</text>')
    out.append(f'<line x1="{left + 450}" y1="{ly - 9}" x2="{left + 450}" y2="{ly + 1}" '
               f'stroke="#a00" stroke-dasharray="3,2"/><text x="{left + 456}" y="{ly}">'
               'closing time</text>')
    out.append(f'<text x="{left + 540}" y="{ly}">FLD AGM GEL LFP NMC: chemistry</text>')
    if unscheduled:
        out.append(f'<text x="{left}" y="{ly + 18}">not scheduled: '
                   f'{escape(", ".join(unscheduled))}</text>')
    out.append("</svg>")
    return "\n".join(out)
