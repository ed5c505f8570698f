"""What a measurement says: state of charge from a rest voltage or a hydrometer, and how long
a load takes to flatten a battery."""

from __future__ import annotations

from dataclasses import dataclass, field

from chargeplan.cautions import profile_cautions
from chargeplan.cells import CellFields, check_rest_voltage, count_cells
from chargeplan.errors import InputError
from chargeplan.fmt import cell_volts, celsius, num, volts
from chargeplan.model.battery import BatteryFile
from chargeplan.model.profile import Profile
from chargeplan.profiles import ProfileSet
from chargeplan.units import QuantityError, parse_quantity

__all__ = ["REST_HOURS", "Runtime", "StateReading", "runtime", "state_of_charge"]

#: Hours of rest before an open-circuit reading means much (common practice: several).
REST_HOURS = 4.0
#: Specific gravities a hydrometer reads in battery acid (TM 5-4210-230-14&P-1: 1.100-1.300
#: between flat and full, with a margin): the state command's and the readings log's range.
GRAVITY_RANGE = (1.000, 1.350)
#: The loads runtime accepts, in amperes.
LOAD_RANGE_A = (0.001, 10_000.0)
#: The trade's rating time when a file gives none: C20 for lead-acid; lithium at 0.2 C.
DEFAULT_RATED_HOURS = {"lead_acid": 20.0, "lithium": 5.0}


@dataclass
class StateReading:
    chemistry: str
    cells: int
    state_of_charge_pct: float
    basis: str
    notes: list[str] = field(default_factory=list)
    #: the chemistry's cautions, the deferral line last (chargeplan.cautions.profile_cautions)
    cautions: list[str] = field(default_factory=list)


#: The names the state command's messages give its inputs.
_FIELDS = CellFields(cells="--cells", nominal="--nominal-voltage", rest="--rest-voltage")


def _from_gravity(profile: Profile, specific_gravity: float, temperature_c: float | None,
                  notes: list[str]) -> tuple[float, str]:
    """State of charge from a hydrometer reading, corrected for temperature (US Army
    TM 5-4210-230-14&P-1; Battery Council International table)."""
    from chargeplan.physics.electrolyte import (
        specific_gravity_corrected,
        state_of_charge_from_gravity_bci,
    )

    if not profile.vented:
        raise InputError(f"{profile.name} cells are sealed", field="--specific-gravity",
                         fix="give --rest-voltage instead")
    low, high = GRAVITY_RANGE
    if not low <= specific_gravity <= high:
        raise InputError(f"{specific_gravity:g} is outside {low:.3f}-{high:.3f}",
                         field="--specific-gravity",
                         fix="read the hydrometer again (battery acid lies in 1.100-1.300)")
    t = 26.7 if temperature_c is None else temperature_c
    corrected = float(specific_gravity_corrected(specific_gravity, t))
    if not low <= corrected <= high:
        raise InputError(f"{specific_gravity:g} at {celsius(t)} corrects to "
                         f"{corrected:.3f}, outside {low:.3f}-{high:.3f}", field="--temperature",
                         fix="check the electrolyte's temperature and the reading")
    if temperature_c is None:
        notes.append("no --temperature given: the reading is taken as at 26.7 °C (80 °F)")
    return float(state_of_charge_from_gravity_bci(corrected)), (
        f"specific gravity {specific_gravity:.3f} at {celsius(t)} = {corrected:.3f} at 26.7 °C "
        "(TM 5-4210-230-14&P-1 correction; Battery Council International table)")


