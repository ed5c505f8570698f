"""Storage intake: each inventory row resolved once into typed per-battery arrays (the fleet).

Chemistry names are matched without regard to case; cell counts follow from the nominal
voltage the way the core rules count them; the state of charge at intake comes from the
row's state of charge or its rested voltage (a LiFePO4 rest voltage in the flat middle of
its curve says nothing usable, so that battery's state is unknown, NaN).
"""

from __future__ import annotations

import datetime as dt
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from chargeplan.csvcolumns import Table
from chargeplan.csvfile import InputErrors
from chargeplan.errors import InputError
from chargeplan.model.storage import InventoryRow, SiteFile, load_connected
from chargeplan.physics.ocv import soc_from_ocv
from chargeplan.profiles import ProfileSet

__all__ = ["Fleet", "flat_reading", "profile_for", "resolve_fleet"]

#: BU-702 "How to Store Batteries": lithium is stored at 40-50 % state of charge.
LITHIUM_STORAGE_BAND_PCT = (40.0, 50.0)


@dataclass
class Fleet:
    """The batteries as arrays, one entry each; ``profiles`` and ``rows`` in the same order."""

    rows: Table[InventoryRow]  # a battery a row; its fields also as columns
    profiles: list[Any]
    chemistry: list[str]
    lead: np.ndarray  # bool
    lfp: np.ndarray  # bool: a flat rest-voltage curve (the profile's flat_band; LiFePO4)
    cells: np.ndarray  # int
    capacity_ah: np.ndarray
    bay: np.ndarray  # int, the bay it is stored in
    arrive: np.ndarray  # int, first day present
    depart: np.ndarray  # int, last day present
    intake_soc: np.ndarray  # %, NaN where a reading cannot tell
    storage_soc: np.ndarray  # %: lithium's storage level, 100 for lead-acid
    storage_voltage_v: np.ndarray  # the profile's storage voltage for the pack (lithium)
    threshold: np.ndarray  # % below which it is topped up
    draw_pct_day: np.ndarray  # its load's draw while connected, %/day
    connected: np.ndarray  # bool: its load stays connected
    may_disconnect: np.ndarray  # bool: staff may disconnect it (loads not given as connected)
    charge_min_c: np.ndarray
    charge_max_c: np.ndarray
    # int: each battery's profile, numbered in order of first appearance (a profile's
    # batteries share one number, whatever their cells or bay)
    profile_index: np.ndarray = field(default_factory=lambda: np.zeros(0, dtype=np.intp))

    @property
    def n(self) -> int:
        return len(self.rows)


def profile_for(profile_set: ProfileSet, chemistry: str) -> Any:
    """The profile of a chemistry name, in any case ('LiFePO4', 'AGM')."""
    ids = {pid.lower(): pid for pid in profile_set.ids}
    return profile_set.get(ids.get(chemistry.lower(), chemistry), field="chemistry")


def flat_reading(profile: Any, soc_pct: float) -> bool:
    """A rest voltage inside the profile's flat band (LiFePO4): not usable for state of
    charge. The band is one sourced profile value, read here, by ``state`` and by ``plan``."""
    return profile.rest_voltage.in_flat_band(soc_pct)


#: What a row's profile, cell count and bay follow from: rows alike in these resolve alike.
_KIND = ("chemistry", "nominal_voltage_v", "cells_in_series", "bay")
#: The per-battery values the arrays take from each row as it is.
_COLUMNS = ("capacity_ah", "state_of_charge_pct", "rest_voltage_v", "parasitic_draw_a", "loads",
            "arrive", "depart")


def _columns(rows: Table[InventoryRow]) -> dict[str, list[Any]]:
    """The rows' fields of _KIND and _COLUMNS, a list a field."""
    return {name: rows.column(name) for name in (*_KIND, *_COLUMNS)}


def _cells(nominal_voltage_v: float | None, cells_in_series: int | None,
           profile: Any) -> int | None:
    from chargeplan.engine.rules.derive import NOMINAL_TOLERANCE, cell_counts

    if cells_in_series is not None:
        return cells_in_series
    assert nominal_voltage_v is not None
    fits = cell_counts(nominal_voltage_v, profile.nominal_cell_voltage.value,
                       NOMINAL_TOLERANCE[profile.family])
    if len(fits) > 1 and profile.family == "lithium":
        # a trade name rounds down (12.8 V LiFePO4 is sold as '12 V', 25.6 V as '24 V')
        above = [n for n in fits if n * profile.nominal_cell_voltage.value >= nominal_voltage_v]
        fits = above[:1] or fits
    return fits[0] if len(fits) == 1 else None


