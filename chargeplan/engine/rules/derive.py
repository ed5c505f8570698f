"""Derive: what the battery is and whether it may be charged at all."""

from __future__ import annotations

from chargeplan.cells import NOMINAL_TOLERANCE, check_rest_voltage, count_cells  # noqa: F401
from chargeplan.cells import nominal_fits as cell_counts  # noqa: F401 - for the planners
from chargeplan.engine.context import Context
from chargeplan.engine.registry import rule
from chargeplan.errors import InputError
from chargeplan.fmt import cell_volts, celsius, num, volts
from chargeplan.physics.electrolyte import (
    freezing_point_tm5_1185,
    specific_gravity_bci,
    state_of_charge_from_gravity_bci,
)
from chargeplan.physics.ocv import soc_from_ocv


@rule("CP101", "cells.count", source="IEC 62485-2 Table 1 (voltages per 2.0 V lead-acid cell); "
      "common practice: trade names round lithium pack voltages (12.8 V LiFePO4 is sold as "
      "'12 V')")
def cells_count(ctx: Context) -> None:
    """Cells in series follow from the nominal voltage and the chemistry's cell voltage.

    Both given must agree; a nominal voltage that two cell counts could make
    (48 V LiFePO4: 15 or 16 cells) must be settled by giving cells_in_series. The count
    is :func:`chargeplan.cells.count_cells`, the one every command uses.
    """
    battery = ctx.battery_file.battery
    try:
        count = count_cells(ctx.profile, cells=battery.cells_in_series,
                            nominal_voltage_v=battery.nominal_voltage_v)
    except InputError as error:
        raise ctx.bad_input(error.field or "battery.nominal_voltage", error.problem,
                            error.fix or "give cells_in_series") from None
    ctx.cells, ctx.nominal_voltage_v = count.cells, count.nominal_voltage_v
    ctx.note("cells_in_series", count.basis)


@rule("CP102", "capacity.rating", source="common practice: lithium batteries sold as "
      "'lead-equivalent' carry a label capacity that is not their own")
def capacity_rating(ctx: Context) -> None:
    """Plan from the actual capacity; a lithium battery rated lead-equivalent must give it."""
    battery = ctx.battery_file.battery
    if battery.rating == "lead-equivalent":
        if battery.actual_capacity_ah is None:
            if ctx.lithium:
                raise ctx.refuse(
                    "this lithium battery is rated lead-equivalent and its actual capacity is "
                    "not given, so no safe charge current can be set; give "
                    "battery.actual_capacity from the maker's datasheet"
                )
            ctx.capacity_ah = battery.capacity_ah
            ctx.note("capacity", f"{num(battery.capacity_ah)} Ah (lead-acid: label = actual)")
            return
        ctx.capacity_ah = battery.actual_capacity_ah
        ctx.note(
            "capacity",
            f"{num(battery.actual_capacity_ah)} Ah actual (label {num(battery.capacity_ah)} Ah "
            "lead-equivalent)",
        )
        return
    if battery.actual_capacity_ah is not None:
        raise ctx.bad_input(
            "battery.actual_capacity",
            "is only used with rating: lead-equivalent",
            "remove it, or set rating: lead-equivalent",
        )
    ctx.capacity_ah = battery.capacity_ah
    ctx.note("capacity", f"{num(battery.capacity_ah)} Ah")


@rule("CP103", "state.reading", source="BU-808a Low-voltage cut-off (lithium below 1.5 V/cell); "
      "Battery Council International OCV table (11.89 V is 0 %); common practice: a 12 V "
      "lead-acid battery resting near 10.5 V has a shorted cell")
def state_reading(ctx: Context) -> None:
    """A rest voltage must make sense for the chemistry and cell count before anything is charged.

    Reversed leads, a dead or shorted cell and a wrong cell count are refused;
    otherwise the reading gives the state of charge from the profile's table, corrected
    for the battery's temperature and clamped (with a note) outside it.
    """
    state = ctx.battery_file.state
    ctx.temperature_c = ctx.battery_file.conditions.battery_temperature_c
    if state.specific_gravity is not None or state.specific_gravity_spread is not None:
        if not ctx.profile.vented:
            field = "specific_gravity" if state.specific_gravity is not None else (
                "specific_gravity_spread")
            raise ctx.bad_input(
                f"state.{field}",
                f"{ctx.profile.name} cells are sealed and cannot be read with a hydrometer",
                "give state.rest_voltage instead",
            )
    if state.state_of_charge_pct is not None:
        ctx.soc_pct = state.state_of_charge_pct
        ctx.note("state_of_charge", f"{num(ctx.soc_pct, 0)} %, as given")
    if state.specific_gravity is not None:
        gravity = ctx.corrected_gravity()
        soc = float(state_of_charge_from_gravity_bci(gravity))
        ctx.soc_pct = soc if ctx.soc_pct is None else min(soc, ctx.soc_pct)
        ctx.note(
            "state_of_charge",
            f"{num(soc, 0)} % from specific gravity {state.specific_gravity:.3f} read at "
            f"{celsius(ctx.temperature_c)}, {gravity:.3f} corrected to 26.7 °C "
            "(TM 5-4210-230-14&P-1 correction; Battery Council International table)",
        )
    if state.rest_voltage_v is None:
        if ctx.soc_pct is None:
            ctx.info("no rest voltage or state of charge given: timers assume a flat battery")
        return
    _rest_reading(ctx, state.rest_voltage_v)


