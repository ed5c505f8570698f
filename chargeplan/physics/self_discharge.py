"""Self-discharge of a stored battery, with its temperature dependence."""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike

__all__ = ["self_discharge_rate"]


def self_discharge_rate(
    rate_at_reference: ArrayLike,
    temperature_c: ArrayLike,
    reference_c: ArrayLike,
    doubling_k: ArrayLike,
) -> np.ndarray:
    """The self-discharge rate at a temperature: the reference rate, doubled per
    ``doubling_k`` of warming (and halved per ``doubling_k`` of cooling).

    References
    ----------
    BU-802b, "What does elevated self-discharge do?": the rate about doubles per 10 °C.

    Examples
    --------
    4 %/month at 20 °C is 8 %/month at 30 °C and 2 %/month at 10 °C:

    >>> [float(self_discharge_rate(4.0, t, 20.0, 10.0)) for t in (30.0, 10.0)]
    [8.0, 2.0]
    """
    t = np.asarray(temperature_c, dtype=float)
    return np.asarray(rate_at_reference, dtype=float) * np.exp2(
        (t - np.asarray(reference_c, dtype=float)) / np.asarray(doubling_k, dtype=float))
