"""What a measurement says: state of charge from a rest voltage or a hydrometer, and how long
a load takes to flatten a battery."""

from __future__ import annotations

from dataclasses import dataclass, field

from chargeplan.errors import InputError
from chargeplan.fmt import cell_volts, celsius, num, volts
from chargeplan.model.battery import BatteryFile
from chargeplan.profiles import ProfileSet
from chargeplan.units import parse_quantity

__all__ = ["REST_HOURS", "Runtime", "StateReading", "runtime", "state_of_charge"]

#: Hours of rest before an open-circuit reading means much (common practice: several).
REST_HOURS = 4.0
#: The trade's rating time when a file gives none: C20 for lead-acid; lithium at 0.2 C.
DEFAULT_RATED_HOURS = {"lead_acid": 20.0, "lithium": 5.0}


@dataclass
class StateReading:
    chemistry: str
    cells: int
    state_of_charge_pct: float
    basis: str
    notes: list[str] = field(default_factory=list)


def _cells_from_reading(volts_total: float, table, highest: float, given: int | None,
                        chemistry: str) -> int:
    if given is not None:
        return given
    empty = table[0][1]
    fits = [n for n in range(1, 401) if empty * n <= volts_total <= highest * n]
    if len(fits) != 1:
        options = " or ".join(str(n) for n in fits[:4]) if fits else "no whole number of"
        raise InputError(
            f"{volts(volts_total)} of {chemistry} could be {options} cells",
            field="--cells", fix="give --cells (or --nominal-voltage)",
        )
    return fits[0]


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
    from chargeplan.physics.electrolyte import (
        specific_gravity_corrected,
        state_of_charge_from_gravity_bci,
    )
    from chargeplan.physics.ocv import soc_from_ocv

    profile = (profiles or ProfileSet()).get(chemistry, field="--chemistry")
    if (rest_voltage_v is None) == (specific_gravity is None):
        raise InputError("give one reading", field="--rest-voltage",
                         fix="give --rest-voltage or --specific-gravity")
    notes: list[str] = []
    if nominal_voltage_v is not None and cells is None:
        cells = round(nominal_voltage_v / profile.nominal_cell_voltage.value)
    if specific_gravity is not None:
        if not profile.vented:
            raise InputError(f"{profile.name} cells are sealed", field="--specific-gravity",
                             fix="give --rest-voltage instead")
        if not 1.000 <= specific_gravity <= 1.350:
            raise InputError(f"{specific_gravity:g} is outside 1.000-1.350",
                             field="--specific-gravity",
                             fix="read the hydrometer again (battery acid lies in 1.100-1.300)")
        t = 26.7 if temperature_c is None else temperature_c
        corrected = float(specific_gravity_corrected(specific_gravity, t))
        soc = float(state_of_charge_from_gravity_bci(corrected))
        basis = (f"specific gravity {specific_gravity:.3f} at {celsius(t)} = {corrected:.3f} "
                 "at 26.7 °C (TM 5-4210-230-14&P-1 correction; Battery Council International "
                 "table)")
        if temperature_c is None:
            notes.append("no --temperature given: the reading is taken as at 26.7 °C (80 °F)")
        result_cells = cells or 0
    else:
        assert rest_voltage_v is not None
        table = profile.rest_voltage.table
        if rest_voltage_v <= 0:
            raise InputError(f"{volts(rest_voltage_v)} is not a rested battery voltage",
                             field="--rest-voltage",
                             fix="check the leads (red to +) and measure again")
        result_cells = _cells_from_reading(rest_voltage_v, table,
                                           profile.rest_voltage.highest_plausible.value,
                                           cells, profile.id)
        per_cell = rest_voltage_v / result_cells
        rest = profile.rest_voltage
        low, high = rest.dead_below.value, rest.highest_plausible.value
        if not low <= per_cell <= high:
            raise InputError(
                f"{volts(rest_voltage_v)} on {result_cells} cells is {cell_volts(per_cell)}, "
                f"outside what a rested {profile.id} cell reads ({cell_volts(low)} to "
                f"{cell_volts(high)})",
                field="--rest-voltage", fix="check the reading, the cell count and the chemistry",
            )
        soc = float(soc_from_ocv(per_cell, table))
        basis = (f"rest voltage {volts(rest_voltage_v)} = {cell_volts(per_cell)} on "
                 f"{result_cells} cells ({profile.rest_voltage.table_source.split(';')[0]})")
        if temperature_c is not None and profile.family == "lead_acid" and temperature_c < 10:
            notes.append("a cold lead-acid battery reads a little low at rest; the table is "
                         "for room temperature")
        if profile.id == "lifepo4" and 20 < soc < 90:
            notes.append("LiFePO4's flat curve makes a rest voltage a rough guide between 20 "
                         "and 90 %")
    if rested_s is not None and rested_s < REST_HOURS * 3600:
        notes.append(f"rested only {num(rested_s / 3600, 1)} h: a reading soon after charging "
                     f"reads high (surface charge); rest {num(REST_HOURS, 0)} h or more and "
                     "measure again")
    elif rested_s is None:
        notes.append(f"read only after {num(REST_HOURS, 0)} h or more at rest: soon after "
                     "charging it reads high (common practice)")
    return StateReading(profile.id, result_cells, soc, basis, notes)


@dataclass
class Runtime:
    current_a: float
    hours: float
    state_of_charge_pct: float
    rated_hours: float
    exponent: float
    notes: list[str] = field(default_factory=list)


def runtime(
    battery_file: BatteryFile, load: str, *, profiles: ProfileSet | None = None,
    file: str | None = None,
) -> Runtime:
    """How long ``load`` ('8.3 A' or '100 W') takes to flatten the battery from its present
    state, by Peukert's law (lead-acid) or near its rated capacity (lithium)."""
    from chargeplan.engine.planner import derive_state
    from chargeplan.physics.discharge import peukert_runtime_h

    ctx = derive_state(battery_file, profiles=profiles, file=file)
    notes: list[str] = []
    try:
        current = parse_quantity(load, "current")
    except ValueError:
        try:
            power = parse_quantity(load, "power")
        except ValueError:
            raise InputError(f"'{load}' is neither a current nor a power", field="--load",
                             fix="write a current such as '8.3 A' or a power such as "
                                 "'100 W'") from None
        current = power / ctx.nominal_voltage_v
        notes.append(f"{num(power, 1)} W / {volts(ctx.nominal_voltage_v)} nominal = "
                     f"{num(current, 2)} A (the current rises as the voltage sags)")
    if not current > 0:
        raise InputError("the load must draw current", field="--load",
                         fix="give a load above zero")
    soc = ctx.soc_pct if ctx.soc_pct is not None else 100.0
    if ctx.soc_pct is None:
        notes.append("no state of charge or rest voltage given: starting from full")
    rated = battery_file.battery.capacity_hours or DEFAULT_RATED_HOURS[ctx.profile.family]
    exponent = ctx.profile.physics.peukert_exponent.value
    full_h = float(peukert_runtime_h(ctx.capacity_ah, current, rated, exponent))
    return Runtime(current, full_h * soc / 100.0, soc, rated, exponent, notes)