def _rest_reading(ctx: Context, v: float) -> None:
    """CP103's reading of a rest voltage, by :func:`chargeplan.cells.check_rest_voltage`."""
    state, n = ctx.battery_file.state, ctx.cells
    check = check_rest_voltage(ctx.profile, n, v, ctx.temperature_c)
    ctx.rest_v_cell = check.per_cell_v
    verified = state.cells_verified
    if check.verdict == "reversed":
        raise ctx.refuse(f"{check.problem}; connect red to + and black to -, then measure again")
    if check.verdict == "dead":
        raise ctx.refuse(f"{check.problem}; do not charge it, have it tested" + (
            " (BU-808a: never revive lithium cells that sat below 1.5 V/cell)"
            if ctx.lithium else ""))
    if check.verdict == "too_high":
        raise ctx.refuse(f"{check.problem}; check cells_in_series and the chemistry")
    if check.verdict == "fewer_cells" and not verified:
        raise ctx.refuse(
            f"{check.problem}, and charging would overcharge the good cells; check "
            "cells_in_series, then each cell (hydrometer or cell voltages); if all read alike "
            "the battery is only deeply discharged: set state.cells_verified: true to plan it")
    if check.verdict == "over_discharged" and not verified:
        raise ctx.refuse(
            f"{check.problem}; have each cell measured: if all read alike and above "
            f"{cell_volts(ctx.profile.rest_voltage.dead_below.value)}, set "
            "state.cells_verified: true to plan a pre-charge (BU-808a)")
    if check.verdict != "ok":
        why = ("because state.cells_verified is true" if verified else
               "with no sign of a bad cell (state.cells_verified is not set: check each cell "
               "if you can)")
        ctx.warn(f"{check.problem}; planned as deeply discharged {why}: watch for one cell "
                 "gassing or heating early")
    for note in check.notes:
        ctx.note("state_of_charge", note)
    soc = check.state_of_charge_pct
    ctx.note("state_of_charge", f"{num(soc, 0)} % from rest voltage {volts(v)} = "
                                f"{cell_volts(check.per_cell_v)} "
                                f"({ctx.profile.rest_voltage.table_source.split(';')[0]})")
    ctx.soc_pct = soc if ctx.soc_pct is None else min(soc, ctx.soc_pct)
    band = ctx.profile.rest_voltage.flat_band
    if band is not None and ctx.profile.rest_voltage.in_flat_band(soc):
        ctx.info(f"{ctx.profile.name}'s flat voltage curve makes a rest voltage a rough guide "
                 f"between {num(band.low.value, 0)} and {num(band.high.value, 0)} %; timers "
                 "allow for it")


#: What a too-cold battery's refusal (and a bench card for it) tells the operator to do.
COLD_START_ADVICE = "measure the cell temperature; start when it is above {low}"


@rule("CP104", "temperature.cold_start", source="BU-410 Charging at High and Low "
      "Temperatures, Table 1: lead-acid from -20 degC, lithium-ion from 0 degC and never below "
      "(with the cool-zone current limit above it)")
def temperature_cold_start(ctx: Context) -> None:
    """Start only at or above the lowest charge temperature, measured at the cells.

    A colder battery is refused with what to do (warm it, measure the cell temperature,
    start when it is above the limit); the bench schedules such a battery after a warm-up
    by this rule's id. At or above the limit the cool zone (CP302) cuts the current.
    """
    t = ctx.temperature_c
    low, high = ctx.charge_window()
    ctx.note("temperature", f"battery at {celsius(t)}; charge window {celsius(low)} to "
                            f"{celsius(high)}")
    if t >= low:
        return
    advice = COLD_START_ADVICE.format(low=celsius(low))
    if ctx.lithium:
        raise ctx.refuse(
            f"the battery is at {celsius(t)}: lithium must never be charged below "
            f"{celsius(low)} (metallic lithium plates on the anode); bring it into a warm "
            f"room, {advice}"
        )
    raise ctx.refuse(
        f"the battery is at {celsius(t)}, below the {celsius(low)} lowest charge temperature "
        f"of {ctx.profile.name}; warm it, {advice}"
    )


