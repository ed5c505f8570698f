"""Set: the settings (profile plus maker overrides) and the stages in order."""

from __future__ import annotations

from chargeplan.engine.context import Context, Settings
from chargeplan.engine.registry import rule
from chargeplan.fmt import amps, cell_volts, celsius, duration, num, volts
from chargeplan.physics.ocv import soc_from_ocv
from chargeplan.plan import Exit, ExitKind, Stage, StageKind
from chargeplan.units import DAY_S

#: The order stages run in: the conditioning overcharges only once the battery is full.
CHARGE_ORDER = (StageKind.PRECHARGE, StageKind.BULK, StageKind.ABSORPTION,
                StageKind.DESULFATION, StageKind.EQUALIZATION, StageKind.FLOAT,
                StageKind.STORAGE_HOLD)

#: The highest state of charge a lithium storage voltage may stand for (BU-702: 40-50 %).
STORAGE_LEVEL_MAX_PCT = 60.0
#: The longest a lithium battery is held at its charge voltage (BU-409: no float, the
#: constant-voltage stage ends on the tail current or a set time). Charger ICs time that
#: phase out after a few hours, 4 h at most (common practice, from memory: the checker's
#: CK316), and a charge program's backstop timer runs 10 % beyond the stage's own limit
#: (firmware.charge_program.TIMER_BEYOND_EXIT): 3.5 h leaves it inside the 4 h. A maker's
#: longer absorption time is held to it.
LITHIUM_ABSORPTION_MAX_S = 3.5 * 3600.0


@rule("CP201", "settings.overrides", source="common practice: the maker's datasheet overrides "
      "generic values, inside the chemistry's hard envelope")
