"""Cell counts and rest-voltage plausibility: one function each, for every command.

``plan`` (rule CP101 and CP103), ``state`` and the bench and storage planners all
call :func:`count_cells` and :func:`check_rest_voltage`, so that one battery gets one
answer. Both read the profile only (its nominal cell voltage and rested-voltage
table); the callers decide what a verdict means for them (a refusal, a warning, an
input error) and which field names their messages carry.
"""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass, field

from chargeplan.errors import InputError
from chargeplan.fmt import cell_volts, num, volts
from chargeplan.model.profile import Profile

__all__ = [
    "LEAD_ACID_CELLS",
    "NOMINAL_TOLERANCE",
    "CellCount",
    "CellFields",
    "RestCheck",
    "check_rest_voltage",
    "count_cells",
    "nominal_fits",
    "state_of_charge_from_rest",
]

#: How far a trade name may sit from cells x nominal cell voltage ("12 V" for 12.8 V LFP);
#: common practice: trade names round lithium pack voltages.
NOMINAL_TOLERANCE = {"lead_acid": 0.05, "lithium": 0.08}
#: The cell counts of lead-acid batteries as sold (2, 6, 12, 24, 36, 48 V); common practice.
LEAD_ACID_CELLS = (1, 3, 6, 12, 18, 24)
#: Rest-voltage counting for lithium looks no further than this many cells in series.
MAX_CELLS = 400


@dataclass(frozen=True, slots=True)
class CellFields:
    """The names the caller's messages give the inputs (file keys or command options)."""

    cells: str = "battery.cells_in_series"
    nominal: str = "battery.nominal_voltage"
    rest: str = "state.rest_voltage"


@dataclass(frozen=True, slots=True)
class CellCount:
    cells: int
    nominal_voltage_v: float
    basis: str  # how it was decided, for the trace


def nominal_fits(nominal_v: float, cell_v: float, tolerance: float) -> list[int]:
    """The cell counts whose nominal voltage lies within ``tolerance`` of ``nominal_v``."""
    low, high = max(1, int(nominal_v / cell_v * 0.8)), int(nominal_v / cell_v * 1.2) + 2
    return [n for n in range(low, high) if abs(n * cell_v - nominal_v) <= tolerance * nominal_v]


def _rested_fits(profile: Profile, rest_v: float, counts: Iterable[int]) -> list[int]:
    empty, high = profile.rest_voltage.table[0][1], profile.rest_voltage.highest_plausible.value
    return [n for n in counts if empty * n <= rest_v + 1e-9 and rest_v <= high * n + 1e-9]


def _given_cells(profile: Profile, cells: int, nominal_v: float | None,
                 fields: CellFields) -> CellCount:
    cell_v = profile.nominal_cell_voltage.value
    tolerance = NOMINAL_TOLERANCE[profile.family]
    if nominal_v is not None and abs(cells * cell_v - nominal_v) > tolerance * nominal_v:
        raise InputError(
            f"{cells} cells of {profile.id} make {volts(cells * cell_v)} nominal, not "
            f"{volts(nominal_v)}", field=fields.cells,
            fix=f"correct {fields.nominal} or {fields.cells} (or the chemistry)")
    return CellCount(cells, nominal_v or cells * cell_v, f"{cells} cells in series, as given")


def count_cells(
    profile: Profile,
    *,
    cells: int | None = None,
    nominal_voltage_v: float | None = None,
    rest_voltage_v: float | None = None,
    fields: CellFields = CellFields(),
) -> CellCount:
    """The cells in series: as given (checked against the nominal voltage), else from the
    nominal voltage, else from a rest voltage alone (one count must fit).

    A nominal voltage that two counts could make (48 V LiFePO4: 14, 15 or 16 cells) is
    never settled by a rest voltage: the label or the maker must say, since a wrong count
    overcharges every cell.

    Raises
    ------
    InputError
        naming ``fields``: no count fits, or more than one does.
    """
    if cells is not None:
        return _given_cells(profile, cells, nominal_voltage_v, fields)
    cell_v = profile.nominal_cell_voltage.value
    if nominal_voltage_v is not None:
        tolerance = NOMINAL_TOLERANCE[profile.family]
        fits = nominal_fits(nominal_voltage_v, cell_v, tolerance)
        basis = (f"= {volts(nominal_voltage_v)} / {cell_volts(cell_v)}, rounded (within "
                 f"{num(tolerance * 100, 0)} % of {{made}})")
        what, where = f"{volts(nominal_voltage_v)} of {profile.id}", fields.nominal
    elif rest_voltage_v is not None and rest_voltage_v > 0:
        counts = LEAD_ACID_CELLS if profile.family == "lead_acid" else range(1, MAX_CELLS + 1)
        fits = _rested_fits(profile, rest_voltage_v, counts)
        basis = f"from the rest voltage {volts(rest_voltage_v)} (the only count that fits)"
        what, where = f"a rested {volts(rest_voltage_v)} of {profile.id}", fields.rest
    else:
        raise InputError("the cell count is not known", field=fields.cells,
                         fix=f"give {fields.cells} or {fields.nominal}")
    if len(fits) != 1:
        options = " or ".join(str(n) for n in fits[:4])
        if fits:
            problem = f"{what} could be {options} cells in series"
        elif nominal_voltage_v is None:
            problem = (f"{what} is no usual count of healthy rested {profile.id} cells (a "
                       "shorted cell, or another chemistry?)")
        else:
            problem = (f"no whole number of {profile.id} cells ({cell_volts(cell_v)} each) "
                       f"makes {what}")
        fix = (f"give {fields.cells} ({options}); the label or the battery's maker says which"
               if fits else f"give {fields.cells} (or {fields.nominal}), or check the chemistry")
        raise InputError(problem, field=where, fix=fix)
    n = fits[0]
    nominal = nominal_voltage_v if nominal_voltage_v is not None else n * cell_v
    return CellCount(n, nominal, f"{n} cells " + basis.format(made=volts(n * cell_v)))