def _resolve_kind(kind: tuple[Any, ...], profile_set: ProfileSet,
                  bay_names: list[str]) -> tuple[Any, int, int] | str:
    """The profile, cell count and bay of rows of this kind, or what is wrong with them (the
    message after the battery's name)."""
    chemistry, nominal_voltage_v, cells_in_series, bay = kind
    try:
        profile = profile_for(profile_set, chemistry)
    except InputError as error:
        return f"chemistry: {error.problem}; {error.fix}"
    count = _cells(nominal_voltage_v, cells_in_series, profile)
    if count is None:
        return "nominal_voltage: no single cell count fits; give cells_in_series"
    if bay not in bay_names:
        return f"bay: '{bay}' is not a bay of the site; use one of " + ", ".join(bay_names)
    return profile, count, bay_names.index(bay)


def resolve_fleet(site_file: SiteFile, rows: Sequence[InventoryRow],
                  profile_set: ProfileSet, inventory_file: str) -> Fleet:
    """Every row resolved, or every bad row reported at once (each naming its file).

    Each kind of row (chemistry, nominal voltage, cells in series, bay) is resolved once;
    each battery's arrays are its kind's values, then its own capacity, reading, load and
    days (numpy, a column at a time)."""
    bay_names = [b.name for b in site_file.bays]
    rows = Table.of_rows(rows, list(InventoryRow.model_fields))
    columns = _columns(rows)
    kinds: dict[tuple[Any, ...], int] = {}
    kind_of = [kinds.setdefault(kind, len(kinds))
               for kind in zip(*(columns[name] for name in _KIND), strict=True)]
    resolved = [_resolve_kind(kind, profile_set, bay_names) for kind in kinds]
    if any(isinstance(got, str) for got in resolved):
        raise InputErrors([f"{inventory_file}: battery {battery}: {resolved[k]}"
                           for battery, k in zip(rows.column("id"), kind_of, strict=True)
                           if isinstance(resolved[k], str)])
    return _arrays(site_file, rows, columns, resolved, np.array(kind_of, dtype=np.intp))


def _arrays(site_file: SiteFile, rows: Table[InventoryRow], columns: dict[str, list[Any]],
            resolved: list[Any], kind: np.ndarray) -> Fleet:
    """The fleet's arrays: each kind's values (``resolved``, one entry a kind) taken for each
    battery by its ``kind``, then the rows' own ``columns``."""
    site, days = site_file.site, site_file.site.days
    kind_profiles = [p for p, _c, _b in resolved]
    kind_lead = np.array([p.family == "lead_acid" for p in kind_profiles], dtype=bool)
    kind_storage = np.array([100.0 if p.family == "lead_acid" else float(
        soc_from_ocv(p.charge.storage_voltage.value, p.rest_voltage.table))
        for p in kind_profiles])
    kind_threshold = np.array([(site.lead_acid_top_up_pct if p.family == "lead_acid"
                                else site.lithium_top_up_pct) or p.storage.top_up_below.value
                               for p in kind_profiles])
    kind_low_c = np.array([max(p.temperature.charge_min.value,
                               p.envelope.charge_temperature_min.value) for p in kind_profiles])
    kind_high_c = np.array([min(p.temperature.charge_max.value,
                                p.envelope.charge_temperature_max.value) for p in kind_profiles])
    kind_storage_v = np.array([p.charge.storage_voltage.value if p.charge.storage_voltage
                               else np.nan for p in kind_profiles])
    kind_cells = [c for _p, c, _b in resolved]
    cells = np.array(kind_cells, dtype=int)[kind]
    lead, low_c = kind_lead[kind], kind_low_c[kind]
    cap = np.array(columns["capacity_ah"], dtype=float)
    profile_ids = [p.id for p in kind_profiles]
    numbers: dict[int, int] = {}
    kind_profile = np.array([numbers.setdefault(id(p), len(numbers)) for p in kind_profiles],
                            dtype=np.intp)
    each = kind.tolist()
    loads = _objects(columns["loads"])
    return Fleet(
        rows=rows, profiles=list(map(kind_profiles.__getitem__, each)),
        chemistry=list(map(profile_ids.__getitem__, each)), lead=lead,
        lfp=np.array([p.rest_voltage.flat_band is not None for p in kind_profiles],
                     dtype=bool)[kind],
        cells=cells,
        capacity_ah=cap, bay=np.array([b for _p, _c, b in resolved], dtype=int)[kind],
        arrive=_days(site_file, columns["arrive"], 0),
        depart=_days(site_file, columns["depart"], days - 1),
        intake_soc=_intake_soc(columns, kind, kind_profiles, kind_cells),
        storage_soc=kind_storage[kind], threshold=kind_threshold[kind],
        storage_voltage_v=kind_storage_v[kind] * cells,
        draw_pct_day=np.nan_to_num(np.array(columns["parasitic_draw_a"], dtype=float),
                                   nan=0.0) * 24.0 / cap * 100.0,  # None (no load): NaN, 0
        connected=np.fromiter(map(load_connected, columns["loads"], columns["parasitic_draw_a"]),
                              dtype=bool, count=len(rows)),
        may_disconnect=np.asarray(loads != "connected", dtype=bool),
        charge_min_c=np.where(lead, low_c, np.maximum(low_c, 0.0)),  # never lithium below 0
        charge_max_c=kind_high_c[kind], profile_index=_in_order(kind_profile[kind]),
    )


