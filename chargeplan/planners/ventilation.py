"""The ventilation a charging room needs (IEC 62485-2 cl. 7), and whether a room has it."""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING

from chargeplan.errors import InputError
from chargeplan.physics.ventilation import (
    DILUTION,
    GAS_CURRENT_MA_PER_AH,
    HYDROGEN_M3_PER_AH,
    SAFETY_FACTOR,
    gas_current_at_voltage,
    gas_current_from_charge,
    opening_area_iec62485,
    ventilation_airflow_iec62485,
)

if TYPE_CHECKING:
    from chargeplan.model.profile import Profile
    from chargeplan.plan import ChargePlan

__all__ = ["Requirement", "available_airflow", "charge_airflow", "requirement",
           "stage_gas_current"]


@dataclass(frozen=True)
class Requirement:
    cells: int
    capacity_ah: float
    battery_type: str
    mode: str
    batteries: int
    gas_current_ma_per_ah: float
    airflow_m3_per_h: float
    opening_area_cm2: float

    def explain(self) -> str:
        return (f"Q = v q s n Igas Crt 10^-3 = {DILUTION:g} x {HYDROGEN_M3_PER_AH:g} m3/Ah x "
                f"{SAFETY_FACTOR:g} (= 0.05) x {self.cells * self.batteries} cells x "
                f"{self.gas_current_ma_per_ah:g} mA/Ah ({self.battery_type}, {self.mode}) x "
                f"{self.capacity_ah:g} Ah x 10^-3 = {self.airflow_m3_per_h:.4g} m3/h; "
                f"free opening A = 28 Q = {self.opening_area_cm2:.4g} cm2 inlet and outlet "
                "(IEC 62485-2 cl. 7)")


def requirement(cells: int, capacity_ah: float, battery_type: str, mode: str,
                batteries: int = 1) -> Requirement:
    """The airflow and opening area for ``batteries`` batteries of ``cells`` cells."""
    key = (battery_type, mode)
    if key not in GAS_CURRENT_MA_PER_AH:
        raise InputError(f"no gas current for {battery_type} on {mode}", field="--type",
                         fix="use --type vented or vrla and --mode float or boost")
    if not (1 <= cells <= 1000 and 1 <= batteries <= 100_000 and 0 < capacity_ah <= 1e6):
        raise InputError("cells, capacity and batteries must be positive", field="--cells",
                         fix="e.g. --cells 6 --capacity 100Ah --batteries 2")
    igas = GAS_CURRENT_MA_PER_AH[key]
    q = float(ventilation_airflow_iec62485(cells * batteries, capacity_ah, igas))
    return Requirement(cells, capacity_ah, battery_type, mode, batteries, igas, q,
                       float(opening_area_iec62485(q)))


def available_airflow(airflow_m3_per_h: float | None, opening_area_cm2: float | None) -> float:
    """The airflow a room gives: its mechanical airflow or what its openings allow by
    natural ventilation (Q = A / 28, IEC 62485-2 cl. 7), whichever is larger. The standard
    gives them as alternatives, so they are not added together."""
    if (airflow_m3_per_h or 0.0) < 0 or (opening_area_cm2 or 0.0) < 0:
        raise InputError("a room's airflow and openings cannot be negative",
                         field="--room-airflow", fix="give the room's ventilation, e.g. 50m3/h")
    return max(airflow_m3_per_h or 0.0, (opening_area_cm2 or 0.0) / 28.0)


def stage_gas_current(kind: str, cell_voltage_v: float, current_a: float, capacity_ah: float,
                      profile: Profile) -> float:
    """Igas (mA/Ah) of one lead-acid stage for IEC 62485-2 cl. 7.

    - Equalization and desulfation run a full battery at a limited current, and on a full
      battery nearly all the current is gas: Igas from the stage's current limit, times the
      standard's fg and fs (:func:`gas_current_from_charge`).
    - Every other stage: Igas at the stage's voltage through the profile's float and boost
      points (IEC 62485-2 Table 1, boost at 2.40 V/cell; :func:`gas_current_at_voltage`),
      never more than all of its current would give.
    """
    battery_type = "vented" if profile.vented else "vrla"
    all_gas = float(gas_current_from_charge(current_a, capacity_ah, battery_type))
    if kind in ("equalization", "desulfation"):
        return all_gas
    gas = profile.physics.gassing
    if gas is None:
        return all_gas
    at_voltage = float(gas_current_at_voltage(
        cell_voltage_v, gas.float_voltage.value, gas.float_current.value,
        gas.boost_voltage.value, gas.boost_current.value))
    return min(at_voltage, all_gas)


def charge_airflow(plan: ChargePlan, profile: Profile, *, channel_may_equalize: bool,
                   channel_max_current_a: float) -> tuple[float, float, str]:
    """The airflow (m3/h) one lead-acid charge needs at its most gassing stage, that Igas
    (mA/Ah), and the stage's name. A channel that cannot switch equalization off counts as
    able to equalize (at the profile's equalization voltage and current, within the
    channel's current): common practice, the worst the channel may do."""
    b = plan.battery
    stages = [(s.kind.value, s.voltage_v / b.cells_in_series, s.current_a) for s in plan.stages]
    eq = profile.equalization
    if channel_may_equalize and eq.allowed and eq.current is not None and eq.voltage is not None:
        stages.append(("equalization", eq.voltage.value,
                       min(eq.current.value * b.capacity_ah, channel_max_current_a)))
    best = max(((stage_gas_current(kind, v, i, b.capacity_ah, profile), kind)
                for kind, v, i in stages), default=(0.0, "none"))
    q = float(ventilation_airflow_iec62485(b.cells_in_series, b.capacity_ah, best[0]))
    return q, best[0], best[1]
