"""Fit: the plan meets the charger channel it will run on."""

from __future__ import annotations

import math

from chargeplan.engine.context import Context
from chargeplan.engine.registry import rule
from chargeplan.fmt import amps, volts
from chargeplan.plan import HIGH_VOLTAGE_STAGES, Exit, ExitKind, Quantised, StageKind

#: Stages a plan can do without; a channel that cannot run them drops them with a warning.
OPTIONAL = HIGH_VOLTAGE_STAGES


def _permits_high_voltage(ctx: Context) -> bool:
    p = ctx.profile
    return (
        not ctx.lithium
        and p.equalization.allowed
        and p.desulfation.allowed
        and not (set(p.envelope.forbidden_stages) & {"equalization", "desulfation"})
    )


@rule("CP401", "charger.high_voltage_stages", source="common practice: a lead-acid charger's "
      "equalization or desulfation stage damages lithium, gel and most AGM batteries")
def charger_high_voltage_stages(ctx: Context) -> None:
    """Refuse a channel whose high-voltage stages cannot be switched off for a battery they harm."""
    channel = ctx.battery_file.charger
    if channel is None:
        ctx.info("no charger channel given: check that yours can do every stage below and "
                 "has no high-voltage stage it cannot switch off")
        return
    if channel.can_disable_high_voltage_stages or _permits_high_voltage(ctx):
        return
    name = f" '{channel.name}'" if channel.name else ""
    if ctx.lithium:
        reason = (
            f"the channel{name} cannot switch off its equalization or desulfation stages, "
            "which damage lithium batteries and can start a fire; use a channel with a "
            "lithium mode, or one whose high-voltage stages can be switched off"
        )
    else:
        reason = (
            f"the channel{name} cannot switch off its equalization or desulfation stages, "
            f"which {ctx.profile.name} batteries must not get; use a channel that can switch "
            "them off"
        )
    raise ctx.refuse(
        reason + " (charger.can_disable_high_voltage_stages is false or not given: set it to "
        "true only if the channel has no such stage or can switch it off)"
    )


@rule("CP402", "charger.voltage_range", source="common practice: a channel must reach every "
      "stage's voltage and regulate as low as the float")
def charger_voltage_range(ctx: Context) -> None:
    """Refuse a channel that cannot reach a stage's voltage or go as low as the float.

    Optional stages it cannot reach (equalization, desulfation) are left out instead.
    """
    channel = ctx.battery_file.charger
    if channel is None:
        return
    kept = []
    for stage in ctx.stages:
        if stage.voltage_v > channel.max_voltage_v + 1e-9:
            if stage.kind in OPTIONAL:
                ctx.warn(f"{stage.kind.label} left out: it needs {volts(stage.voltage_v)} and "
                         f"the channel reaches {volts(channel.max_voltage_v)}")
                continue
            raise ctx.refuse(
                f"the channel reaches {volts(channel.max_voltage_v)} but the "
                f"{stage.kind.label} stage needs {volts(stage.voltage_v)}; use a channel that "
                "reaches it (or check the battery's cell count)"
            )
        regulated = stage.kind in (StageKind.FLOAT, StageKind.STORAGE_HOLD, StageKind.ABSORPTION)
        if regulated and stage.voltage_v < channel.min_voltage_v - 1e-9:
            raise ctx.refuse(
                f"the channel cannot regulate below {volts(channel.min_voltage_v)} but the "
                f"{stage.kind.label} stage needs {volts(stage.voltage_v)}; use a channel that "
                "goes low enough"
            )
        kept.append(stage)
    ctx.stages = kept


@rule("CP403", "charger.current_range", source="common practice: a channel's current limit "
      "stretches the charge; its smallest current bounds pre-charge and tail-current exits")