@rule("CP107", "temperature.too_hot", source="BU-410 Charging at High and Low Temperatures, "
      "Table 1: lead-acid up to 50 degC, lithium-ion up to 45 degC")
def temperature_too_hot(ctx: Context) -> None:
    """Never start above the highest charge temperature; let the battery cool first."""
    t = ctx.temperature_c
    _low, high = ctx.charge_window()
    if t > high:
        raise ctx.refuse(
            f"the battery is at {celsius(t)}, above the {celsius(high)} highest charge "
            f"temperature of {ctx.profile.name}; let it cool in the shade before charging"
        )


#: Margin above the freezing point where a warning is given.
FREEZE_WARNING_K = 5.0


@rule("CP105", "temperature.frozen", source="US Army TM 5-1185 Table III (freezing point by "
      "specific gravity); Battery Council International table (specific gravity by state of "
      "charge); common practice: never charge a frozen battery")
def temperature_frozen(ctx: Context) -> None:
    """Never charge a frozen lead-acid battery: refuse at or below its electrolyte's freezing point.

    The freezing point comes from the measured specific gravity, else from the
    state of charge; with neither, the battery is assumed flat (the warmest
    freezing point).
    """
    if ctx.lithium:
        return
    state = ctx.battery_file.state
    if state.specific_gravity is not None:
        gravity = ctx.corrected_gravity()
        basis = f"specific gravity {gravity:.3f} (corrected)"
    else:
        soc = ctx.soc_assumed_pct
        offset = ctx.profile.rest_voltage.freeze_check_offset
        if ctx.rest_v_cell is not None:
            # the reading as read, not corrected for temperature (a cold battery reads low,
            # which here errs toward a warmer freezing point), less the table's offset
            soc = min(soc, float(soc_from_ocv(ctx.rest_v_cell - (offset.value if offset else 0),
                                              ctx.profile.rest_voltage.table)))
        gravity = float(specific_gravity_bci(soc))
        basis = (f"{num(soc, 0)} % state of charge (specific gravity {gravity:.3f})"
                 if ctx.soc_pct is not None
                 else f"no reading, so a flat battery (specific gravity {gravity:.3f})")
    freeze = float(freezing_point_tm5_1185(gravity))
    ctx.freezing_point_c = freeze
    ctx.note("freezing_point", f"electrolyte freezes at {celsius(freeze)} at {basis} "
                               "(TM 5-1185 Table III)")
    t = ctx.temperature_c
    if t <= freeze:
        raise ctx.refuse(
            f"the battery is at {celsius(t)}, at or below its electrolyte's freezing point "
            f"{celsius(freeze)} ({basis}): it may be frozen, and a frozen battery can burst or "
            "explode on charge; let it thaw at room temperature for a day, check the case for "
            "cracks and bulges, then plan again"
        )
    if t <= freeze + FREEZE_WARNING_K:
        ctx.warn(
            f"the battery at {celsius(t)} is within {num(FREEZE_WARNING_K, 0)} K of its "
            f"electrolyte's freezing point {celsius(freeze)}: check for ice or a bulging case "
            "before connecting"
        )


@rule("CP106", "target.full_or_storage", source="BU-702 How to Store Batteries: lithium at "
      "40-50 % for storage, no trickle; lead-acid stored fully charged on float")
def target(ctx: Context) -> None:
    """Charge to full, except lithium going into storage: charge that only to its storage level."""
    ctx.finish = "stop" if ctx.lithium else "hold"
    if ctx.storage_planned:
        assert ctx.storage_s is not None
        ctx.target = "storage" if ctx.lithium else "full"
        after = ctx.profile.charge.storage_after.value
        ctx.note(
            "target",
            f"storage of {num(ctx.storage_s / 86400, 0)} d (at least {num(after / 86400, 0)} d): "
            + ("charge to the storage level, then stop"
               if ctx.lithium else "charge to full, then hold on the storage voltage"),
        )
    else:
        ctx.target = "full"
        ctx.note("target", "charge to full, then " + ("stop (no float for lithium)"
                                                     if ctx.lithium else "float"))
