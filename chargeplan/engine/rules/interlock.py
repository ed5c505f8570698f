"""Interlock: safety timers, the hard stops the charger enforces, and the cautions."""

from __future__ import annotations

from chargeplan.cautions import profile_cautions
from chargeplan.engine.context import Context
from chargeplan.engine.registry import rule
from chargeplan.fmt import amps, cell_volts, celsius, duration, num, volts
from chargeplan.plan import ExitKind, Interlocks, StageKind

#: Charge a healthy deeply discharged battery takes to pass its pre-charge threshold.
PRECHARGE_CHARGE_FRACTION = 0.10
#: The shortest bulk timer, so a battery fuller than its reading says is not faulted.
BULK_TIMER_FLOOR_S = 1800.0


@rule("CP601", "timers.safety", source="BU-808a (pre-charge with a timer); common practice: "
      "a timer at a margin over the charge the stage must return at its current")
def timers_safety(ctx: Context) -> None:
    """A stage that could run away gets a safety timer: its charge over its current, with margin."""
    assert ctx.settings is not None
    margin = ctx.profile.charge.timer_margin.value
    factor = ctx.profile.charge.charge_factor.value
    cap = ctx.capacity_ah
    soc = ctx.soc_assumed_pct
    goal = ctx.storage_soc_pct() if ctx.target == "storage" else 100.0
    for stage in ctx.stages:
        if stage.kind == StageKind.PRECHARGE:
            ah = PRECHARGE_CHARGE_FRACTION * cap
            stage.timer_s = margin * ah / stage.current_a * 3600
            ctx.note("precharge.timer", f"{duration(stage.timer_s)} = {num(margin)} x "
                                        f"{num(ah)} Ah / {amps(stage.current_a)}; still below "
                                        f"{volts(stage.voltage_v)} then: fault, stop")
        elif stage.kind == StageKind.BULK:
            share = max(goal - soc, 10.0) / 100
            ah = share * cap * factor
            stage.timer_s = max(margin * ah / stage.current_a * 3600, BULK_TIMER_FLOOR_S)
            ctx.note("bulk.timer", f"{duration(stage.timer_s)} = {num(margin)} x {num(cap)} Ah x "
                                   f"({num(goal, 0)} - {num(soc, 0)}) % x {num(factor)} / "
                                   f"{amps(stage.current_a)}"
                                   + (f" (at least {duration(BULK_TIMER_FLOOR_S)})"
                                      if stage.timer_s == BULK_TIMER_FLOOR_S else ""))
        else:
            limits = [e.value for e in stage.exits if e.kind == ExitKind.DURATION]
            if not limits or (stage.kind == StageKind.STORAGE_HOLD and not ctx.lithium):
                continue  # float and a lead-acid storage hold run on: nothing to time out
            stage.timer_s = min(limits)
            ctx.note(f"{stage.kind.value}.timer", f"{duration(stage.timer_s)}, its own time limit")


@rule("CP602", "interlocks.limits", source="BU-410 Table 1 (charge-temperature windows); "
      "US Army TM 5-1185 Table III (freezing point); the profile's hard envelope")
def interlocks_limits(ctx: Context) -> None:
    """Stop outside the charge-temperature window, above the envelope voltage or the current."""
    p = ctx.profile
    n = ctx.cells
    low, high = ctx.charge_window()
    why_low = "the charge window"
    if ctx.freezing_point_c is not None and ctx.freezing_point_c > low:
        low = ctx.freezing_point_c
        why_low = "the electrolyte's freezing point now"
    if ctx.lithium:
        low = max(low, 0.0)
    assert ctx.settings is not None
    cell_max = ctx.settings.cell_voltage_max_v
    interlocks = Interlocks(
        charge_temperature_min_c=low,
        charge_temperature_max_c=high,
        cell_voltage_max_v=cell_max,
        battery_voltage_max_v=cell_max * n,
        current_max_a=max(stage.current_a for stage in ctx.stages),
    )
    cool, warm = p.temperature.cool_zone, p.temperature.warm_zone
    if cool is not None and cool.current is not None:
        interlocks.cool_zone_below_c = cool.boundary.value
        interlocks.cool_zone_current_max_a = min(cool.current.value * ctx.capacity_ah,
                                                 interlocks.current_max_a)
    if warm is not None and warm.voltage is not None:
        interlocks.warm_zone_above_c = warm.boundary.value
        interlocks.warm_zone_cell_voltage_max_v = warm.voltage.value
    ctx.interlocks = interlocks
    ctx.note("interlocks.temperature", f"charge only from {celsius(low)} ({why_low}) to "
                                       f"{celsius(high)}")
    ctx.note("interlocks.voltage", f"stop above {cell_volts(cell_max)} = {volts(cell_max * n)}")
    ctx.note("interlocks.current", f"stop above {amps(interlocks.current_max_a)}")


@rule("CP603", "cautions.chemistry", source="IEC 62485-2 cl. 7 (hydrogen, 0.5 m); BU-410 "
      "(no lithium charging below 0 degC); common practice")
def cautions_chemistry(ctx: Context) -> None:
    """Every plan carries its chemistry's cautions and defers to the datasheet and local codes."""
    ctx.cautions = profile_cautions(ctx.profile)
