"""Exclude: stages the chemistry must never get are never in a plan."""

from __future__ import annotations

from chargeplan.engine.context import Context
from chargeplan.engine.registry import rule
from chargeplan.plan import HIGH_VOLTAGE_STAGES


@rule("CP501", "stages.forbidden", source="common practice: a lead-acid desulfation or "
      "equalization stage damages lithium batteries; gel is never equalized")
def stages_forbidden(ctx: Context) -> None:
    """No stage the envelope forbids, and never equalization or desulfation for lithium."""
    forbidden = set(ctx.profile.envelope.forbidden_stages)
    if ctx.lithium:
        forbidden |= {kind.value for kind in HIGH_VOLTAGE_STAGES}
    dropped = [stage for stage in ctx.stages if stage.kind.value in forbidden]
    for stage in dropped:
        ctx.warn(f"{stage.kind.label} is forbidden for {ctx.profile.name}: left out")
    ctx.stages = [stage for stage in ctx.stages if stage.kind.value not in forbidden]
    ctx.note("stages", "kept: " + ", ".join(s.kind.label for s in ctx.stages)
             + (f"; never: {', '.join(sorted(forbidden))}" if forbidden else ""))