def _in_order(codes: np.ndarray) -> np.ndarray:
    """Integer codes renumbered in order of first appearance."""
    _found, first, inverse = np.unique(codes, return_index=True, return_inverse=True)
    rank = np.empty(len(first), dtype=np.intp)
    rank[np.argsort(first)] = np.arange(len(first))
    return rank[inverse.ravel()]


def _intake_soc(columns: dict[str, list[Any]], kind: np.ndarray,
                kind_profiles: list[Any], kind_cells: list[int]) -> np.ndarray:
    """The state of charge at intake: as given, or read off the profile's rest-voltage curve
    (NaN where the voltage lies in the curve's flat band, see :func:`flat_reading`).

    The voltages are looked up one curve at a time (a profile and a cell count), and each
    distinct voltage of a curve once."""
    soc = np.array(columns["state_of_charge_pct"], dtype=float)  # NaN where not given
    by_voltage = np.flatnonzero(np.isnan(soc))
    if by_voltage.size == 0:
        return soc
    volts = np.array([columns["rest_voltage_v"][i] for i in by_voltage.tolist()], dtype=float)
    curves: dict[tuple[str, int], int] = {}  # (profile, cells) -> its curve's number
    kind_curve = np.array([curves.setdefault((p.id, int(c)), len(curves))
                           for p, c in zip(kind_profiles, kind_cells, strict=True)], dtype=np.intp)
    curve = kind_curve[kind[by_voltage]]
    for number, (profile_id, count) in enumerate(curves):
        on_curve = curve == number
        if not on_curve.any():
            continue
        profile = next(p for p in kind_profiles if p.id == profile_id)
        distinct, which = np.unique(volts[on_curve], return_inverse=True)
        read = soc_from_ocv(distinct / count, profile.rest_voltage.table)
        read = np.array([float("nan") if flat_reading(profile, s) else s
                         for s in read.tolist()], dtype=float)
        soc[by_voltage[on_curve]] = read[which]
    return soc


def _objects(column: list[Any]) -> np.ndarray:
    """A column as a numpy array of its objects (texts, None), for comparisons at once."""
    out = np.empty(len(column), dtype=object)
    out[:] = column
    return out


def _days(site_file: SiteFile, column: list[dt.date | None], default: int) -> np.ndarray:
    """Each date as a day of the season (0 is its first day), ``default`` where none is given."""
    start = site_file.site.start
    given = np.flatnonzero(_objects(column) != None)  # noqa: E711  (elementwise, numpy)
    out = np.full(len(column), default, dtype=int)
    out[given] = [(column[i] - start).days for i in given.tolist()]
    return out