def _from_rest(profile: Profile, rest_voltage_v: float, temperature_c: float | None,
               cells: int | None, nominal_voltage_v: float | None,
               notes: list[str]) -> tuple[int, float, str]:
    """Cells, state of charge and its basis from a rest voltage, by the same two functions
    ``plan`` uses (:func:`chargeplan.cells.count_cells`, :func:`check_rest_voltage`)."""
    if rest_voltage_v <= 0:
        raise InputError(f"{volts(rest_voltage_v)} is not a rested battery voltage",
                         field="--rest-voltage",
                         fix="check the leads (red to +) and measure again")
    count = count_cells(profile, cells=cells, nominal_voltage_v=nominal_voltage_v,
                        rest_voltage_v=rest_voltage_v, fields=_FIELDS)
    check = check_rest_voltage(profile, count.cells, rest_voltage_v, temperature_c)
    if check.verdict in ("reversed", "dead", "too_high", "fewer_cells"):
        raise InputError(check.problem, field="--rest-voltage",
                         fix="check the reading, the cell count and the chemistry")
    guessed = cells is None and nominal_voltage_v is None
    if guessed:
        notes.append(_guessed_count(profile, count.cells, rest_voltage_v))
    if check.verdict in ("below_empty", "over_discharged"):
        notes.append(f"{check.problem}: check each cell before charging"
                     + (" (BU-808a)" if profile.family == "lithium" else ""))
    notes.extend(check.notes)
    soc = check.state_of_charge_pct
    band = profile.rest_voltage.flat_band
    if band is not None and profile.rest_voltage.in_flat_band(soc):
        notes.append(f"{profile.name}'s flat curve makes a rest voltage a rough guide between "
                     f"{num(band.low.value, 0)} and {num(band.high.value, 0)} %")
    return count.cells, soc, (
        f"rest voltage {volts(rest_voltage_v)} = {cell_volts(check.per_cell_v)} on "
        f"{count.cells} cells" + (" (a guess from the voltage alone)" if guessed else "")
        + f" ({profile.rest_voltage.table_source.split(';')[0]})")


def _guessed_count(profile: Profile, cells: int, rest_voltage_v: float) -> str:
    """What a cell count read off the voltage alone may hide: a battery of more cells, far
    discharged (or with shorted cells), that reads the same without reading as dead."""
    from chargeplan.cells import LEAD_ACID_CELLS

    counts = LEAD_ACID_CELLS if profile.family == "lead_acid" else ()
    dead = profile.rest_voltage.dead_below.value
    larger = [n for n in counts if n > cells and rest_voltage_v / n >= dead][:2]
    text = (f"the cell count ({cells} cells, {volts(cells * profile.nominal_cell_voltage.value)}"
            " nominal) is a guess from the voltage alone")
    if larger:
        text += "; it could as well be " + " or ".join(
            f"a {n}-cell ({volts(n * profile.nominal_cell_voltage.value)}) battery far "
            f"discharged ({cell_volts(rest_voltage_v / n)})" for n in larger)
    return text + ": give --cells or --nominal-voltage from the label"


def state_of_charge(
    chemistry: str,
    *,
    rest_voltage_v: float | None = None,
    specific_gravity: float | None = None,
    temperature_c: float | None = None,
    cells: int | None = None,
    nominal_voltage_v: float | None = None,
    rested_s: float | None = None,
    profiles: ProfileSet | None = None,
) -> StateReading:
    """State of charge from a rested voltage (per the profile's table) or a hydrometer
    reading (corrected for temperature, US Army TM 5-4210-230-14&P-1; Battery Council
    International table)."""
    profile = (profiles or ProfileSet()).get(chemistry, field="--chemistry")
    if cells is not None and not 1 <= cells <= 400:
        raise InputError(f"{cells} is not a cell count", field="--cells",
                         fix="give the cells in series, e.g. 6 for a 12 V lead-acid battery")
    if temperature_c is not None and not -60 <= temperature_c <= 100:
        raise InputError(f"{temperature_c:g} degC is not a battery temperature",
                         field="--temperature", fix="give the battery's temperature, -60 to "
                                                    "100 degC")
    if rested_s is not None and rested_s < 0:
        raise InputError("cannot be negative", field="--rested-for",
                         fix="give the time since charging, e.g. 6h")
    if (rest_voltage_v is None) == (specific_gravity is None):
        raise InputError("give one reading", field="--rest-voltage",
                         fix="give --rest-voltage or --specific-gravity")
    notes: list[str] = []
    if specific_gravity is not None:
        soc, basis = _from_gravity(profile, specific_gravity, temperature_c, notes)
        result_cells = 0
        if cells is not None or nominal_voltage_v is not None:
            result_cells = count_cells(profile, cells=cells, nominal_voltage_v=nominal_voltage_v,
                                       fields=_FIELDS).cells
    else:
        assert rest_voltage_v is not None
        result_cells, soc, basis = _from_rest(profile, rest_voltage_v, temperature_c, cells,
                                              nominal_voltage_v, notes)
    if rested_s is not None and rested_s < REST_HOURS * 3600:
        notes.append(f"rested only {num(rested_s / 3600, 1)} h: a reading soon after charging "
                     f"reads high (surface charge); rest {num(REST_HOURS, 0)} h or more and "
                     "measure again")
    elif rested_s is None:
        notes.append(f"read only after {num(REST_HOURS, 0)} h or more at rest: soon after "
                     "charging it reads high (common practice)")
    return StateReading(profile.id, result_cells, soc, basis, notes, profile_cautions(profile))


