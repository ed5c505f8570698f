"""The plan as text for a terminal or a printout, from a jinja2 template."""

from __future__ import annotations

from functools import lru_cache
from typing import Any

from chargeplan import fmt
from chargeplan.plan import ChargePlan, Exit, ExitKind, Severity, Stage

__all__ = ["ESTIMATE_CAVEAT", "STAGE_COLUMNS", "describe_exit", "render_text", "stage_rows",
           "text_table"]

#: What every estimate of time, Ah and Wh carries, in every format.
ESTIMATE_CAVEAT = "the stages still end on their exits, not on these times"

#: The stage table's columns, as the HTML and Markdown pages show them: (key, heading, width).
STAGE_COLUMNS = (("n", "#", 2), ("label", "stage", 12), ("set", "set", 26),
                 ("ends", "ends when", 30), ("how_long", "how long", 20),
                 ("timer", "safety timer", 12))


def describe_exit(e: Exit) -> str:
    """'current below 0.18 A', 'voltage reaches 14.94 V', 'after 8 h'."""
    if e.kind == ExitKind.VOLTAGE_REACHED:
        text = f"voltage reaches {fmt.volts(e.value)}"
    elif e.kind == ExitKind.CURRENT_BELOW:
        text = f"current below {fmt.amps(e.value)}"
    elif e.kind == ExitKind.DURATION:
        text = f"after {fmt.duration(e.value)}"
    elif e.kind == ExitKind.CHARGE_ABOVE:
        text = f"more than {fmt.num(e.value, 1)} Ah in since the charge began"
    elif e.kind == ExitKind.CURRENT_RISING:
        text = f"current rises {fmt.amps(e.value)} above its lowest"
    else:
        text = f"battery warms {fmt.num(e.value, 1)} K above its start"
    then = {"stop": ", then stop", "fault": ": fault, stop charging"}
    return text + then.get(e.then, "")


def _how_long(stage: Stage) -> str:
    e = stage.estimate
    if e is None:
        return "—"
    if e.per_day:
        return f"holds; about {fmt.amps(e.end_current_a)} after a day"
    if e.duration_s is None:
        return "—"
    return (f"about {fmt.duration(e.duration_s)}, {fmt.num(e.charge_ah, 2)} Ah, "
            f"{fmt.num(e.energy_wh, 0)} Wh")


def stage_rows(plan: ChargePlan) -> list[dict[str, Any]]:
    """One row per stage, keyed as :data:`STAGE_COLUMNS`: every document's stage table."""
    cells = plan.battery.cells_in_series
    return [
        {
            "n": n,
            "label": stage.kind.label,
            "set": f"{fmt.volts(stage.voltage_v)} ({fmt.cell_volts(stage.voltage_v / cells)}), "
                   f"at most {fmt.amps(stage.current_a)}"
                   + (" (temperature-compensated)" if stage.compensated else ""),
            "ends": "; or ".join(describe_exit(e) for e in stage.exits) or "you disconnect it",
            "how_long": _how_long(stage),
            "timer": fmt.duration(stage.timer_s) if stage.timer_s is not None else "—",
        }
        for n, stage in enumerate(plan.stages, 1)
    ]


def text_table(rows: list[dict[str, Any]], columns=STAGE_COLUMNS, indent: str = "  ") -> str:
    """Rows as a plain-text table: a heading, a rule, and each cell wrapped to its width."""
    from textwrap import wrap

    def line(cells: list[str]) -> str:
        return (indent + "  ".join(c.ljust(w) for c, (_k, _h, w) in zip(cells, columns,
                                                                       strict=True))).rstrip()

    out = [line([h for _k, h, _w in columns]), line(["-" * w for _k, _h, w in columns])]
    for row in rows:
        wrapped = [wrap(str(row[key]), width) or [""] for key, _h, width in columns]
        for i in range(max(len(w) for w in wrapped)):
            out.append(line([w[i] if i < len(w) else "" for w in wrapped]))
    return "\n".join(out)


@lru_cache(maxsize=1)
def _environment() -> Any:
    from jinja2 import Environment, PackageLoader, StrictUndefined

    env = Environment(
        loader=PackageLoader("chargeplan", "render/templates"),
        autoescape=False,
        trim_blocks=True,
        lstrip_blocks=True,
        keep_trailing_newline=True,
        undefined=StrictUndefined,
    )
    env.filters.update(
        volts=fmt.volts,
        amps=fmt.amps,
        celsius=fmt.celsius,
        duration=fmt.duration,
        cell_volts=fmt.cell_volts,
        num=fmt.num,
        exit=describe_exit,
    )
    return env


def render_text(plan: ChargePlan, *, explain: bool = False) -> str:
    """The plan as plain text: battery, stages, interlocks, findings, cautions (and the trace)."""
    template = _environment().get_template("plan.txt.j2")
    marks = {Severity.INFO: "-", Severity.WARNING: "!", Severity.REFUSAL: "X"}
    return str(
        template.render(
            plan=plan,
            b=plan.battery,
            lock=plan.interlocks,
            explain=explain,
            marks=marks,
            stage_table=text_table(stage_rows(plan)),
            estimate_caveat=ESTIMATE_CAVEAT,
        )
    )