def settings_overrides(ctx: Context) -> None:
    """Start from the profile and apply the maker's values, each inside the hard envelope."""
    p = ctx.profile
    c = p.charge
    n, cap = ctx.cells, ctx.capacity_ah
    o = ctx.battery_file.battery.overrides
    env_v = p.envelope.max_cell_voltage.value
    env_a = p.envelope.max_current.value * cap
    s = Settings(
        absorption_v_cell=c.absorption_voltage.value,
        float_v_cell=c.float_voltage.value if c.float_voltage else None,
        storage_v_cell=c.storage_voltage.value,
        equalization_v_cell=p.equalization.voltage.value if p.equalization.voltage else None,
        desulfation_v_cell=p.desulfation.voltage.value if p.desulfation.voltage else None,
        precharge_below_v_cell=c.precharge_below.value if c.precharge_below else None,
        precharge_a=c.precharge_current.value * cap if c.precharge_current else None,
        bulk_a=c.bulk_current.value * cap,
        tail_a=c.tail_current.value * cap,
        max_a=env_a,
        equalization_a=p.equalization.current.value * cap if p.equalization.current else None,
        desulfation_a=p.desulfation.current.value * cap if p.desulfation.current else None,
        absorption_time_s=c.absorption_time_max.value,
        equalization_time_s=p.equalization.duration.value if p.equalization.duration else None,
        desulfation_time_s=p.desulfation.duration.value if p.desulfation.duration else None,
        coefficient_v_per_k_per_cell=(p.temperature.compensation.coefficient.value / 1000
                                  if p.temperature.compensation else 0.0),
        cell_voltage_max_v=env_v,
    )
    ctx.note("settings", f"from profile '{p.id}': absorption {cell_volts(s.absorption_v_cell)}, "
                         f"bulk {amps(s.bulk_a)} ({num(c.bulk_current.value)} It x "
                         f"{num(cap)} Ah), tail {amps(s.tail_a)}")

    def field(name: str) -> str:
        return f"battery.overrides.{name}"

    def cell_voltage(name: str, attr: str, stage: str) -> None:
        given = getattr(o, name)
        if given is None:
            return
        if attr == "float_v_cell" and (ctx.lithium or "float" in p.envelope.forbidden_stages):
            raise ctx.bad_input(field(name), f"{p.name} is never floated",
                                "remove the float_voltage override")
        block = {"equalization_v_cell": p.equalization,
                 "desulfation_v_cell": p.desulfation}.get(attr)
        if block is not None and (not block.possible or stage in p.envelope.forbidden_stages):
            raise ctx.bad_input(field(name), f"{p.name} is never given {stage}",
                                "remove the override, or use a profile that allows it")
        per_cell = given.cell_volts(n)
        nominal_v = p.nominal_cell_voltage.value
        if not given.per_cell and per_cell < nominal_v:
            raise ctx.bad_input(
                field(name),
                f"{given} is below the battery's {volts(nominal_v * n)} nominal voltage",
                f"did you mean '{given.volts:g} V/cell'? (a battery voltage is for all "
                f"{n} cells)",
            )
        if per_cell > env_v + 1e-9:
            shown = str(given) if given.per_cell else f"{given} ({cell_volts(per_cell)})"
            hint = (f"did you mean '{given.volts:g} V' for the battery? "
                    if given.per_cell and given.volts > 5 else "")
            raise ctx.bad_input(
                field(name),
                f"{shown} is above the {p.id} hard envelope's {cell_volts(env_v)}",
                f"{hint}check the datasheet value; chargeplan never plans above the envelope",
            )
        if attr == "storage_v_cell" and ctx.lithium:
            level = float(soc_from_ocv(per_cell, p.rest_voltage.table))
            if level > STORAGE_LEVEL_MAX_PCT:
                raise ctx.bad_input(
                    field(name),
                    f"{given} stands for about {num(level, 0)} % charge, not a storage level",
                    f"store lithium at 40-50 % (BU-702); use at most "
                    f"{STORAGE_LEVEL_MAX_PCT:g} %",
                )
        setattr(s, attr, per_cell)
        ctx.note(f"{stage}.voltage", f"maker's {cell_volts(per_cell)} ({given}) replaces the "
                                     "profile's value")

    cell_voltage("absorption_voltage", "absorption_v_cell", "absorption")
    cell_voltage("float_voltage", "float_v_cell", "float")
    cell_voltage("storage_voltage", "storage_v_cell", "storage_hold")
    cell_voltage("equalization_voltage", "equalization_v_cell", "equalization")
    cell_voltage("desulfation_voltage", "desulfation_v_cell", "desulfation")
    if s.float_v_cell is not None and s.float_v_cell >= s.absorption_v_cell:
        raise ctx.bad_input(field("float_voltage"), "must be below the absorption voltage",
                            "check both values against the datasheet")
    if s.storage_v_cell > s.absorption_v_cell:
        raise ctx.bad_input(field("storage_voltage"), "must not exceed the absorption voltage",
                            "check both values against the datasheet")

    def current(name: str, attr: str) -> None:
        given = getattr(o, name)
        if given is None:
            return
        value = given.amps(cap)
        if value > env_a + 1e-9:
            raise ctx.bad_input(
                field(name),
                f"{given} is {amps(value)}, above the {p.id} hard envelope's "
                f"{num(p.envelope.max_current.value)} It = {amps(env_a)}",
                "check the datasheet value; chargeplan never plans above the envelope",
            )
        setattr(s, attr, value)
        ctx.note(name, f"maker's {amps(value)} ({given}) replaces the profile's value")

    current("max_charge_current", "max_a")
    current("bulk_current", "bulk_a")
    current("tail_current", "tail_a")
    if o.precharge_current is not None and s.precharge_a is None:
        raise ctx.bad_input(field("precharge_current"), f"{p.name} has no pre-charge stage",
                            "remove the override (the bulk current applies from the start)")
    current("precharge_current", "precharge_a")
    # Every current is held to the maximum charge current (the envelope's, or the maker's).
    if s.bulk_a > s.max_a:
        if o.bulk_current is not None:
            raise ctx.bad_input(field("bulk_current"), f"is above the maximum charge current "
                                f"{amps(s.max_a)}", "check both values against the datasheet")
        s.bulk_a = s.max_a
        ctx.note("bulk.current", f"bulk held to the maximum charge current {amps(s.max_a)}")
    if s.precharge_a is not None and s.precharge_a > s.bulk_a:
        if o.precharge_current is not None:
            raise ctx.bad_input(field("precharge_current"), "is above the bulk current",
                                "a pre-charge current is a small fraction of the bulk current")
        s.precharge_a = s.bulk_a
        ctx.note("precharge.current", f"held to the bulk current {amps(s.bulk_a)}")
    if s.tail_a >= s.bulk_a:
        given = ("tail_current" if o.tail_current is not None
                 else "bulk_current" if o.bulk_current is not None else "max_charge_current")
        raise ctx.bad_input(
            field(given),
            f"leaves a bulk current of {amps(s.bulk_a)}, not above the tail current "
            f"{amps(s.tail_a)} that ends absorption",
            "check the datasheet values; the tail current is a few percent of the capacity",
        )
    for attr in ("equalization_a", "desulfation_a"):
        value = getattr(s, attr)
        if value is not None and value > s.max_a:
            setattr(s, attr, s.max_a)
            ctx.note(f"{attr.removesuffix('_a')}.current",
                     f"held to the maximum charge current {amps(s.max_a)}")
    if o.absorption_time_s is not None:
        s.absorption_time_s = o.absorption_time_s
        ctx.note("absorption.duration", f"maker's {duration(o.absorption_time_s)}")
        ceiling, why = (
            (LITHIUM_ABSORPTION_MAX_S, "lithium is never held at its charge voltage longer "
             "(BU-409: no float)") if ctx.lithium or p.termination is None else
            (p.termination.absorption_time_cold_max.value, "the longest this profile lets "
             "absorption run even in the cold (absorption_time_cold_max); a battery not full "
             "by then is not made full by more, and a long absorption dries and corrodes it "
             "(BU-403)"))
        if s.absorption_time_s > ceiling:
            s.absorption_time_s = ceiling
            ctx.note("absorption.duration", f"held to {duration(ceiling)}")
            ctx.warn(f"the maker's absorption time {duration(o.absorption_time_s)} is held to "
                     f"{duration(ceiling)}: {why}; check the datasheet's value")
    if o.temperature_coefficient_mv_per_k_per_cell is not None:
        if ctx.lithium:
            raise ctx.bad_input(field("temperature_coefficient"),
                                "lithium voltages are not temperature compensated",
                                "remove the override")
        s.coefficient_v_per_k_per_cell = o.temperature_coefficient_mv_per_k_per_cell / 1000
        ctx.note("compensation", f"maker's {num(o.temperature_coefficient_mv_per_k_per_cell)} "
                                 "mV/K/cell")
    ctx.settings = s


