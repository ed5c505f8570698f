"""Documents for people: the plan as Markdown (a wiki or a procedures binder) or as one
self-contained HTML page with an inline SVG chart, that prints on A4 and Letter."""

from __future__ import annotations

from functools import lru_cache
from typing import Any

from chargeplan import fmt
from chargeplan.plan import ChargePlan
from chargeplan.render.text import ESTIMATE_CAVEAT, stage_rows

__all__ = ["render_html", "render_markdown"]


def _context(plan: ChargePlan, explain: bool) -> dict[str, Any]:
    b = plan.battery
    rows = stage_rows(plan)
    total = plan.total_estimate()
    lock = plan.interlocks
    interlocks = [
        f"battery temperature outside {fmt.celsius(lock.charge_temperature_min_c)} to "
        f"{fmt.celsius(lock.charge_temperature_max_c)}",
        f"battery voltage above {fmt.volts(lock.battery_voltage_max_v)} "
        f"({fmt.cell_volts(lock.cell_voltage_max_v)})",
        f"current above {fmt.amps(lock.current_max_a)}",
    ]
    if lock.cool_zone_below_c is not None and lock.cool_zone_current_max_a is not None:
        interlocks.append(f"below {fmt.celsius(lock.cool_zone_below_c)}: at most "
                          f"{fmt.amps(lock.cool_zone_current_max_a)}")
    if lock.warm_zone_above_c is not None and lock.warm_zone_cell_voltage_max_v is not None:
        interlocks.append(f"above {fmt.celsius(lock.warm_zone_above_c)}: at most "
                          f"{fmt.cell_volts(lock.warm_zone_cell_voltage_max_v)}")
    soc = (f"about {fmt.num(b.state_of_charge_pct, 0)} %" if b.state_of_charge_pct is not None
           else "not measured")
    return {
        "plan": plan,
        "b": b,
        "facts": f"{b.profile_name} · {b.cells_in_series} cells · "
                 f"{fmt.volts(b.nominal_voltage_v)} nominal · {fmt.num(b.capacity_ah)} Ah · "
                 f"battery at {fmt.celsius(b.temperature_c)} · state of charge {soc}",
        "total": None if total is None else
        f"about {fmt.duration(total[0])}, {fmt.num(total[1], 1)} Ah, {fmt.num(total[2], 0)} Wh",
        "rows": rows,
        "interlocks": interlocks,
        # every finding, as the text plan lists them (info notes too: the flat-curve caveat)
        "findings": [(f.severity.value, f.message, f.rule_id) for f in plan.findings],
        "estimate_caveat": ESTIMATE_CAVEAT,
        "explain": explain,
    }


@lru_cache(maxsize=2)
def _environment(html: bool) -> Any:
    from jinja2 import Environment, PackageLoader, StrictUndefined

    env = Environment(
        loader=PackageLoader("chargeplan", "render/templates"),
        autoescape=html,  # every value in the HTML page is escaped
        trim_blocks=True, lstrip_blocks=True, keep_trailing_newline=True,
        undefined=StrictUndefined,
    )
    if not html:
        from chargeplan.render.markdown import register

        register(env)  # md_text: user text in Markdown shown as written, never run
    return env


def render_markdown(plan: ChargePlan, *, explain: bool = False) -> str:
    return str(_environment(False).get_template("plan.md.j2").render(**_context(plan, explain)))


def _trim_hold(plan: ChargePlan, series: dict[str, Any]) -> dict[str, Any]:
    """Show a holding stage (float, storage hold) only briefly: it runs on for days."""
    import numpy as np

    held = [i for i, s in enumerate(plan.stages) if s.estimate and s.estimate.per_day]
    stage = np.asarray(series["stage"])
    t = np.asarray(series["time_s"])
    if not held or not np.any(stage == held[0]):
        return series
    start = float(t[np.argmax(stage == held[0])])
    keep = t <= start + max(7200.0, 0.25 * start)
    return {key: np.asarray(values)[keep] for key, values in series.items()}


def render_html(plan: ChargePlan, *, explain: bool = False,
                series: dict[str, Any] | None = None) -> str:
    """One self-contained page; with ``series`` (the simulated run), an inline SVG chart."""
    from markupsafe import Markup

    from chargeplan.render.chart import svg_chart

    chart = ""
    if series is not None:
        chart = svg_chart(_trim_hold(plan, series), [s.kind.label for s in plan.stages])
    return str(_environment(True).get_template("plan.html.j2").render(
        chart=Markup(chart), **_context(plan, explain)))  # chart text is escaped where drawn
