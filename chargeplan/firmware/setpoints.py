"""Encode a charge program as the neutral setpoint document; rounding never moves a limit
toward danger.

Voltage and current limits, timers and durations round down; tail currents and
minimum temperatures round up; maximum temperatures round down. A document (version 4)
is a charge program: the plan made by
:func:`chargeplan.firmware.charge_program.program_plan`, whose pre-charge moves out of
the stage list into ``precharge`` (run at connection below its voltage), with the
restart, fault and hysteresis rules beside it.
"""

from __future__ import annotations

import hashlib
import json
import math
from typing import Any

from chargeplan.model import SETPOINT_FORMAT as FORMAT
from chargeplan.model import SETPOINT_VERSION as VERSION
from chargeplan.plan import ChargePlan, Exit, ExitKind, Interlocks, Stage, StageKind

__all__ = ["FORMAT", "VERSION", "canonical_bytes", "compute_digest", "encode", "to_json"]

_NOISE = 1e-6  # float noise allowed before rounding (a millionth of the unit)


def down(value: float, scale: float) -> int:
    """Round ``value x scale`` down to an integer (a limit: never above what was planned)."""
    return math.floor(value * scale + _NOISE)


def up(value: float, scale: float) -> int:
    """Round ``value x scale`` up to an integer."""
    return math.ceil(value * scale - _NOISE)


def _exit(e: Exit) -> dict[str, Any]:
    if e.kind == ExitKind.VOLTAGE_REACHED:
        return {"condition": e.kind.value, "voltage_mV": down(e.value, 1000), "then": e.then}
    if e.kind == ExitKind.CURRENT_BELOW:
        return {"condition": e.kind.value, "current_mA": up(e.value, 1000), "then": e.then}
    if e.kind == ExitKind.DURATION:
        return {"condition": e.kind.value, "duration_s": down(e.value, 1), "then": e.then}
    # the fault guards: a smaller threshold trips sooner, so each rounds down (toward safety)
    if e.kind == ExitKind.CHARGE_ABOVE:
        return {"condition": e.kind.value, "charge_mAh": down(e.value, 1000), "then": e.then}
    if e.kind == ExitKind.CURRENT_RISING:
        return {"condition": e.kind.value, "current_mA": down(e.value, 1000), "then": e.then}
    if e.kind == ExitKind.TEMPERATURE_RISE:
        return {"condition": e.kind.value, "temperature_rise_dK": down(e.value, 10),
                "then": e.then}
    raise ValueError(f"no encoding for the exit {e.kind.value}")


def _estimate(stage: Stage) -> dict[str, int | None]:
    e = stage.estimate
    if e is None:
        return {"estimated_duration_s": None, "charge_mAh": None, "energy_mWh": None}
    return {
        "estimated_duration_s": None if e.duration_s is None else round(e.duration_s),
        "charge_mAh": round(e.charge_ah * 1000),
        "energy_mWh": round(e.energy_wh * 1000),
    }


def _table(plan: ChargePlan) -> dict[str, Any] | None:
    if plan.temperature_table is None or plan.table_step_c is None:
        return None
    return {
        "step_dC": round(plan.table_step_c * 10),
        "rows": [
            {
                "temperature_dC": round(row.temperature_c * 10),
                "charge_voltage_mV": down(row.charge_voltage_v, 1000),
                "hold_voltage_mV": None if row.hold_voltage_v is None
                else down(row.hold_voltage_v, 1000),
                "current_max_mA": down(row.current_max_a, 1000),
            }
            for row in plan.temperature_table
        ],
    }


def canonical_bytes(document: dict[str, Any]) -> bytes:
    """The canonical form the digest covers: the document without ``digest``, keys
    sorted, no spaces, UTF-8."""
    body = {key: value for key, value in document.items() if key != "digest"}
    return json.dumps(body, sort_keys=True, separators=(",", ":"), ensure_ascii=False).encode()


def compute_digest(document: dict[str, Any]) -> str:
    return "sha256:" + hashlib.sha256(canonical_bytes(document)).hexdigest()