def _settings(ctx: Context) -> Settings:
    assert ctx.settings is not None, "CP201 runs first"
    return ctx.settings


@rule("CP202", "stages.precharge", source="BU-808a Low-voltage cut-off: pre-charge lithium "
      "below about 3.0 V/cell (NMC) or 2.5 V/cell (LFP) at about 0.1 C with a timer; BU-403 "
      "Charging Lead Acid: lead-acid takes its constant current from the start")
def stages_precharge(ctx: Context) -> None:
    """A deeply discharged lithium battery, or one whose voltage is unknown, starts small.

    The stage ends as soon as the voltage passes the threshold, so a battery above it
    moves straight on; it faults on its timer. Lead-acid has no pre-charge: it takes the
    bulk current from the start (BU-403), a soft start would end at once (a discharged
    lead-acid cell is above 1.75 V/cell under current), and a deeply discharged battery is
    caught by its rest voltage instead (CP103: a shorted cell is refused).
    """
    s = _settings(ctx)
    if s.precharge_below_v_cell is None or s.precharge_a is None:
        ctx.note("precharge", f"none: {ctx.profile.name} takes the bulk current from the start "
                              "(BU-403); its rest voltage was checked by CP103")
        return
    threshold = s.precharge_below_v_cell * ctx.cells
    if ctx.rest_v_cell is not None and ctx.rest_v_cell >= s.precharge_below_v_cell:
        ctx.note("precharge", f"none: rest {cell_volts(ctx.rest_v_cell)} is above "
                              f"{cell_volts(s.precharge_below_v_cell)}")
        return
    if ctx.rest_v_cell is None and ctx.soc_pct is not None and ctx.soc_pct > 0:
        ctx.note("precharge", f"none: {num(ctx.soc_pct, 0)} % state of charge given")
        return
    why = (
        "the voltage is not known"
        if ctx.rest_v_cell is None
        else f"rest {cell_volts(ctx.rest_v_cell)} is below {cell_volts(s.precharge_below_v_cell)}"
    )
    ctx.stages.append(
        Stage(
            kind=StageKind.PRECHARGE,
            voltage_v=threshold,
            current_a=s.precharge_a,
            exits=[Exit(ExitKind.VOLTAGE_REACHED, threshold)],
            purpose="lift a deeply discharged battery gently; a fault if the timer runs out",
        )
    )
    ctx.note("precharge.voltage", f"pre-charge until {volts(threshold)} = "
                                  f"{cell_volts(s.precharge_below_v_cell)} x {ctx.cells} "
                                  f"because {why}")
    ctx.note("precharge.current", f"{amps(s.precharge_a)}")