@dataclass
class Runtime:
    current_a: float
    runtime_h: float
    state_of_charge_pct: float
    rated_h: float
    exponent: float
    notes: list[str] = field(default_factory=list)
    #: the chemistry's cautions, the deferral line last (chargeplan.cautions.profile_cautions)
    cautions: list[str] = field(default_factory=list)


def runtime(
    battery_file: BatteryFile, load: str, *, profiles: ProfileSet | None = None,
    file: str | None = None,
) -> Runtime:
    """How long ``load`` ('5 A' or '60 W') takes to flatten the battery from its present
    state, by Peukert's law (lead-acid) or near its rated capacity (lithium)."""
    from chargeplan.engine.planner import derive_state
    from chargeplan.physics.discharge import (
        LOW_RATE_CAPACITY_FACTOR,
        peukert_runtime_h,
        runtime_capped_h,
    )

    ctx = derive_state(battery_file, profiles=profiles, file=file)
    notes: list[str] = []
    try:
        current = parse_quantity(load, "current")
    except QuantityError as as_current:
        if as_current.about_text:  # the characters are wrong: a power would not read either
            raise InputError(as_current.problem, field="--load", fix=as_current.fix) from None
        try:
            power = parse_quantity(load, "power")
        except ValueError:
            raise InputError(f"'{load}' is neither a current nor a power", field="--load",
                             fix="write a current such as '5 A' or a power such as "
                                 "'60 W'") from None
        current = power / ctx.nominal_voltage_v
        notes.append(f"{num(power, 1)} W / {volts(ctx.nominal_voltage_v)} nominal = "
                     f"{num(current, 2)} A (the current rises as the voltage sags)")
    if not LOAD_RANGE_A[0] <= current <= LOAD_RANGE_A[1]:
        raise InputError(f"{current:.4g} A is outside {LOAD_RANGE_A[0]:g} to "
                         f"{LOAD_RANGE_A[1]:g} A", field="--load",
                         fix="give the load's current or power, e.g. '5 A' or '60 W'")
    soc = ctx.soc_pct if ctx.soc_pct is not None else 100.0
    if ctx.soc_pct is None:
        notes.append("no state of charge or rest voltage given: starting from full")
    rated = battery_file.battery.capacity_hours or DEFAULT_RATED_HOURS[ctx.profile.family]
    exponent = ctx.profile.physics.peukert_exponent.value
    factor = LOW_RATE_CAPACITY_FACTOR[ctx.profile.family]
    full_h = float(runtime_capped_h(ctx.capacity_ah, current, rated, exponent, factor))
    if full_h < float(peukert_runtime_h(ctx.capacity_ah, current, rated, exponent)) - 1e-9:
        notes.append(f"capped at {num(factor, 2)} x the rated {num(ctx.capacity_ah)} Ah: below "
                     "its rated current Peukert's law overstates what a battery gives (" + (
                         "C100 is about 1.1-1.25 x C20 for lead-acid" if ctx.profile.family
                         == "lead_acid" else "lithium gives about its rated capacity at any "
                         "low rate") + ", from memory)")
    if current < ctx.capacity_ah / rated:
        notes.append(f"below the rated current ({num(ctx.capacity_ah / rated, 2)} A) the "
                     "battery's own self-discharge shortens this; Peukert's law does not "
                     "count it")
    notes.append("at low temperatures a battery delivers less than this (not modelled)")
    return Runtime(current, full_h * soc / 100.0, soc, rated, exponent, notes,
                   profile_cautions(ctx.profile))
