"""Lead-acid termination: a charge that ends full in the cold, and guards that stop one that
goes wrong (an Ah cap, a current that rises at constant voltage, a battery that warms).

The values come from the profile's ``termination`` block; lithium has none (it ends on its
tail current, and its own protection guards it).
"""

from __future__ import annotations

from chargeplan.engine.context import Context
from chargeplan.engine.registry import rule
from chargeplan.fmt import amps, celsius, duration, num
from chargeplan.plan import Exit, ExitKind, StageKind

#: A plan for a known state caps the charge at charge_cap x (the charge missing + this share
#: of the capacity), so a reading a little high does not fault a healthy charge.
CAP_MARGIN_FRACTION = 0.10
#: The stages of a lead-acid charge that carry the guards (the conditioning overcharges
#: carry their own, rule CP203 and CP205).
GUARDED = (StageKind.BULK, StageKind.ABSORPTION)
#: CP310 tells the user when the cold moves the tail current below this share of its value
#: at the reference temperature (or stretches the time limit by its inverse); smaller
#: changes stay in the plan's derivation.
MATERIAL_SHARE = 0.75


@rule("CP310", "termination.cold", source="BU-410 Charging at High and Low Temperatures (a "
      "cold battery accepts charge slowly); BU-403 (full when the current at the topping "
      "voltage falls to a few per cent of C; never dwell more than 48 h)")
def termination_cold(ctx: Context) -> None:
    """Below the reference temperature the tail current falls and the time limit stretches
    with the battery's acceptance, so a cold battery is charged full, not floated part-full.
    """
    term = ctx.profile.termination
    comp = ctx.profile.temperature.compensation
    absorption = ctx.stage(StageKind.ABSORPTION)
    if ctx.lithium or term is None or comp is None or absorption is None:
        return
    ref = comp.reference.value
    t = ctx.temperature_c
    if t >= ref:
        return
    share = 2.0 ** ((t - ref) / term.tail_doubling.value)
    floor_a = term.tail_current_min.value * ctx.capacity_ah
    exits: list[Exit] = []
    changes: list[str] = []
    for e in absorption.exits:
        if e.kind == ExitKind.CURRENT_BELOW:
            tail = min(e.value, max(e.value * share, floor_a))
            if tail < MATERIAL_SHARE * e.value:
                changes.append(f"at {amps(tail)} instead of {amps(e.value)}")
            if tail < e.value:
                ctx.note("absorption.exit", f"tail {amps(tail)} = {amps(e.value)} x 2^(("
                                            f"{num(t, 1)} - {num(ref, 1)}) K / "
                                            f"{num(term.tail_doubling.value, 0)} K)"
                                            + (f", at least {amps(floor_a)}"
                                               if tail == floor_a else ""))
            e = Exit(e.kind, tail, e.then)
        elif e.kind == ExitKind.DURATION:
            ceiling = term.absorption_time_cold_max.value
            limit = max(e.value, min(e.value / share, ceiling))
            if limit > e.value / MATERIAL_SHARE:
                changes.append(f"within {duration(limit)} instead of {duration(e.value)}")
            if limit > e.value:
                ctx.note("absorption.duration", f"{duration(limit)} = {duration(e.value)} / "
                                                f"{num(share, 2)}, at most {duration(ceiling)}")
            e = Exit(e.kind, limit, e.then)
        exits.append(e)
    absorption.exits = exits
    if changes:  # a few kelvin below the reference change little: said in the derivation
        ctx.info(f"at {celsius(t)} the battery accepts charge slowly: absorption ends "
                 f"{' or '.join(changes)}, so it is full before float; charging it warmer "
                 "is quicker")


@rule("CP610", "guards.lead_acid", source="common practice; BU-403 (a VRLA battery whose "
      "current does not fall at constant voltage is going into thermal runaway); the "
      "published charge factors (flooded 1.10-1.30, VRLA 1.02-1.15 Ah in per Ah out)")
def guards_lead_acid(ctx: Context) -> None:
    """Every lead-acid charge ends with a fault when it passes its Ah cap, when its current
    rises at constant voltage, or when the battery warms by the profile's rise."""
    term = ctx.profile.termination
    if ctx.lithium or term is None:
        return
    cap = ctx.capacity_ah
    factor = term.charge_cap.value
    if ctx.soc_pct is None:
        cap_ah = factor * cap
        why = f"{num(factor)} x {num(cap)} Ah (the state is not known)"
    else:
        missing = (100.0 - ctx.soc_pct) / 100.0
        cap_ah = factor * (missing + CAP_MARGIN_FRACTION) * cap
        why = (f"{num(factor)} x ({num(missing * 100, 0)} % missing + "
               f"{num(CAP_MARGIN_FRACTION * 100, 0)} %) x {num(cap)} Ah")
    rise_a = term.current_rise.value * cap
    rise_k = term.temperature_rise.value
    for stage in ctx.stages:
        if stage.kind not in GUARDED:
            continue
        guards = [Exit(ExitKind.CHARGE_ABOVE, cap_ah, then="fault"),
                  Exit(ExitKind.TEMPERATURE_RISE, rise_k, then="fault")]
        if stage.kind == StageKind.ABSORPTION:
            guards.insert(1, Exit(ExitKind.CURRENT_RISING, rise_a, then="fault"))
        stage.exits = [*stage.exits, *guards]
    ctx.note("guards.charge", f"fault above {num(cap_ah, 2)} Ah in since the charge began = "
                              f"{why}")
    ctx.note("guards.current", f"absorption: fault when the current rises {amps(rise_a)} "
                               f"above its lowest ({num(term.current_rise.value)} It)")
    ctx.note("guards.temperature", f"fault when the battery warms {num(rise_k, 0)} K during "
                                   "bulk or absorption")
