"""The discharge side: how long a load takes to flatten a battery."""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike

__all__ = ["peukert_runtime_h"]


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
