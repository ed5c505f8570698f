"""The integer type of every setpoint field in the image and the C header, and the refusal of
a value that does not fit it (never a wrapped or overflowed number).

The sentinels are reserved: ``0xFFFFFFFF`` means "none" in the unsigned 32-bit fields
(timers, exits), ``-32768`` / ``32767`` an absent cool / warm zone boundary, so a real
value may not take them.
"""

from __future__ import annotations

from collections.abc import Iterator
from typing import Any

from chargeplan.errors import InputError

__all__ = ["FILE_FIX", "PLAN_FIX", "TYPES", "field_values", "require_fit"]

#: (C type, lowest, highest) of each integer type the image and header use.
TYPES: dict[str, tuple[str, int, int]] = {
    "u8": ("uint8_t", 0, 0xFF),
    "u16": ("uint16_t", 0, 0xFFFF),
    "i16": ("int16_t", -0x8000, 0x7FFF),
    "u32": ("uint32_t", 0, 0xFFFFFFFF),
    "i32": ("int32_t", -0x80000000, 0x7FFFFFFF),
    "u32-or-none": ("uint32_t", 0, 0xFFFFFFFE),  # 0xFFFFFFFF is "none"
    "cool-boundary": ("int16_t", -0x7FFF, 0x7FFF),  # -32768 is "no cool zone"
    "warm-boundary": ("int16_t", -0x8000, 0x7FFE),  # 32767 is "no warm zone"
}

_EXIT_KEYS = {"voltage_mV": "u32-or-none", "current_mA": "u32-or-none",
              "duration_s": "u32-or-none", "charge_mAh": "u32", "temperature_rise_dK": "u32"}


def _stage_fields(n: int, stage: dict[str, Any]) -> Iterator[tuple[str, Any, str]]:
    at = f"stages[{n}]"
    yield f"{at}.voltage_mV", stage.get("voltage_mV"), "u32"
    yield f"{at}.current_mA", stage.get("current_mA"), "u32"
    yield f"{at}.timer_s", stage.get("timer_s"), "u32-or-none"
    for m, e in enumerate(stage.get("exits") or []):
        for key, kind in _EXIT_KEYS.items():
            if key in e:
                yield f"{at}.exits[{m}].{key}", e[key], kind
    for key in ("estimated_duration_s", "charge_mAh", "energy_mWh"):
        yield f"{at}.{key}", stage.get(key), "u32"


def field_values(doc: dict[str, Any]) -> Iterator[tuple[str, Any, str]]:
    """Every integer field of a setpoint document: (path, value, type name). ``None`` values
    are the optional fields left out."""
    lock = doc.get("interlocks") or {}
    cool, warm = lock.get("cool_zone") or {}, lock.get("warm_zone") or {}
    comp = doc.get("temperature_compensation") or {}
    yield "cells_in_series", doc.get("cells_in_series"), "u16"
    yield "battery.cells_in_series", (doc.get("battery") or {}).get("cells_in_series"), "u16"
    yield "battery.capacity_mAh", (doc.get("battery") or {}).get("capacity_mAh"), "u32"
    yield "battery.nominal_voltage_mV", (doc.get("battery") or {}).get("nominal_voltage_mV"), "u32"
    yield "planned_temperature_dC", doc.get("planned_temperature_dC"), "i16"
    yield "stages (count)", len(doc.get("stages") or []), "u8"
    for n, stage in enumerate(doc.get("stages") or []):
        yield from _stage_fields(n, stage)
    for key, kind in (("charge_temperature_min_dC", "i16"), ("charge_temperature_max_dC", "i16"),
                      ("cell_voltage_max_mV", "u16"), ("battery_voltage_max_mV", "u32"),
                      ("current_max_mA", "u32")):
        yield f"interlocks.{key}", lock.get(key), kind
    yield "interlocks.cool_zone.below_dC", cool.get("below_dC"), "cool-boundary"
    yield "interlocks.cool_zone.current_max_mA", cool.get("current_max_mA"), "u32"
    yield "interlocks.warm_zone.above_dC", warm.get("above_dC"), "warm-boundary"
    yield "interlocks.warm_zone.cell_voltage_max_mV", warm.get("cell_voltage_max_mV"), "u16"
    yield ("temperature_compensation.coefficient_uV_per_K_per_cell",
           comp.get("coefficient_uV_per_K_per_cell"), "i32")
    for key in ("reference_dC", "range_min_dC", "range_max_dC"):
        yield f"temperature_compensation.{key}", comp.get(key), "i16"
    table = doc.get("temperature_table") or {}
    yield "temperature_table.step_dC", table.get("step_dC"), "i16"
    yield "temperature_table.rows (count)", len(table.get("rows") or []), "u8"
    for n, row in enumerate(table.get("rows") or []):
        yield f"temperature_table.rows[{n}].temperature_dC", row.get("temperature_dC"), "i16"
        for key in ("charge_voltage_mV", "hold_voltage_mV", "current_max_mA"):
            yield f"temperature_table.rows[{n}].{key}", row.get(key), "u32"


#: The fix when a plan's own value does not fit (the image and header writers).
PLAN_FIX = ("this plan does not fit firmware's fields: check the battery's capacity and the "
            "channel's current (a tiny current on a huge battery gives a timer of years)")
#: The fix when a setpoint file read back holds such a value.
FILE_FIX = "check the value; a plan this large is not one firmware can run"


def require_fit(doc: dict[str, Any], *, file: str | None = None, fix: str = FILE_FIX) -> None:
    """Refuse (exit 2, naming the field) a value that its image and header type cannot hold."""
    for path, value, kind in field_values(doc):
        if value is None or isinstance(value, bool) or not isinstance(value, int):
            continue
        c_type, low, high = TYPES[kind]
        if not low <= value <= high:
            shown = (str(value) if abs(value) < 10**24
                     else f"a number of about 10^{int(value.bit_length() * 0.30103)}")
            raise InputError(
                f"{shown} does not fit the image and header field ({c_type}, {low} to {high})",
                file=file, field=path, fix=fix,
            )
