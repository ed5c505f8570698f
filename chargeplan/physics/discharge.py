"""The discharge side: how long a load takes to flatten a battery."""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike

__all__ = ["LOW_RATE_CAPACITY_FACTOR", "peukert_runtime_h", "runtime_capped_h"]

#: The most a battery gives at currents below its rating, as a multiple of its rated
#: capacity. Lead-acid: C100 is about 1.1-1.25 x C20 (general lead-acid references, from
#: memory); the low end, so a runtime is never overstated. Lithium: about its rated capacity
#: at any low rate (from memory).
LOW_RATE_CAPACITY_FACTOR = {"lead_acid": 1.1, "lithium": 1.0}


def peukert_runtime_h(
    capacity_ah: ArrayLike, current_a: ArrayLike, rated_h: ArrayLike, exponent: ArrayLike
) -> np.ndarray:
    """Hours a full battery lasts at a constant current, by Peukert's law.

    ``t = H * (C / (I * H)) ** k``: ``C`` the capacity at the rated discharge time ``H``
    (20 h for C20), ``I`` the current, ``k`` the Peukert exponent (1 for an ideal
    battery; lead-acid 1.05–1.6).

    References
    ----------
    W. Peukert (1897); the form with the rated time as in general references.

    Examples
    --------
    A 100 Ah (20 h) battery with k = 1.2 at 10 A:

    >>> round(float(peukert_runtime_h(100, 10, 20, 1.2)), 3)
    8.706
    """
    c = np.asarray(capacity_ah, dtype=float)
    i = np.asarray(current_a, dtype=float)
    h = np.asarray(rated_h, dtype=float)
    return h * (c / (i * h)) ** np.asarray(exponent, dtype=float)


def runtime_capped_h(
    capacity_ah: ArrayLike, current_a: ArrayLike, rated_h: ArrayLike, exponent: ArrayLike,
    low_rate_factor: ArrayLike,
) -> np.ndarray:
    """Peukert's runtime, never longer than the low-rate capacity lasts at that current.

    Extrapolated below the rated current, Peukert's law overstates the charge a battery
    gives; the charge delivered is capped at ``low_rate_factor x capacity``
    (:data:`LOW_RATE_CAPACITY_FACTOR`).

    Examples
    --------
    A 100 Ah (C20) lead-acid battery, k = 1.25, at 1 A: Peukert gives 149.5 h (150 % of its
    rating); the cap at 1.1 x C20 gives 110 h.

    >>> round(float(runtime_capped_h(100, 1, 20, 1.25, 1.1)), 1)
    110.0
    """
    peukert = peukert_runtime_h(capacity_ah, current_a, rated_h, exponent)
    cap = np.asarray(low_rate_factor, dtype=float) * np.asarray(capacity_ah, dtype=float)
    return np.minimum(peukert, cap / np.asarray(current_a, dtype=float))