def _permitted(ctx: Context, kind: StageKind) -> str | None:
    """Why a high-voltage stage may run on this battery, or None when it may not."""
    p = ctx.profile
    block = p.equalization if kind == StageKind.EQUALIZATION else p.desulfation
    if ctx.lithium or kind.value in p.envelope.forbidden_stages or not block.possible:
        return None
    if block.allowed:
        return f"{p.name} takes it"
    if getattr(ctx.battery_file.battery.overrides, f"{kind.value}_voltage") is None:
        return None
    return f"the maker's permission (battery.overrides.{kind.value}_voltage)"


def _not_permitted(ctx: Context, kind: StageKind, asked: bool) -> None:
    p = ctx.profile
    block = p.equalization if kind == StageKind.EQUALIZATION else p.desulfation
    if block.maker_may_allow and not ctx.lithium:
        why = (f"{p.name} takes it only with the maker's permission: give "
               f"battery.overrides.{kind.value}_voltage from the datasheet")
    else:
        why = f"never done on {p.name}"
    if asked:
        ctx.warn(f"{kind.label} asked for but left out: {why}")
    ctx.note(kind.value, f"none: {why}")


@rule("CP203", "stages.desulfation", source="BU-804b Sulfation and how to prevent it (from "
      "memory): a controlled overcharge of an already fully charged flooded battery, at low "
      "current, temperature watched, stopped near 50 degC; common practice: AGM only with its "
      "maker's permission, never gel or lithium")