def charger_current_range(ctx: Context) -> None:
    """Hold currents to the channel's maximum; never raise one to reach the channel's minimum."""
    channel = ctx.battery_file.charger
    if channel is None:
        return
    top, bottom = channel.max_current_a, channel.min_current_a
    kept = []
    for stage in ctx.stages:
        if stage.current_a > top:
            ctx.note(f"{stage.kind.value}.current", f"{amps(top)}, the channel's maximum "
                                                   f"(plan asked {amps(stage.current_a)})")
            if stage.kind == StageKind.BULK:
                ctx.warn(f"bulk held to the channel's {amps(top)} instead of "
                         f"{amps(stage.current_a)}: the charge takes longer")
            stage.current_a = top
        if stage.current_a < bottom:
            # Never raise a current to suit the channel: that moves it toward danger.
            if stage.kind in OPTIONAL:
                ctx.warn(f"{stage.kind.label} left out: it runs at {amps(stage.current_a)}, below"
                         f" the channel's smallest current {amps(bottom)}")
                continue
            fix = ("measure the rest voltage (a battery above the pre-charge threshold needs no "
                   "pre-charge) or use a channel that goes lower"
                   if stage.kind == StageKind.PRECHARGE else "use a channel that goes lower")
            raise ctx.refuse(
                f"the channel's smallest current {amps(bottom)} is above the "
                f"{amps(stage.current_a)} the {stage.kind.label} stage may take; {fix}"
            )
        exits = []
        for e in stage.exits:
            if e.kind == ExitKind.CURRENT_BELOW and e.value < bottom:
                ctx.warn(f"{stage.kind.label} ends at the channel's smallest current "
                         f"{amps(bottom)} instead of {amps(e.value)}: a little short of full")
                e = Exit(e.kind, bottom, e.then)
            exits.append(e)
        stage.exits = exits
        kept.append(stage)
    ctx.stages = kept


@rule("CP404", "charger.probe", source="common practice: compensation needs the battery's "
      "temperature; a channel without a probe runs at the setpoints for the temperature "
      "planned; BU-804b (from memory): a controlled overcharge is run with its temperature "
      "watched")
def charger_probe(ctx: Context) -> None:
    """Without a temperature probe, setpoints hold for the planned temperature only.

    A desulfation or equalization stage, whose fault stop watches the battery's
    temperature, is left out on a channel known to have no probe.
    """
    channel = ctx.battery_file.charger
    probe = channel is not None and channel.temperature_probe
    if probe:
        return
    guarded = [st for st in ctx.stages if st.kind in OPTIONAL]
    if guarded and channel is not None:
        for stage in guarded:
            ctx.warn(f"{stage.kind.label} left out: its stop on a temperature rise needs a "
                     "probe on the battery, and the channel has none")
        ctx.stages = [st for st in ctx.stages if st.kind not in OPTIONAL]
    elif guarded:
        ctx.warn("the overcharge stage stops on a temperature rise: use a channel with a "
                 "temperature probe on the battery, or leave the stage out")
    if ctx.compensation is not None:
        ctx.warn("no temperature probe: the voltages are set for the battery's temperature "
                 "now; plan again if it changes by more than 5 K")
    if ctx.lithium:
        ctx.warn("no temperature probe: nothing stops the charge if the cells fall below "
                 "0 °C; check the battery's temperature before and during charging")


#: How far a channel's step may move a setpoint before the plan is refused: a voltage by 1 %
#: (charger-IC practice: output regulation within about +-0.5 to 1 %, from memory, so a step
#: that moves a voltage further is no longer the plan's voltage), a current or tail current by
#: a quarter (common practice: the charge then still ends on its exits inside its timers).
QUANTISATION_MARGIN = {"V": 0.01, "A": 0.25}


@rule("CP405", "charger.quantisation", source="common practice: a channel sets only multiples "
      "of its voltage and current steps; rounding must never move a limit toward danger, nor "
      "any setpoint by more than 1 % (voltage) or 25 % (current)")
