"""Battery-room ventilation by IEC 62485-2 (formerly EN 50272-2), clause 7."""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike

__all__ = [
    "DILUTION",
    "GAS_CURRENT_MA_PER_AH",
    "GAS_EMISSION_FACTOR",
    "GAS_SAFETY_FACTOR",
    "HYDROGEN_M3_PER_AH",
    "OPENING_CM2_PER_M3H",
    "SAFETY_FACTOR",
    "gas_current_at_voltage",
    "gas_current_from_charge",
    "opening_area_iec62485",
    "ventilation_airflow_iec62485",
]

#: IEC 62485-2 cl. 7: dilution factor v (air per hydrogen for the 4 % lower explosive limit,
#: with margin), hydrogen per ampere-hour q, safety factor s; v q s = 0.05 (rounded).
DILUTION = 24.0
HYDROGEN_M3_PER_AH = 0.42e-3
SAFETY_FACTOR = 5.0
#: IEC 62485-2 cl. 7: free inlet and outlet area A = 28 Q (cm², Q in m³/h).
OPENING_CM2_PER_M3H = 28.0
#: IEC 62485-2 (Table 1 via cl. 7): gas current Igas in mA per Ah of a full battery.
GAS_CURRENT_MA_PER_AH = {("vented", "float"): 5.0, ("vented", "boost"): 20.0,
                         ("vrla", "float"): 1.0, ("vrla", "boost"): 8.0}


def ventilation_airflow_iec62485(
    cells: ArrayLike, capacity_ah: ArrayLike, gas_current_ma_per_ah: ArrayLike
) -> np.ndarray:
    """Airflow (m³/h) that keeps hydrogen below its limit: ``Q = 0.05 n Igas Crt 10^-3``.

    ``n`` cells, ``Igas`` in mA/Ah, ``Crt`` the rated capacity (C10 for lead-acid).

    References
    ----------
    IEC 62485-2 (formerly EN 50272-2), cl. 7: Q = v q s n Igas Crt 10^-3 with v = 24,
    q = 0.42 x 10^-3 m³/Ah, s = 5, so Q = 0.05 n Igas Crt 10^-3.

    Examples
    --------
    Six vented cells of 100 Ah on boost (Igas 20 mA/Ah):

    >>> round(float(ventilation_airflow_iec62485(6, 100, 20)), 3)
    0.6
    """
    return (0.05 * np.asarray(cells, dtype=float) * np.asarray(gas_current_ma_per_ah, float)
            * np.asarray(capacity_ah, dtype=float) * 1e-3)


def opening_area_iec62485(airflow_m3_per_h: ArrayLike) -> np.ndarray:
    """Free area (cm²) of each of the inlet and the outlet for natural ventilation,
    ``A = 28 Q`` (IEC 62485-2 cl. 7)."""
    return OPENING_CM2_PER_M3H * np.asarray(airflow_m3_per_h, dtype=float)


#: IEC 62485-2 Table 1 (from memory): Igas = I(float or boost) x fg x fs, with the gas
#: emission factor fg (vented 1; VRLA 0.2, most of the gas recombines) and the safety factor
#: fs = 5 for the ageing of the battery.
GAS_EMISSION_FACTOR = {"vented": 1.0, "vrla": 0.2}
GAS_SAFETY_FACTOR = 5.0


def gas_current_at_voltage(cell_voltage_v: ArrayLike, float_voltage_v: float,
                           float_gas_ma_per_ah: float, boost_voltage_v: float,
                           boost_gas_ma_per_ah: float) -> np.ndarray:
    """Igas (mA/Ah) at a charge voltage per cell, log-linear through the standard's float and
    boost points, extrapolated beyond them (never below the float figure).

    IEC 62485-2 gives Igas at two voltages only: float (vented 2.23, VRLA 2.27 V/cell) and
    boost, which is defined at 2.40 V/cell (Table 1). The gas current of a full battery rises
    about exponentially with voltage (Tafel behaviour of the side reaction; the two points
    give a doubling every 0.085 V/cell for vented cells, near the 0.1 V/cell recalled for
    lead-acid, from memory), so a stage above 2.40 V/cell gasses more than the boost figure.

    >>> round(float(gas_current_at_voltage(2.40, 2.23, 5, 2.40, 20)), 6)
    20.0
    >>> round(float(gas_current_at_voltage(2.50, 2.23, 5, 2.40, 20)), 1)
    45.2
    """
    slope = np.log(boost_gas_ma_per_ah / float_gas_ma_per_ah) / (boost_voltage_v
                                                                 - float_voltage_v)
    v = np.asarray(cell_voltage_v, dtype=float)
    return np.maximum(boost_gas_ma_per_ah * np.exp(slope * (v - boost_voltage_v)),
                      float_gas_ma_per_ah)


def gas_current_from_charge(current_a: ArrayLike, capacity_ah: ArrayLike,
                            battery_type: str) -> np.ndarray:
    """Igas (mA/Ah) when nearly all the charge current goes to gas (a full battery on an
    equalization or desulfation stage): the current per Ah times fg and fs, as IEC 62485-2
    builds its Table 1 values from the float and boost currents.

    >>> round(float(gas_current_from_charge(5.0, 100, "vented")), 6)  # C/20, vented
    250.0
    """
    return (1000.0 * np.asarray(current_a, float) / np.asarray(capacity_ah, float)
            * GAS_EMISSION_FACTOR[battery_type] * GAS_SAFETY_FACTOR)