def stages_desulfation(ctx: Context) -> None:
    """Desulfation only on evidence of sulfation or on request, after a full charge.

    Evidence is a failed capacity test or a failed recharge test (state.capacity_test,
    state.recharge_test); the operator asks with request: [desulfation]. Flooded by
    default, AGM with the maker's permission; never gel or lithium.
    """
    kind = StageKind.DESULFATION
    bf = ctx.battery_file
    asked = "desulfation" in bf.request
    why_allowed = _permitted(ctx, kind)
    if why_allowed is None:
        _not_permitted(ctx, kind, asked)
        return
    state = bf.state
    evidence = [text for present, text in (
        (asked, "asked for (request: [desulfation])"),
        (state.capacity_test == "failed", "a failed capacity test (state.capacity_test)"),
        (state.recharge_test == "failed", "a failed recharge test (state.recharge_test)"),
    ) if present]
    if not evidence:
        ctx.note("desulfation", "none: no evidence of sulfation (state.capacity_test or "
                                "state.recharge_test failed) and not asked for")
        return
    s = _settings(ctx)
    _conditioning_stage(ctx, kind, s.desulfation_v_cell, s.desulfation_a,
                        "a controlled overcharge at low current to break down sulfate, after "
                        "the battery is full", f"{'; '.join(evidence)}; {why_allowed}")
    if ctx.stage(kind) is not None:
        ctx.warn("desulfation planned: stay nearby, watch the battery's temperature, and stop "
                 "if it gets hot or gasses hard")


def _guards(ctx: Context, kind: StageKind) -> list[Exit] | None:
    """The stage's Ah cap and temperature stops, or None when the battery is already too warm.

    The charge exit counts from the start of the charge: the charge the normal stages may
    return (the charge missing x charge factor x timer margin) plus the stage's own cap.
    """
    p = ctx.profile
    block = p.equalization if kind == StageKind.EQUALIZATION else p.desulfation
    assert block.charge_max and block.temperature_rise and block.stop_above
    c, cap = p.charge, ctx.capacity_ah
    before_ah = (100 - ctx.soc_assumed_pct) / 100 * cap * c.charge_factor.value * (
        c.timer_margin.value)
    own_ah = block.charge_max.value / 100 * cap
    stop_c = block.stop_above.value
    rise_k = min(block.temperature_rise.value, stop_c - ctx.temperature_c)
    if rise_k < 1.0:
        ctx.warn(f"{kind.label} left out: the battery at {celsius(ctx.temperature_c)} is "
                 f"within 1 K of the stage's {celsius(stop_c)} stop; let it cool and charge "
                 "again")
        return None
    ctx.note(f"{kind.value}.exit", f"fault above {num(before_ah + own_ah, 2)} Ah in since the "
                                   f"charge began = {num(before_ah, 2)} Ah for the normal "
                                   f"charge + {num(block.charge_max.value, 0)} % of "
                                   f"{num(cap)} Ah; fault on a rise of {num(rise_k, 1)} K "
                                   f"(at most {num(block.temperature_rise.value, 0)} K, and "
                                   f"never past {celsius(stop_c)})")
    return [Exit(ExitKind.CHARGE_ABOVE, before_ah + own_ah, then="fault"),
            Exit(ExitKind.TEMPERATURE_RISE, rise_k, then="fault")]


def _conditioning_stage(ctx: Context, kind: StageKind, v_cell: float | None,
                        current_a: float | None, purpose: str, why: str) -> None:
    """Add a current-limited overcharge stage after absorption, with its time, Ah and
    temperature exits."""
    block = ctx.profile.equalization if kind == StageKind.EQUALIZATION else (
        ctx.profile.desulfation)
    assert v_cell is not None and current_a is not None and block.duration is not None
    guards = _guards(ctx, kind)
    if guards is None:
        return
    ceiling, duration_s = v_cell * ctx.cells, block.duration.value
    ctx.stages.append(Stage(kind=kind, voltage_v=ceiling, current_a=current_a,
                            exits=[Exit(ExitKind.DURATION, duration_s), *guards],
                            purpose=purpose))
    ctx.note(f"{kind.value}.voltage", f"ceiling {volts(ceiling)} = {cell_volts(v_cell)} x "
                                      f"{ctx.cells}, at {amps(current_a)} for "
                                      f"{duration(duration_s)}, after absorption, because "
                                      f"{why}")


@rule("CP204", "stages.bulk_absorption", source="BU-403 Charging Lead Acid; BU-409 Charging "
      "Lithium-ion: constant current to the voltage limit, then constant voltage until the "
      "current falls to the tail current")