def charger_quantisation(ctx: Context) -> None:
    """Move setpoints onto the channel's steps toward safety; refuse one that then leaves its
    range, or that the step moves by more than the margin.

    Voltage and current limits round down; a tail current rounds up (the stage ends a
    little earlier). Nothing is clamped into range: a value that no longer fits is a refusal.
    A step that moves a voltage by more than 1 % or a current by more than 25 % is refused
    (a 5 V step would turn a 14.2 V LiFePO4 bulk voltage into 10 V).
    """
    channel = ctx.battery_file.charger
    if channel is None or (channel.voltage_step is None and channel.current_step is None):
        return

    def snap(value: float, step: float | None, up: bool) -> float:
        if step is None:
            return value
        units = value / step
        whole = math.ceil(units - 1e-9) if up else math.floor(units + 1e-9)
        return round(whole * step, 9)

    def record(what: str, before: float, after: float, unit: str) -> None:
        if abs(after - before) <= 1e-12:
            return
        ctx.quantisation.append(Quantised(what, before, after, unit))
        ctx.note(what, f"{before:.6g} {unit} -> {after:.6g} {unit} (channel step, rounded "
                       f"{'up' if after > before else 'down'})")
        margin = QUANTISATION_MARGIN[unit]
        if abs(after - before) > margin * abs(before) + 1e-12:
            raise ctx.refuse(
                f"the channel's step moves {what} from {before:.6g} {unit} to {after:.6g} "
                f"{unit}, more than the {margin:.0%} a step may move a setpoint; use a channel "
                "with a finer step"
            )

    v_step, i_step = channel.voltage_step, channel.current_step
    for stage in ctx.stages:
        label = stage.kind.value
        v_new = snap(stage.voltage_v, v_step, up=False)
        i_new = snap(stage.current_a, i_step, up=False)
        record(f"{label}.voltage", stage.voltage_v, v_new, "V")
        record(f"{label}.current", stage.current_a, i_new, "A")
        if not channel.min_voltage_v <= v_new <= channel.max_voltage_v:
            raise ctx.refuse(
                f"the {stage.kind.label} voltage {volts(stage.voltage_v)} becomes "
                f"{volts(v_new)} on the channel's step, outside its "
                f"{volts(channel.min_voltage_v)} to {volts(channel.max_voltage_v)} range; use a "
                "channel with a finer step"
            )
        if not (i_new > 0 and channel.min_current_a <= i_new <= channel.max_current_a):
            raise ctx.refuse(
                f"the {stage.kind.label} current {amps(stage.current_a)} becomes {amps(i_new)} "
                f"on the channel's step, outside its {amps(channel.min_current_a)} to "
                f"{amps(channel.max_current_a)} range; use a channel with a finer step"
            )
        exits = []
        for e in stage.exits:
            if e.kind == ExitKind.VOLTAGE_REACHED:
                e = Exit(e.kind, min(snap(e.value, v_step, up=False), v_new), e.then)
            elif e.kind == ExitKind.CURRENT_BELOW:
                tail = snap(e.value, i_step, up=True)
                record(f"{label}.exit_current", e.value, tail, "A")
                if e.value >= i_new - 1e-12:
                    raise ctx.refuse(
                        f"the {stage.kind.label} tail current {amps(e.value)} is not below the "
                        f"stage's current limit {amps(i_new)} (the channel's maximum current "
                        f"{amps(channel.max_current_a)}): the stage could never end on it; use a "
                        "channel with a larger current"
                    )
                if tail >= i_new:
                    raise ctx.refuse(
                        f"the {stage.kind.label} tail current {amps(e.value)} becomes "
                        f"{amps(tail)} on the channel's step, not below the stage's "
                        f"{amps(i_new)}; use a channel with a finer current step"
                    )
                e = Exit(e.kind, tail, e.then)
            exits.append(e)
        stage.voltage_v, stage.current_a, stage.exits = v_new, i_new, exits
    # a lead-acid hold stage must stay below the charge voltage: on a coarse step both can
    # land on the same value, and a battery held at absorption voltage forever is overcharged
    held = [s for s in ctx.stages if s.kind in (StageKind.FLOAT, StageKind.STORAGE_HOLD)]
    charged = [s.voltage_v for s in ctx.stages
               if s.kind in (StageKind.BULK, StageKind.ABSORPTION)]
    if held and charged and not ctx.lithium:
        for stage in held:
            if stage.voltage_v >= max(charged) - 1e-9:
                raise ctx.refuse(
                    f"on the channel's {volts(v_step or 0)} step the {stage.kind.label} voltage "
                    f"{volts(stage.voltage_v)} is no lower than the charge voltage "
                    f"{volts(max(charged))}, so the battery would be held at charge voltage; "
                    "use a channel with a finer voltage step"
                )
