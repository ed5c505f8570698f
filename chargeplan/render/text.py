"""The plan as text for a terminal or a printout, from a jinja2 template."""

from __future__ import annotations

from functools import lru_cache
from typing import Any

from chargeplan import fmt
from chargeplan.plan import ChargePlan, Exit, ExitKind, Severity

__all__ = ["describe_exit", "render_text"]


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
        )
    )