def stages_bulk_absorption(ctx: Context) -> None:
    """Constant current to the absorption voltage, then hold it until the tail current or time.

    Lithium going into storage stops at its storage voltage instead of full.
    """
    s = _settings(ctx)
    n = ctx.cells
    if ctx.target == "storage":
        hold_v = s.storage_v_cell * n
        level = ctx.storage_soc_pct()
        if ctx.soc_pct is not None and ctx.soc_pct >= level:
            ctx.stages = [st for st in ctx.stages if st.kind != StageKind.PRECHARGE]
            ctx.info(
                f"already at about {num(ctx.soc_pct, 0)} %, at or above the storage level of "
                f"about {num(level, 0)} %: the charger will deliver little or nothing; to store "
                f"it lower, discharge it to {volts(hold_v)} with a load"
            )
        else:
            ctx.stages.append(
                Stage(
                    kind=StageKind.BULK,
                    voltage_v=hold_v,
                    current_a=s.bulk_a,
                    exits=[Exit(ExitKind.VOLTAGE_REACHED, hold_v)],
                    purpose="constant current up to the storage voltage",
                )
            )
        ctx.stages.append(
            Stage(
                kind=StageKind.STORAGE_HOLD,
                voltage_v=hold_v,
                current_a=s.bulk_a,
                exits=[
                    Exit(ExitKind.CURRENT_BELOW, s.tail_a, then="stop"),
                    Exit(ExitKind.DURATION, s.absorption_time_s, then="stop"),
                ],
                purpose="settle at the storage voltage, then switch off (no trickle)",
            )
        )
        ctx.note("storage_hold.voltage", f"{volts(hold_v)} = {cell_volts(s.storage_v_cell)} x {n}"
                                         f" (about {num(level, 0)} % state of charge)")
        return
    abs_v = s.absorption_v_cell * n
    ctx.stages.append(
        Stage(
            kind=StageKind.BULK,
            voltage_v=abs_v,
            current_a=s.bulk_a,
            exits=[Exit(ExitKind.VOLTAGE_REACHED, abs_v)],
            purpose="constant current until the absorption voltage is reached",
        )
    )
    ctx.note("bulk.current", f"{amps(s.bulk_a)}")
    then = "stop" if ctx.lithium else "next"
    ctx.stages.append(
        Stage(
            kind=StageKind.ABSORPTION,
            voltage_v=abs_v,
            current_a=s.bulk_a,
            exits=[
                Exit(ExitKind.CURRENT_BELOW, s.tail_a, then=then),
                Exit(ExitKind.DURATION, s.absorption_time_s, then=then),
            ],
            purpose="constant voltage until the current tails off",
        )
    )
    ctx.note("absorption.voltage", f"{volts(abs_v)} = {cell_volts(s.absorption_v_cell)} x {n}")
    ctx.note("absorption.exit", f"tail current {amps(s.tail_a)} or "
                                f"{duration(s.absorption_time_s)}, whichever first")


@rule("CP205", "stages.equalization", source="Battery University, equalizing charge (SG spread "
      "0.030, about 2.50 V/cell); IEEE 450-1987 cl. 4.4 (a cell below 2.13 V on float, or at "
      "least every 18 months); flooded by default, AGM only with its maker's permission")
