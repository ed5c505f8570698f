"""Battery-room ventilation by IEC 62485-2 (formerly EN 50272-2), clause 7."""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike

__all__ = [
    "DILUTION",
    "GAS_CURRENT_MA_PER_AH",
    "HYDROGEN_M3_PER_AH",
    "OPENING_CM2_PER_M3H",
    "SAFETY_FACTOR",
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