@dataclass(frozen=True, slots=True)
class RestCheck:
    """What a rest voltage says about a battery of ``cells`` cells.

    ``verdict`` is "ok", "below_empty" (under the table's 0 % but no sign of a bad cell),
    "reversed", "dead", "too_high", "fewer_cells" (reads like fewer healthy cells: a
    shorted or dead cell, or a wrong count) or "over_discharged" (lithium below empty).
    """

    verdict: str
    per_cell_v: float
    state_of_charge_pct: float
    problem: str = ""
    notes: list[str] = field(default_factory=list)


def state_of_charge_from_rest(profile: Profile, per_cell_v: float,
                              temperature_c: float | None = None) -> tuple[float, list[str]]:
    """State of charge (%) by the profile's rested table, corrected to the table's
    temperature where the profile gives a coefficient; a reading outside the table clamps
    to 0 or 100 % with a note."""
    from chargeplan.physics.ocv import soc_from_ocv

    rest, notes = profile.rest_voltage, []
    v = per_cell_v
    k = rest.temperature_coefficient
    if k is not None and temperature_c is not None and rest.table_temperature is not None:
        v = per_cell_v - k.value / 1000 * (temperature_c - rest.table_temperature.value)
        if abs(v - per_cell_v) >= 0.0005:
            notes.append(f"{cell_volts(per_cell_v)} at {num(temperature_c, 0)} °C reads as "
                         f"{cell_volts(v)} at the table's {num(rest.table_temperature.value, 1)}"
                         f" °C ({num(k.value, 2)} mV/K per cell)")
    low, high = rest.table[0], rest.table[-1]
    if v < low[1]:
        notes.append(f"{cell_volts(v)} is below the table's 0 % point {cell_volts(low[1])}: "
                     "read as 0 %")
    elif v > high[1]:
        notes.append(f"{cell_volts(v)} is above the table's 100 % point {cell_volts(high[1])}"
                     " (surface charge, or not rested): read as 100 %")
    return float(soc_from_ocv(v, rest.table)), notes


def check_rest_voltage(profile: Profile, cells: int, rest_voltage_v: float,
                       temperature_c: float | None = None) -> RestCheck:
    """Whether a rest voltage makes sense for ``cells`` cells of this chemistry, and the
    state of charge it stands for."""
    rest, n, v = profile.rest_voltage, cells, rest_voltage_v
    per_cell = v / n
    lithium = profile.family == "lithium"
    empty_v, high_v = rest.table[0][1], rest.highest_plausible.value
    if v < 0:
        return RestCheck("reversed", per_cell, 0.0, f"the rest voltage reads {volts(v)}: the "
                         "leads are reversed (or the battery is connected backwards)")
    if per_cell < rest.dead_below.value:
        return RestCheck("dead", per_cell, 0.0, (
            f"the rest voltage {volts(v)} is {cell_volts(per_cell)}, below "
            f"{cell_volts(rest.dead_below.value)}: a dead or shorted cell, an open connection "
            "or a tripped protection circuit"))
    fits = _rested_fits(profile, v, range(1, 2 * n + 2))
    if per_cell > high_v + 1e-9:
        more = " or ".join(str(k) for k in fits if k > n) or "no whole number of"
        return RestCheck("too_high", per_cell, 100.0, (
            f"the rest voltage {volts(v)} is {cell_volts(per_cell)}, more than a rested "
            f"{n}-cell {profile.id} battery can read ({cell_volts(high_v)} at most): it reads "
            f"like {more} cells"))
    soc, notes = state_of_charge_from_rest(profile, per_cell, temperature_c)
    if per_cell >= empty_v - 1e-9:
        return RestCheck("ok", per_cell, soc, notes=notes)
    fewer = [k for k in fits if k < n][::-1]
    if fewer:
        return RestCheck("fewer_cells", per_cell, soc, (
            f"the rest voltage {volts(v)} reads like {' or '.join(map(str, fewer[:3]))} healthy "
            f"cells, not {n}: {'a dead' if lithium else 'a shorted'} cell or the wrong cell "
            "count is likely"), notes)
    if lithium:
        return RestCheck("over_discharged", per_cell, soc, (
            f"the rest voltage {volts(v)} is {cell_volts(per_cell)}, below the "
            f"{cell_volts(empty_v)} of an empty {profile.id} cell: the pack is "
            "over-discharged"), notes)
    return RestCheck("below_empty", per_cell, soc, (
        f"the rest voltage {volts(v)} is below an empty {n}-cell battery's "
        f"{volts(empty_v * n)}"), notes)
