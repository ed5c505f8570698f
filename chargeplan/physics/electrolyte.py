"""Lead-acid electrolyte: specific gravity, its temperature correction, freezing point.

One pure function per published table or method; scalars and numpy arrays alike.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike

__all__ = [
    "BCI_SOC_PCT",
    "BCI_SPECIFIC_GRAVITY",
    "TM_FREEZE_GRAVITY",
    "TM_FREEZE_POINT_F",
    "freezing_point_tm5_1185",
    "specific_gravity_bci",
    "specific_gravity_corrected",
    "state_of_charge_from_gravity_bci",
]

#: Battery Council International table, as reproduced in handbooks: state of charge
#: against specific gravity of a rested lead-acid cell.
BCI_SOC_PCT = np.array([0.0, 25.0, 50.0, 75.0, 100.0])
BCI_SPECIFIC_GRAVITY = np.array([1.120, 1.155, 1.190, 1.225, 1.265])

#: US Army TM 5-1185, Table III (same in OD1002): freezing point of the
#: electrolyte against its specific gravity.
TM_FREEZE_GRAVITY = np.array([1.000, 1.100, 1.150, 1.200, 1.250, 1.280])
TM_FREEZE_POINT_F = np.array([32.0, 19.0, 5.0, -16.0, -62.0, -90.0])


def specific_gravity_bci(state_of_charge_pct: ArrayLike) -> np.ndarray:
    """Specific gravity of a rested lead-acid cell at a state of charge.

    Linear between the rows of the Battery Council International table; held
    flat outside 0–100 %.

    References
    ----------
    Battery Council International state-of-charge table, as reproduced in handbooks.

    Examples
    --------
    >>> float(specific_gravity_bci(50))
    1.19
    """
    return np.interp(state_of_charge_pct, BCI_SOC_PCT, BCI_SPECIFIC_GRAVITY)


def state_of_charge_from_gravity_bci(specific_gravity: ArrayLike) -> np.ndarray:
    """State of charge (%) from a corrected specific gravity; the inverse of the table.

    Examples
    --------
    >>> float(state_of_charge_from_gravity_bci(1.225))
    75.0
    """
    return np.interp(specific_gravity, BCI_SPECIFIC_GRAVITY, BCI_SOC_PCT)


def specific_gravity_corrected(reading: ArrayLike, electrolyte_temperature_c: ArrayLike):
    """A hydrometer reading corrected to 80 °F (26.7 °C).

    Add 0.004 for every 10 °F above 80 °F, subtract below (0.0004 per °F,
    0.00072 per °C).

    References
    ----------
    US Army TM 5-4210-230-14&P-1, hydrometer temperature correction.

    Examples
    --------
    A reading of 1.250 at 50 °F (10 °C) is 1.238 at the reference:

    >>> round(float(specific_gravity_corrected(1.250, 10.0)), 3)
    1.238
    """
    temperature_f = np.asarray(electrolyte_temperature_c, dtype=float) * 1.8 + 32.0
    return np.asarray(reading, dtype=float) + 0.0004 * (temperature_f - 80.0)


def freezing_point_tm5_1185(specific_gravity: ArrayLike) -> np.ndarray:
    """Freezing point (°C) of lead-acid electrolyte at a specific gravity.

    Linear between the rows of the table (in °F), held flat outside it; more
    conservative than other published tables, hence chosen for winter checks.

    References
    ----------
    US Army TM 5-1185, Table III: 1.280 → −90 °F, 1.250 → −62 °F, 1.200 → −16 °F,
    1.150 → +5 °F, 1.100 → +19 °F, 1.000 → +32 °F.

    Examples
    --------
    >>> round(float(freezing_point_tm5_1185(1.150)), 1)
    -15.0
    """
    freeze_f = np.interp(specific_gravity, TM_FREEZE_GRAVITY, TM_FREEZE_POINT_F)
    return (freeze_f - 32.0) / 1.8
