"""Number formatting for the trace and findings: fixed places, trailing zeros dropped."""

from __future__ import annotations

__all__ = ["amps", "cell_volts", "celsius", "duration", "num", "volts"]


def num(value: float, places: int = 2) -> str:
    text = f"{value:.{places}f}"
    if "." in text:
        text = text.rstrip("0").rstrip(".")
    return "0" if text in ("-0", "") else text


def volts(value: float) -> str:
    return f"{num(value, 2)} V"


def cell_volts(value: float) -> str:
    return f"{num(value, 3)} V/cell"


def amps(value: float) -> str:
    return f"{num(value, 3 if abs(value) < 1 else 2)} A"


def celsius(value: float) -> str:
    return f"{num(value, 1)} °C"


def duration(seconds: float) -> str:
    """'2 h 10 min', '45 min', '3 d 4 h'."""
    minutes = round(seconds / 60)
    days, rest = divmod(minutes, 24 * 60)
    hours, mins = divmod(rest, 60)
    if days:
        return f"{days} d {hours} h" if hours else f"{days} d"
    if hours:
        return f"{hours} h {mins} min" if mins else f"{hours} h"
    return f"{mins} min"