def stages_equalization(ctx: Context) -> None:
    """Equalize only on evidence that cells have drifted, when due, or on request.

    Evidence is a specific-gravity spread at the trigger (state.specific_gravity_spread) or
    a cell low on float (state.lowest_cell_on_float, IEEE 450 cl. 4.4); due is the
    profile's interval since state.since_equalization; the operator asks with
    request: [equalization] (or state.equalize: true). Never gel or lithium.
    """
    kind = StageKind.EQUALIZATION
    bf = ctx.battery_file
    state = bf.state
    if state.equalize is False:
        ctx.note("equalization", "none: state.equalize is false")
        return
    asked = bool(state.equalize) or "equalization" in bf.request
    why_allowed = _permitted(ctx, kind)
    if why_allowed is None:
        _not_permitted(ctx, kind, asked)
        return
    e = ctx.profile.equalization
    assert e.gravity_spread_trigger and e.interval
    spread, since = state.specific_gravity_spread, state.since_equalization_s
    low_cell, float_below = state.lowest_cell_on_float_v_cell, e.float_cell_below
    reasons = [text for present, text in (
        (asked, "asked for (request: [equalization] or state.equalize)"),
        (low_cell is not None and float_below is not None and low_cell < float_below.value,
         f"a cell at {cell_volts(low_cell or 0)} on float (below "
         f"{cell_volts(float_below.value if float_below else 0)})"),
        (spread is not None and spread >= e.gravity_spread_trigger.value - 1e-9,
         f"cells differ by {spread or 0:.3f} specific gravity "
         f"(>= {e.gravity_spread_trigger.value:.3f})"),
        (since is not None and since >= e.interval.value,
         f"{num((since or 0) / DAY_S, 0)} d since the last one "
         f"(due every {num(e.interval.value / DAY_S, 0)} d)"),
    ) if present]
    if not reasons:
        ctx.note("equalization", "none: not warranted (no drift given, not due, not asked)")
        return
    if ctx.stage(StageKind.DESULFATION) is not None:
        ctx.note("equalization", f"none: {'; '.join(reasons)}, but the desulfation stage is "
                                 "already a controlled overcharge; measure the spread after "
                                 "it and equalize on a later charge if it stays")
        return
    s = _settings(ctx)
    _conditioning_stage(ctx, kind, s.equalization_v_cell, s.equalization_a,
                        "a controlled overcharge to bring drifted cells back together, after "
                        "the battery is full", f"{'; '.join(reasons)}; {why_allowed}")
    if ctx.stage(kind) is not None:
        ctx.warn("equalization planned: heavy gassing; ventilate well, check the electrolyte "
                 "level before and after, watch the temperature, and stay nearby")


@rule("CP206", "stages.finish", source="IEC 62485-2 Table 1 (float voltages); BU-403 (float "
      "after charge); BU-702 and BU-808a (no float or trickle for lithium)")
def stages_finish(ctx: Context) -> None:
    """Lead-acid ends on float, or on a storage hold for the storage time; lithium stops.

    The stages stand in charge order first: a desulfation or equalization stage follows
    absorption (it overcharges a battery that is already full).
    """
    ctx.stages.sort(key=lambda stage: CHARGE_ORDER.index(stage.kind))
    if ctx.lithium:
        ctx.note("finish", "stop: lithium is not floated")
        return
    s = _settings(ctx)
    storage = ctx.storage_s
    if ctx.storage_planned and storage is not None:
        v = s.storage_v_cell * ctx.cells
        ctx.stages.append(
            Stage(
                kind=StageKind.STORAGE_HOLD,
                voltage_v=v,
                current_a=s.bulk_a,
                exits=[],
                purpose=f"hold on the storage voltage through the {num(storage / DAY_S, 0)} d "
                "of storage",
            )
        )
        ctx.note("storage_hold.voltage", f"{volts(v)} = {cell_volts(s.storage_v_cell)} x "
                                         f"{ctx.cells} for {num(storage / DAY_S, 0)} d")
        return
    if s.float_v_cell is None:
        ctx.finish = "stop"
        ctx.note("finish", f"stop: {ctx.profile.name} has no float voltage")
        return
    v = s.float_v_cell * ctx.cells
    ctx.stages.append(
        Stage(
            kind=StageKind.FLOAT,
            voltage_v=v,
            current_a=s.bulk_a,
            exits=[],
            purpose="hold full until disconnected",
        )
    )
    ctx.note("float.voltage", f"{volts(v)} = {cell_volts(s.float_v_cell)} x {ctx.cells}")
