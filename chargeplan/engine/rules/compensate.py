"""Compensate: lead-acid voltages follow temperature; lithium is cut in cool and warm zones."""

from __future__ import annotations

from chargeplan.engine.context import Context
from chargeplan.engine.registry import rule
from chargeplan.fmt import amps, cell_volts, celsius, num, volts
from chargeplan.plan import Compensation, Exit, ExitKind, StageKind

#: Lead-acid stages whose voltage follows the temperature compensation.
COMPENSATED = frozenset({StageKind.BULK, StageKind.ABSORPTION, StageKind.DESULFATION,
                         StageKind.EQUALIZATION, StageKind.FLOAT, StageKind.STORAGE_HOLD})


@rule("CP301", "compensation.lead_acid", source="BU-410 Charging at High and Low Temperatures: "
      "-3 mV/degC per cell about 25 degC (-3 to -5 across sources), across its Table 1 "
      "lead-acid charge window -20 to 50 degC; clamped at the envelope's cell maximum")
def compensation_lead_acid(ctx: Context) -> None:
    """Lead-acid voltages fall as the battery warms and rise as it cools, across the window.

    The range is the whole charge window (BU-410 Table 1), so a warm battery is never held
    at a cooler, higher voltage; on the cold side the compensated value is clamped at the
    envelope's cell-voltage maximum, and the trace says so.
    """
    comp = ctx.profile.temperature.compensation
    if ctx.lithium or comp is None:
        ctx.note("compensation", "none: lithium voltages are not temperature compensated")
        return
    assert ctx.settings is not None
    k = ctx.settings.coefficient_v_per_k_per_cell
    ref = comp.reference.value
    lo, hi = comp.range_min.value, comp.range_max.value
    t = ctx.temperature_c
    t_used = min(max(t, lo), hi)
    n = ctx.cells
    ctx.compensation = Compensation(k, ref, lo, hi)
    held = ""
    if t_used != t:
        held = f" (battery at {celsius(t)}, held at the range limit {celsius(t_used)})"
    delta = k * n * (t_used - ref)
    limit = ctx.settings.cell_voltage_max_v * n
    for stage in ctx.stages:
        if stage.kind not in COMPENSATED:
            continue
        base = stage.voltage_v
        new = base + delta
        text = (f"{stage.kind.label} {volts(min(new, limit))} = {cell_volts(base / n)} x {n} "
                f"+ ({num(k * 1000, 1)} mV/K/cell x {n} x ({num(t_used, 1)} - {num(ref, 1)}) K)"
                f"{held}")
        if new > limit:
            text += (f", clamped to the envelope's {volts(limit)} "
                     f"({cell_volts(ctx.settings.cell_voltage_max_v)})")
            new = limit
        stage.voltage_v = new
        stage.compensated = True
        stage.exits = [
            Exit(e.kind, new, e.then) if e.kind == ExitKind.VOLTAGE_REACHED else e
            for e in stage.exits
        ]
        ctx.note(f"{stage.kind.value}.voltage", text)


@rule("CP302", "zones.cool_warm", source="BU-410 Table 1 (lead-acid at most 0.3 C below "
      "freezing); cell handling guidelines (LFP at most 0.2 C below 10 degC); JEITA guideline "
      "(2007): lithium-ion current cut when cool, voltage cut when warm")
def zones_cool_warm(ctx: Context) -> None:
    """Cut the current in the cool zone and the voltage in the warm zone."""
    t = ctx.temperature_c
    temp = ctx.profile.temperature
    n, cap = ctx.cells, ctx.capacity_ah
    cool, warm = temp.cool_zone, temp.warm_zone
    if cool is not None and cool.current is not None and t < cool.boundary.value:
        cap_a = cool.current.value * cap
        cut = False
        for stage in ctx.stages:
            if stage.current_a > cap_a:
                cut = True
                ctx.note(f"{stage.kind.value}.current",
                         f"{amps(cap_a)} = {num(cool.current.value)} It x {num(cap)} Ah (was "
                         f"{amps(stage.current_a)}): battery at {celsius(t)}, below "
                         f"{celsius(cool.boundary.value)}")
                stage.current_a = cap_a
        if cut:
            ctx.info(f"cool battery ({celsius(t)}): current held to {amps(cap_a)}; it takes "
                     "longer")
    if warm is not None and warm.voltage is not None and t > warm.boundary.value:
        cap_v = warm.voltage.value * n
        cut = False
        for stage in ctx.stages:
            if stage.voltage_v > cap_v:
                cut = True
                ctx.note(f"{stage.kind.value}.voltage",
                         f"{volts(cap_v)} = {cell_volts(warm.voltage.value)} x {n} (was "
                         f"{volts(stage.voltage_v)}): battery at {celsius(t)}, above "
                         f"{celsius(warm.boundary.value)}")
                stage.voltage_v = cap_v
                stage.exits = [
                    Exit(e.kind, cap_v, e.then) if e.kind == ExitKind.VOLTAGE_REACHED else e
                    for e in stage.exits
                ]
        if cut:
            ctx.info(f"warm battery ({celsius(t)}): voltage held to {volts(cap_v)}; it ends a "
                     "little short of full")