def _program(plan: ChargePlan) -> dict[str, Any]:
    """The program's own blocks: pre-charge, restart, faults and hysteresis."""
    from chargeplan.firmware.faults import FAULTS

    rules = plan.program
    faults: list[dict[str, Any]] = []
    for fault in FAULTS:
        entry: dict[str, Any] = {"code": fault.code, "name": fault.name, "action": fault.action}
        if fault.name == "no_battery":  # waits longer: rounds up
            entry["below_voltage_mV"] = up(rules.no_battery_below_v, 1000)
        elif fault.name == "wrong_cell_count":  # latches sooner: rounds down
            entry["above_voltage_mV"] = down(rules.cells_above_v, 1000)
        faults.append(entry)
    return {
        "precharge": {
            "below_voltage_mV": down(rules.precharge_below_v, 1000),
            "current_mA": down(rules.precharge_current_a, 1000),
            "timer_s": down(rules.precharge_timer_s, 1),
        },
        "restart": {
            "voltage_mV": down(rules.restart_v, 1000),
            "condition": rules.restart_condition,
            "filter_s": rules.restart_filter_s,
        },
        "faults": faults,
        "hysteresis": {
            "temperature_margin_dK": up(rules.temperature_margin_k, 10),
            "voltage_filter_s": rules.voltage_filter_s,
        },
    }


def encode_interlocks(lock: Interlocks) -> dict[str, Any]:
    """The interlocks in the document's integers, each rounded toward safety."""
    return {
        "charge_temperature_min_dC": up(lock.charge_temperature_min_c, 10),
        "charge_temperature_max_dC": down(lock.charge_temperature_max_c, 10),
        "cell_voltage_max_mV": down(lock.cell_voltage_max_v, 1000),
        "battery_voltage_max_mV": down(lock.battery_voltage_max_v, 1000),
        "current_max_mA": down(lock.current_max_a, 1000),
        "cool_zone": None
        if lock.cool_zone_below_c is None or lock.cool_zone_current_max_a is None
        else {
            "below_dC": up(lock.cool_zone_below_c, 10),
            "current_max_mA": down(lock.cool_zone_current_max_a, 1000),
        },
        "warm_zone": None
        if lock.warm_zone_above_c is None or lock.warm_zone_cell_voltage_max_v is None
        else {
            "above_dC": down(lock.warm_zone_above_c, 10),
            "cell_voltage_max_mV": down(lock.warm_zone_cell_voltage_max_v, 1000),
        },
    }


def encode(plan: ChargePlan) -> dict[str, Any]:
    """The setpoint document of the charge program ``plan`` as a JSON-ready dict (with its
    digest). ``plan`` comes from :func:`~chargeplan.firmware.charge_program.program_plan`;
    a plan for one battery's state is not a program and raises ValueError."""
    from chargeplan import __version__

    if plan.program is None:
        raise ValueError("the setpoint document is a charge program: make the plan with "
                         "chargeplan.firmware.charge_program.program_plan")
    b = plan.battery
    comp = plan.compensation
    document: dict[str, Any] = {
        "format": FORMAT,
        "version": VERSION,
        "generator": f"chargeplan {__version__}",
        "battery": {
            "name": b.name,
            "chemistry": b.chemistry,
            "profile": b.profile_id,
            "cells_in_series": b.cells_in_series,
            "capacity_mAh": down(b.capacity_ah, 1000),
            "nominal_voltage_mV": round(b.nominal_voltage_v * 1000),
        },
        "cells_in_series": b.cells_in_series,
        "planned_temperature_dC": round(b.temperature_c * 10),
        "stages": [
            {
                "kind": stage.kind.value,
                "voltage_mV": down(stage.voltage_v, 1000),
                "current_mA": down(stage.current_a, 1000),
                "timer_s": None if stage.timer_s is None else down(stage.timer_s, 1),
                "compensated": stage.compensated,
                "exits": [_exit(e) for e in stage.exits],
                **_estimate(stage),
            }
            for stage in plan.stages
            if stage.kind != StageKind.PRECHARGE
        ],
        "finish": plan.finish,
        "interlocks": encode_interlocks(plan.interlocks),
        "temperature_compensation": None
        if comp is None
        else {
            "coefficient_uV_per_K_per_cell": round(comp.coefficient_v_per_k_per_cell * 1e6),
            "reference_dC": round(comp.reference_c * 10),
            "range_min_dC": up(comp.range_min_c, 10),
            "range_max_dC": up(comp.range_max_c, 10),
        },
    }
    document["temperature_table"] = _table(plan)
    document.update(_program(plan))
    document["digest"] = compute_digest(document)
    return document


def to_json(plan: ChargePlan) -> str:
    """The setpoint document as indented JSON text, ending in a newline."""
    return json.dumps(encode(plan), indent=2, ensure_ascii=False) + "\n"
