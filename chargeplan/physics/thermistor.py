"""NTC thermistors on a divider into an ADC: resistance, voltage and code by temperature.

The divider: the bias resistor from the reference to the ADC input, the thermistor from the
input to ground, so a warmer battery (lower resistance) reads a lower code.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike

__all__ = [
    "KELVIN",
    "adc_code",
    "resistance_beta",
    "resistance_steinhart_hart",
    "temperature_beta",
    "temperature_from_code",
    "temperature_steinhart_hart",
]

KELVIN = 273.15


def resistance_beta(temperature_c: ArrayLike, r25_ohm: float, beta_k: float) -> np.ndarray:
    """Thermistor resistance by the Beta equation, ``R = R25 exp(B (1/T - 1/T25))``.

    References
    ----------
    The Beta (B-parameter) equation, a two-point simplification of Steinhart-Hart, as in
    thermistor makers' application notes.

    Examples
    --------
    >>> round(float(resistance_beta(25.0, 10_000, 3950)))
    10000
    """
    t = np.asarray(temperature_c, dtype=float) + KELVIN
    return r25_ohm * np.exp(beta_k * (1.0 / t - 1.0 / (25.0 + KELVIN)))


def temperature_beta(resistance_ohm: ArrayLike, r25_ohm: float, beta_k: float) -> np.ndarray:
    """The Beta equation solved for temperature (°C)."""
    r = np.asarray(resistance_ohm, dtype=float)
    return 1.0 / (1.0 / (25.0 + KELVIN) + np.log(r / r25_ohm) / beta_k) - KELVIN


def temperature_steinhart_hart(resistance_ohm: ArrayLike, a: float, b: float,
                               c: float) -> np.ndarray:
    """``1/T = A + B ln R + C (ln R)^3`` (Steinhart and Hart, Deep-Sea Research 15, 1968)."""
    ln_r = np.log(np.asarray(resistance_ohm, dtype=float))
    return 1.0 / (a + b * ln_r + c * ln_r**3) - KELVIN


def resistance_steinhart_hart(temperature_c: ArrayLike, a: float, b: float,
                              c: float) -> np.ndarray:
    """Steinhart-Hart solved for resistance (the real root of the cubic in ln R; with
    ``c = 0`` the equation is linear in ln R).

    Coefficients that are not a thermistor's give non-finite values here (numpy's rules for
    division by zero); :mod:`chargeplan.firmware.thermistor` refuses them before use.
    """
    inv_t = 1.0 / (np.asarray(temperature_c, dtype=float) + KELVIN)
    if c == 0:
        return np.exp((inv_t - a) / b)
    x = (a - inv_t) / c
    y = np.sqrt((b / (3.0 * c)) ** 3 + (x / 2.0) ** 2)
    return np.exp(np.cbrt(y - x / 2.0) - np.cbrt(y + x / 2.0))


def adc_code(resistance_ohm: ArrayLike, bias_ohm: float, bits: int) -> np.ndarray:
    """The ideal ADC code (not rounded) of the divider's voltage, full scale ``2^bits - 1``."""
    r = np.asarray(resistance_ohm, dtype=float)
    return r / (r + bias_ohm) * (2**bits - 1)


def temperature_from_code(code: ArrayLike, bias_ohm: float, bits: int, r25_ohm: float,
                          beta_k: float) -> np.ndarray:
    """The temperature (°C) an ADC code stands for (Beta equation)."""
    frac = np.asarray(code, dtype=float) / (2**bits - 1)
    return temperature_beta(bias_ohm * frac / (1.0 - frac), r25_ohm, beta_k)
