"""Open-circuit voltage and state of charge, from a profile's rested-voltage table."""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike

__all__ = ["ocv_from_soc", "soc_from_ocv"]


def soc_from_ocv(
    cell_voltage_v: ArrayLike, table: list[tuple[float, float]] | np.ndarray
) -> np.ndarray:
    """State of charge (%) of a rested cell from its open-circuit voltage.

    Linear interpolation in the table of ``(state of charge %, V/cell)`` rows;
    held at 0 and 100 % outside it.

    Examples
    --------
    With the Battery Council International table (12.24 V on 6 cells is 50 %):

    >>> bci = [(0, 1.982), (25, 2.010), (50, 2.040), (75, 2.075), (100, 2.108)]
    >>> float(soc_from_ocv(12.24 / 6, bci))
    50.0
    """
    rows = np.asarray(table, dtype=float)
    return np.interp(cell_voltage_v, rows[:, 1], rows[:, 0])


def ocv_from_soc(
    state_of_charge_pct: ArrayLike, table: list[tuple[float, float]] | np.ndarray
) -> np.ndarray:
    """Open-circuit V/cell at a state of charge (%); the inverse of :func:`soc_from_ocv`."""
    rows = np.asarray(table, dtype=float)
    return np.interp(state_of_charge_pct, rows[:, 0], rows[:, 1])
