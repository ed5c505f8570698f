"""Storage intake: each inventory row resolved once into typed per-battery arrays (the fleet).

Chemistry names are matched without regard to case; cell counts follow from the nominal
voltage the way the core rules count them; the state of charge at intake comes from the
row's state of charge or its rested voltage (a LiFePO4 rest voltage in the flat middle of
its curve says nothing usable, so that battery's state is unknown, NaN).
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass
from typing import Any

import numpy as np

from chargeplan.csvfile import InputErrors
from chargeplan.errors import InputError
from chargeplan.model.storage import InventoryRow, SiteFile
from chargeplan.physics.ocv import soc_from_ocv
from chargeplan.profiles import ProfileSet

__all__ = ["Fleet", "flat_reading", "profile_for", "resolve_fleet"]

#: BU-702 "How to Store Batteries": lithium is stored at 40-50 % state of charge.
LITHIUM_STORAGE_BAND_PCT = (40.0, 50.0)


@dataclass
class Fleet:
    """The batteries as arrays, one entry each; ``profiles`` and ``rows`` in the same order."""

    rows: list[InventoryRow]
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


def _cells(row: InventoryRow, profile: Any) -> int | None:
    from chargeplan.engine.rules.derive import NOMINAL_TOLERANCE, cell_counts

    if row.cells_in_series is not None:
        return row.cells_in_series
    assert row.nominal_voltage_v is not None
    fits = cell_counts(row.nominal_voltage_v, profile.nominal_cell_voltage.value,
                       NOMINAL_TOLERANCE[profile.family])
    if len(fits) > 1 and profile.family == "lithium":
        # a trade name rounds down (12.8 V LiFePO4 is sold as '12 V', 25.6 V as '24 V')
        above = [n for n in fits if n * profile.nominal_cell_voltage.value >= row.nominal_voltage_v]
        fits = above[:1] or fits
    return fits[0] if len(fits) == 1 else None


def _resolve_row(row: InventoryRow, profile_set: ProfileSet, bay_names: list[str],
                 where: str) -> tuple[Any, int, int] | str:
    """The row's profile, cell count and bay, or the one-line error."""
    try:
        profile = profile_for(profile_set, row.chemistry)
    except InputError as error:
        return f"{where}: chemistry: {error.problem}; {error.fix}"
    count = _cells(row, profile)
    if count is None:
        return f"{where}: nominal_voltage: no single cell count fits; give cells_in_series"
    if row.bay not in bay_names:
        return f"{where}: bay: '{row.bay}' is not a bay of the site; use one of " + ", ".join(
            bay_names)
    return profile, count, bay_names.index(row.bay)


def _soc_at_intake(row: InventoryRow, profile: Any, cells: int) -> float:
    if row.state_of_charge_pct is not None:
        return row.state_of_charge_pct
    assert row.rest_voltage_v is not None
    soc = float(soc_from_ocv(row.rest_voltage_v / cells, profile.rest_voltage.table))
    return float("nan") if flat_reading(profile, soc) else soc


def _day(site_file: SiteFile, day: dt.date | None, default: int) -> int:
    return default if day is None else (day - site_file.site.start).days


def resolve_fleet(site_file: SiteFile, rows: list[InventoryRow], profile_set: ProfileSet,
                  inventory_file: str) -> Fleet:
    """Every row resolved, or every bad row reported at once (each naming its file)."""
    bay_names = [b.name for b in site_file.bays]
    resolved, errors = [], []
    seen: dict[tuple[Any, ...], Any] = {}  # rows alike but for their id resolve alike
    for row in rows:
        key = (row.chemistry, row.nominal_voltage_v, row.cells_in_series, row.bay)
        got = seen.get(key)
        if got is None:
            got = _resolve_row(row, profile_set, bay_names, "{where}")
            seen[key] = got
        if isinstance(got, str):
            got = got.format(where=f"{inventory_file}: battery {row.id}")
        if isinstance(got, str):
            errors.append(got)
        else:
            resolved.append(got)
    if errors:
        raise InputErrors(errors)
    return _arrays(site_file, rows, resolved)


def _arrays(site_file: SiteFile, rows: list[InventoryRow], resolved: list[Any]) -> Fleet:
    site, days = site_file.site, site_file.site.days
    profiles = [p for p, _c, _b in resolved]
    cells = np.array([c for _p, c, _b in resolved], dtype=int)
    lead = np.array([p.family == "lead_acid" for p in profiles], dtype=bool)
    cap = np.array([r.capacity_ah for r in rows], dtype=float)
    storage = np.array([100.0 if p.family == "lead_acid" else float(
        soc_from_ocv(p.charge.storage_voltage.value, p.rest_voltage.table)) for p in profiles])
    threshold = np.array([(site.lead_acid_top_up_pct if p.family == "lead_acid"
                           else site.lithium_top_up_pct) or p.storage.top_up_below.value
                          for p in profiles])
    low_c = np.array([max(p.temperature.charge_min.value, p.envelope.charge_temperature_min.value)
                      for p in profiles])
    high_c = np.array([min(p.temperature.charge_max.value, p.envelope.charge_temperature_max.value)
                       for p in profiles])
    return Fleet(
        rows=rows, profiles=profiles, chemistry=[p.id for p in profiles], lead=lead,
        lfp=np.array([p.rest_voltage.flat_band is not None for p in profiles], dtype=bool),
        cells=cells,
        capacity_ah=cap, bay=np.array([b for _p, _c, b in resolved], dtype=int),
        arrive=np.array([_day(site_file, r.arrive, 0) for r in rows], dtype=int),
        depart=np.array([_day(site_file, r.depart, days - 1) for r in rows], dtype=int),
        intake_soc=np.array([_soc_at_intake(r, p, c) for r, (p, c, _b) in
                             zip(rows, resolved, strict=True)]),
        storage_soc=storage, threshold=threshold,
        storage_voltage_v=np.array([p.charge.storage_voltage.value if p.charge.storage_voltage
                                    else np.nan for p in profiles]) * cells,
        draw_pct_day=np.array([r.parasitic_draw_a or 0.0 for r in rows]) * 24.0 / cap * 100.0,
        connected=np.array([r.load_connected for r in rows], dtype=bool),
        may_disconnect=np.array([r.loads != "connected" for r in rows], dtype=bool),
        charge_min_c=np.where(lead, low_c, np.maximum(low_c, 0.0)),  # never lithium below 0
        charge_max_c=high_c,
    )
