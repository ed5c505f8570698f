"""The warm room's ventilation while it charges lead-acid (IEC 62485-2 cl. 7), day by day.

Every lead-acid charge the plan puts in the warm room on one day is taken as running at
once (the worst case: staff start them together), each at the boost gas current of its
type (vented 20, VRLA 8 mA/Ah; IEC 62485-2 Table 1), as the bench planner does.
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass

import numpy as np

from chargeplan.physics.ventilation import (
    GAS_CURRENT_MA_PER_AH,
    opening_area_iec62485,
    ventilation_airflow_iec62485,
)
from chargeplan.planners.storage_kernel import CHARGES, Visits

__all__ = ["RoomDay", "warm_room_ventilation"]


@dataclass(frozen=True)
class RoomDay:
    date: dt.date
    batteries: int  # lead-acid charging there that day
    airflow_m3_per_h: float  # needed (IEC 62485-2 cl. 7)
    opening_area_cm2: float  # needed, inlet and outlet each
    available_m3_per_h: float | None  # what the room gives, if its ventilation is known

    @property
    def ok(self) -> bool | None:
        if self.available_m3_per_h is None:
            return None
        return self.available_m3_per_h >= self.airflow_m3_per_h


def warm_room_ventilation(visits: Visits, warm: int, lead: np.ndarray, vented: np.ndarray,
                          cells: np.ndarray, capacity_ah: np.ndarray, dates: list[dt.date],
                          available_m3_per_h: float | None,
                          lead_charging: np.ndarray | None = None) -> list[RoomDay]:
    """One entry per day on which lead-acid charges in the room ``warm`` (a bay; the warm
    room or another with mains). ``lead_charging``: the visits that charge lead-acid, where
    made already (one mask for every room)."""
    if warm < 0:
        return []
    if lead_charging is None:
        lead_charging = np.isin(visits.act, CHARGES) & lead[visits.battery]
    charging = lead_charging & (visits.where == warm)
    chosen = np.flatnonzero(charging)
    if not chosen.size:
        return []
    b = visits.battery[chosen]
    igas = np.where(vented[b], GAS_CURRENT_MA_PER_AH[("vented", "boost")],
                    GAS_CURRENT_MA_PER_AH[("vrla", "boost")])
    q = ventilation_airflow_iec62485(cells[b], capacity_ah[b], igas)
    days = visits.day[chosen]
    out = []
    for d in np.unique(days):
        total = float(q[days == d].sum())
        out.append(RoomDay(dates[int(d)], int((days == d).sum()), total,
                           float(opening_area_iec62485(total)), available_m3_per_h))
    return out
