"""Property tests: any valid battery file gives a safe plan, a refusal or an input error.

Random valid battery files (the dict a YAML battery file gives) are planned and
every plan is checked by arithmetic written here, against published limits written
below from the sources, each named (``profiles/*.yaml`` is read only to draw inputs
and is itself checked against those limits). That check shares no code with ``chargeplan.safety`` or
``chargeplan.profiles``; the library's own ``safety.verify`` must agree with it.
The setpoint document of each plan is checked for safe rounding, against the
committed JSON Schema, and for a digest that notices any edited integer.
"""

from __future__ import annotations

import copy
import json
import math
import re
from pathlib import Path
from typing import Any

import jsonschema
from hypothesis import assume, event, given, note, settings
from hypothesis import strategies as st
from ruamel.yaml import YAML

from chargeplan import safety
from chargeplan.engine.planner import plan_charge
from chargeplan.errors import InputError, PlanRefused
from chargeplan.firmware.setpoints import compute_digest, encode
from chargeplan.model.battery import BatteryFile
from chargeplan.plan import ChargePlan, ExitKind
from chargeplan.profiles import hard_envelope

REPO = Path(__file__).resolve().parent.parent
CHEMISTRIES = ("flooded", "agm", "gel", "lifepo4", "nmc")
LEAD_ACID = ("flooded", "agm", "gel")
LITHIUM = ("lifepo4", "nmc")

# Float noise allowed in a comparison of two floats: a nanovolt, a nanoampere, a
# nano-kelvin (from memory: IEEE 754 doubles carry about 16 significant digits, so
# 3.65 x 4 and 14.6 may differ in the last one; no meter resolves a nanovolt).
FLOAT_NOISE = 1e-9
# Float noise allowed when a float is scaled to the document's integer unit: a
# millionth of a mV, mA or 0.1 degC (from memory, as above: the product of a float
# and 1000 may land a last-digit step either side of a whole number).
SCALED_NOISE = 1e-6

# --- published limits, each with its source ------------------------------------
# Cell handling guidelines (common practice): LiFePO4 absolute maximum 3.65 V/cell.
LFP_MAX_CELL_V = 3.65
# Battery University BU-808 "How to Prolong Lithium-based Batteries": NMC/LCO
# constant-voltage limit 4.20 V/cell.
NMC_MAX_CELL_V = 4.20
# Lead-acid per cell: the highest equalization voltage across sources, 2.67 V/cell (Battery
# University, equalizing charge: 2.45-2.67); from memory: VRLA maker limits with cold
# compensation reach about 2.50-2.55 V/cell (AGM), gel stays below about 2.50 V/cell.
FLOODED_MAX_CELL_V, AGM_MAX_CELL_V, GEL_MAX_CELL_V = 2.67, 2.55, 2.50
PUBLISHED_MAX_CELL_V = {"flooded": FLOODED_MAX_CELL_V, "agm": AGM_MAX_CELL_V,
                        "gel": GEL_MAX_CELL_V, "lifepo4": LFP_MAX_CELL_V, "nmc": NMC_MAX_CELL_V}
# Charge current ceilings in It: BU-403 Charging Lead Acid 0.10-0.30 C (flooded); from memory:
# AGM makers allow 0.3-0.5 C, gel about 0.3 C; cell handling guidelines (common practice): LFP
# at most 1 C; BU-409 Charging Lithium-ion: 0.5-1 C (NMC).
PUBLISHED_MAX_IT = {"flooded": 0.30, "agm": 0.50, "gel": 0.30, "lifepo4": 1.0, "nmc": 1.0}
# Battery University BU-410 "Charging at High and Low Temperatures", Table 1:
# lithium-ion is charged only from 0 to 45 degC and never below 0 degC.
LITHIUM_WINDOW_C = (0.0, 45.0)
# BU-410 Table 1: lead-acid is charged from -20 to 50 degC.
LEAD_ACID_WINDOW_C = (-20.0, 50.0)
PUBLISHED_WINDOW_C = {
    "flooded": LEAD_ACID_WINDOW_C,
    "agm": LEAD_ACID_WINDOW_C,
    "gel": LEAD_ACID_WINDOW_C,
    "lifepo4": LITHIUM_WINDOW_C,
    "nmc": LITHIUM_WINDOW_C,
}
# BU-410 Table 1: lead-acid at most 0.3 C below freezing (0 degC).
LEAD_ACID_BELOW_FREEZING_IT = 0.3
# Cell handling guidelines (common practice): LiFePO4 at most 0.2 C below 10 degC.
LFP_COOL_BELOW_C, LFP_COOL_IT = 10.0, 0.2
# JEITA guideline (2007) as summarised in charger-IC datasheets: lithium-ion current
# cut to 20-50 % in the cool zone 0-10 degC; BU-409 "Charging Lithium-ion": the
# standard charge is at most 1 C, so the cool zone allows at most 0.5 It.
NMC_COOL_BELOW_C, NMC_COOL_IT = 10.0, 0.5
# JEITA guideline (2007): warm-zone voltage cut to about 4.10-4.15 V/cell, so at
# most 4.15 V/cell when the profile declares a warm zone.
NMC_WARM_CELL_V = 4.15
# Stages each chemistry must never get:
# - lithium: no equalization or desulfation (common practice: these lead-acid
#   stages damage lithium cells), no float or trickle for Li-ion (BU-702 "How to
#   Store Batteries"; BU-808a);
# - gel: never equalized or desulfated; AGM neither unless its maker allows it (common
#   practice; the strategy below never draws the maker's permission).
FORBIDDEN = {
    "lifepo4": {"equalization", "desulfation"},
    "nmc": {"equalization", "desulfation", "float"},
    "gel": {"equalization", "desulfation"},
    "agm": {"equalization", "desulfation"},
    "flooded": set(),
}
# Battery Council International table, as reproduced in handbooks: specific gravity
# of a rested lead-acid cell at 0, 25, 50, 75 and 100 % state of charge.
BCI_SOC_PCT = (0.0, 25.0, 50.0, 75.0, 100.0)
BCI_GRAVITY = (1.120, 1.155, 1.190, 1.225, 1.265)
# US Army TM 5-1185, Table III: electrolyte freezing point (degF) by specific gravity.
TM_GRAVITY = (1.000, 1.100, 1.150, 1.200, 1.250, 1.280)
TM_FREEZE_F = (32.0, 19.0, 5.0, -16.0, -62.0, -90.0)


# --- the profile files, read directly --------------------------------------------
_NUMBER = re.compile(r"^\s*([-+]?\d+(?:\.\d*)?(?:[eE][-+]?\d+)?)\s*(.*?)\s*$")


def _value(node: Any, unit: str) -> float:
    """The number of a profile ``{value, source}`` pair written in ``unit``."""
    match = _NUMBER.match(str(node["value"]))
    assert match, f"cannot read {node!r}"
    assert match.group(2) == unit, f"{node!r} is not in {unit}"
    return float(match.group(1))


def _read_profiles() -> dict[str, dict[str, Any]]:
    yaml = YAML(typ="safe")
    out: dict[str, dict[str, Any]] = {}
    for chem in CHEMISTRIES:
        raw = yaml.load((REPO / "profiles" / f"{chem}.yaml").read_text(encoding="utf-8"))
        env, charge, temp = raw["envelope"], raw["charge"], raw["temperature"]
        rest = raw["rest_voltage"]

        def zone(name: str, key: str, unit: str, temp=temp) -> tuple[float, float] | None:
            z = temp.get(name)
            if not z or key not in z:
                return None
            return _value(z["boundary"], "degC"), _value(z[key], unit)

        out[chem] = {
            "family": raw["family"],
            "vented": raw["vented"],
            "nominal_cell_v": _value(raw["nominal_cell_voltage"], "V/cell"),
            "cell_voltage_max_v": _value(env["max_cell_voltage"], "V/cell"),
            "max_it": _value(env["max_current"], "It"),
            "window_c": (
                _value(env["charge_temperature_min"], "degC"),
                _value(env["charge_temperature_max"], "degC"),
            ),
            "forbidden": set(env.get("forbidden_stages") or []),
            "absorption_cell_v": _value(charge["absorption_voltage"], "V/cell"),
            "float_cell_v": (
                _value(charge["float_voltage"], "V/cell") if "float_voltage" in charge else None
            ),
            "storage_cell_v": _value(charge["storage_voltage"], "V/cell"),
            "bulk_it": _value(charge["bulk_current"], "It"),
            "tail_it": _value(charge["tail_current"], "It"),
            "cool": zone("cool_zone", "current", "It"),
            "warm": zone("warm_zone", "voltage", "V/cell"),
            "ocv_table": [(float(s), float(v)) for s, v in rest["table"]],
            "dead_below_cell_v": _value(rest["dead_below"], "V/cell"),
            "plausible_cell_v": _value(rest["highest_plausible"], "V/cell"),
        }
    return out


PROFILES = _read_profiles()
SCHEMA = json.loads((REPO / "schemas" / "setpoints.schema.json").read_text(encoding="utf-8"))
VALIDATOR = jsonschema.Draft202012Validator(SCHEMA)


def _interp(x: float, xs: tuple[float, ...] | list[float], ys: tuple[float, ...] | list[float]):
    """Linear interpolation in a rising table, held flat at its ends."""
    if x <= xs[0]:
        return ys[0]
    if x >= xs[-1]:
        return ys[-1]
    for x0, x1, y0, y1 in zip(xs, xs[1:], ys, ys[1:], strict=False):
        if x0 <= x <= x1:
            return y0 + (y1 - y0) * (x - x0) / (x1 - x0)
    raise AssertionError("unreachable")


def _freezing_point_c(gravity: float) -> float:
    """US Army TM 5-1185 Table III, linear in degF between its rows."""
    return (_interp(gravity, TM_GRAVITY, TM_FREEZE_F) - 32.0) / 1.8


# --- the strategy ---------------------------------------------------------------
def _r(x: float, digits: int) -> float:
    """Round down to ``digits`` decimals (so a drawn bound is never crossed upward)."""
    return math.floor(x * 10**digits) / 10**digits


#: Per-cell range a drawn charger channel reaches: some too low for the plan.
CHANNEL_CELL_V = {
    "lead_acid": (2.20, 2.90),
    "lithium_lifepo4": (3.30, 4.00),
    "lithium_nmc": (3.90, 4.60),
}


@st.composite
def battery_files(
    draw: st.DrawFn,
    chemistries: tuple[str, ...] = CHEMISTRIES,
    *,
    with_channel: bool = True,
    in_window: bool = False,
) -> dict[str, Any]:
    """A valid battery-file dict, as a YAML battery file gives it."""
    chem = draw(st.sampled_from(chemistries))
    p = PROFILES[chem]
    cells = draw(st.integers(1, 24))
    capacity = max(0.5, _r(draw(st.one_of(st.floats(0.5, 50.0), st.floats(0.5, 2000.0))), 2))
    battery: dict[str, Any] = {
        "name": f"Bench battery {draw(st.integers(1, 999))}",
        "chemistry": chem,
        "cells_in_series": cells,
        "capacity": f"{capacity} Ah",
    }
    if draw(st.booleans()):
        battery["nominal_voltage"] = f"{round(cells * p['nominal_cell_v'], 3)} V"

    # Overrides from a maker's datasheet, inside the envelope.
    overrides: dict[str, Any] = {}
    if draw(st.integers(0, 3)) == 0:
        floor_v = max(p["float_cell_v"] or 0.0, p["storage_cell_v"]) + 0.005
        per_cell = draw(st.floats(floor_v, p["cell_voltage_max_v"]))
        if draw(st.booleans()):
            overrides["absorption_voltage"] = f"{_r(per_cell, 3)} V/cell"
        else:
            overrides["absorption_voltage"] = f"{_r(per_cell * cells, 4)} V"
    if draw(st.integers(0, 3)) == 0:
        low = min(p["bulk_it"], p["max_it"])
        rate = draw(st.one_of(st.floats(0.01, p["max_it"]), st.floats(low, p["max_it"])))
        rate = max(0.001, _r(rate, 3))
        if draw(st.booleans()):
            overrides["max_charge_current"] = f"{rate} It"
        else:
            overrides["max_charge_current"] = f"{max(0.001, _r(rate * capacity, 4))} A"
    if draw(st.integers(0, 4)) == 0:  # a maker's absorption time, up to the 7 days allowed
        overrides["absorption_time"] = draw(st.sampled_from(["30 min", "2 h", "3.5 h", "4 h",
                                                             "6 h", "1 d", "7 d"]))
    if overrides:
        battery["overrides"] = overrides

    # What the battery's charge looks like now.
    state: dict[str, Any] = {}
    reading = draw(st.sampled_from(("none", "rest", "rest", "soc")))
    if reading == "rest":
        table_low, table_high = p["ocv_table"][0][1], p["ocv_table"][-1][1]
        per_cell = draw(
            st.one_of(
                st.floats(table_low, table_high),
                st.floats(p["dead_below_cell_v"], p["plausible_cell_v"]),
            )
        )
        state["rest_voltage"] = f"{_r(per_cell * cells, 3)} V"
        if draw(st.integers(0, 3)) == 0:
            state["cells_verified"] = True
    elif reading == "soc":
        state["state_of_charge"] = f"{draw(st.integers(0, 100))} %"
    if draw(st.booleans()):
        state["since_last_charge"] = f"{draw(st.integers(0, 400))} d"
    if p["vented"]:
        if draw(st.booleans()):
            state["specific_gravity_spread"] = _r(draw(st.floats(0.0, 0.08)), 3)
        if draw(st.integers(0, 3)) == 0:
            state["specific_gravity"] = _r(draw(st.floats(1.100, 1.285)), 3)
        if draw(st.integers(0, 3)) == 0:
            state["since_equalization"] = f"{draw(st.integers(0, 800))} d"
    if draw(st.integers(0, 3)) == 0:
        state["equalize"] = draw(st.booleans())

    # The battery's temperature: anywhere in -30..60 degC, often inside its window.
    low_c, high_c = p["window_c"]
    temperature = draw(
        st.floats(low_c, high_c)
        if in_window
        else st.one_of(st.floats(-30.0, 60.0), st.floats(low_c, high_c), st.floats(low_c, high_c))
    )
    data: dict[str, Any] = {
        "battery": battery,
        "conditions": {"battery_temperature": f"{round(temperature, 1)} degC"},
    }
    if state:
        data["state"] = state
    if draw(st.booleans()):
        data["storage"] = {"duration": f"{draw(st.integers(0, 400))} d"}

    # A charger channel: sometimes too weak, so refusals happen.
    if with_channel and draw(st.integers(0, 3)) > 0:
        key = "lead_acid" if p["family"] == "lead_acid" else f"lithium_{chem}"
        v_low, v_high = CHANNEL_CELL_V[key]
        max_v = _r(draw(st.floats(v_low, v_high)) * cells, 2)
        max_a = max(0.001, _r(draw(st.floats(0.02, 1.5)) * capacity, 3))
        channel: dict[str, Any] = {"max_voltage": f"{max_v} V", "max_current": f"{max_a} A"}
        if draw(st.integers(0, 3)) == 0:
            min_v = _r(draw(st.floats(0.0, 0.97)) * max_v, 2)
            if min_v < max_v:
                channel["min_voltage"] = f"{min_v} V"
        share = draw(st.one_of(st.just(0.0), st.floats(0.0, 0.05), st.floats(0.0, 0.9)))
        min_a = _r(share * max_a, 4)
        if min_a < max_a:
            channel["min_current"] = f"{min_a} A"
        channel["temperature_probe"] = draw(st.booleans())
        # left out it counts as false (refused for lithium, gel and AGM): mostly say true
        channel["can_disable_high_voltage_stages"] = draw(st.integers(0, 4)) > 0
        if draw(st.booleans()):
            channel["name"] = f"bench channel {draw(st.sampled_from('ABCDEF'))}"
        if draw(st.integers(0, 2)) == 0:  # a channel that sets its outputs in steps
            channel["voltage_step"] = f"{draw(st.sampled_from([1, 5, 10, 20, 50, 100]))} mV"
            channel["current_step"] = f"{draw(st.sampled_from([1, 10, 50, 100, 250]))} mA"
        data["charger"] = channel
    return data


def _plan_or_outcome(data: dict[str, Any]) -> ChargePlan | str:
    """Validate and plan; a refusal or an input error comes back as its name.

    Anything else (an EnvelopeViolation, an InternalError, any other exception)
    propagates and fails the test.
    """
    battery_file = BatteryFile.model_validate(data)
    try:
        return plan_charge(battery_file)
    except PlanRefused as refusal:
        note(f"refused: {refusal}")
        return f"refused by {refusal.rule_id}"
    except InputError as error:
        note(f"input error: {error}")
        return "input error"


def _program_or_outcome(data: dict[str, Any]) -> ChargePlan | str:
    """As _plan_or_outcome, for the charge program the setpoint document carries (made
    without the state, without estimate or table, to keep the examples fast)."""
    from chargeplan.firmware.charge_program import program_plan

    battery_file = BatteryFile.model_validate(data)
    try:
        return program_plan(battery_file, estimate=False, table_step_c=None)
    except PlanRefused as refusal:
        note(f"refused: {refusal}")
        return f"refused by {refusal.rule_id}"
    except InputError as error:
        note(f"input error: {error}")
        return "input error"


# --- the independent check --------------------------------------------------------
def _given_amps(text: str, capacity_ah: float) -> float:
    match = _NUMBER.match(text)
    assert match
    number, unit = float(match.group(1)), match.group(2)
    return number * capacity_ah if unit == "It" else number


def _number(text: str) -> float:
    match = _NUMBER.match(text)
    assert match
    return float(match.group(1))


def _independent_violations(data: dict[str, Any], plan: ChargePlan) -> list[str]:
    """Every way ``plan`` crosses a published or profile-file limit, by our own arithmetic."""
    found: list[str] = []
    chem = data["battery"]["chemistry"]
    p = PROFILES[chem]
    lithium = chem in LITHIUM
    cells = data["battery"]["cells_in_series"]
    capacity = _number(data["battery"]["capacity"])
    temperature = _number(data["conditions"]["battery_temperature"])
    channel = data.get("charger")
    maker = data["battery"].get("overrides", {}).get("max_charge_current")
    b = plan.battery

    if b.chemistry != chem or b.cells_in_series != cells:
        found.append(f"planned as {b.cells_in_series} cells of {b.chemistry}")
    if not math.isclose(b.capacity_ah, capacity, rel_tol=1e-12):
        found.append(f"planned at {b.capacity_ah} Ah, not the {capacity} Ah given")
    if not math.isclose(b.temperature_c, temperature, abs_tol=FLOAT_NOISE):
        found.append(f"planned at {b.temperature_c} degC, not the {temperature} degC given")

    # Voltage: the published per-cell maximum (written above from the sources, not profiles/).
    cell_max = PUBLISHED_MAX_CELL_V[chem]
    v_max = cell_max * cells + FLOAT_NOISE
    # Current: the published C-rate ceiling, the channel's and the maker's maximum.
    limits = {"published ceiling": PUBLISHED_MAX_IT[chem] * capacity}
    if channel is not None:
        limits["channel"] = _number(channel["max_current"])
    if maker is not None:
        limits["maker's max_charge_current"] = _given_amps(maker, capacity)
    # The cool zone: BU-410 Table 1 (lead-acid below 0 degC), cell handling guidelines
    # (LFP below 10 degC), JEITA (NMC below 10 degC); the profile's own, if lower.
    published_cool = {
        "lead_acid": (0.0, LEAD_ACID_BELOW_FREEZING_IT),
        "lifepo4": (LFP_COOL_BELOW_C, LFP_COOL_IT),
        "nmc": (NMC_COOL_BELOW_C, NMC_COOL_IT),
    }["lead_acid" if not lithium else chem]
    for boundary, rate in (published_cool, p["cool"] or (-math.inf, math.inf)):
        if temperature < boundary:
            limits[f"cool zone below {boundary} degC"] = min(
                limits.get(f"cool zone below {boundary} degC", math.inf), rate * capacity
            )
    # The warm zone (JEITA): the profile's own cut, never above the published 4.15 V/cell.
    if p["warm"] is not None and temperature > p["warm"][0]:
        v_max = min(v_max, min(p["warm"][1], NMC_WARM_CELL_V) * cells + FLOAT_NOISE)

    for index, stage in enumerate(plan.stages):
        name = f"stage {index + 1} ({stage.kind.value})"
        if not stage.voltage_v > 0 or stage.voltage_v > v_max:
            found.append(f"{name} at {stage.voltage_v} V, limit {v_max} V")
        if channel is not None and stage.voltage_v > _number(channel["max_voltage"]) + 1e-9:
            found.append(f"{name} at {stage.voltage_v} V, above the channel's maximum")
        for what, amps in limits.items():
            if not stage.current_a > 0 or stage.current_a > amps + FLOAT_NOISE:
                found.append(f"{name} at {stage.current_a} A, above the {what} {amps} A")
        for e in stage.exits:
            if e.kind == ExitKind.VOLTAGE_REACHED and e.value > v_max:
                found.append(f"{name} exits at {e.value} V, limit {v_max} V")
        if stage.kind.value in FORBIDDEN[chem]:
            found.append(f"{name} is never allowed for {chem}")

    lock = plan.interlocks
    low_c, high_c = PUBLISHED_WINDOW_C[chem]
    if lock.charge_temperature_min_c < low_c - FLOAT_NOISE:
        found.append(f"interlock minimum {lock.charge_temperature_min_c} degC < {low_c}")
    if lock.charge_temperature_max_c > high_c + FLOAT_NOISE:
        found.append(f"interlock maximum {lock.charge_temperature_max_c} degC > {high_c}")
    if not (low_c - FLOAT_NOISE <= temperature <= high_c + FLOAT_NOISE):
        found.append(f"a plan at {temperature} degC, outside {low_c}..{high_c} degC")
    if lithium and (lock.charge_temperature_min_c < 0.0 or b.temperature_c < 0.0):
        found.append("lithium may be charged below 0 degC")  # BU-410 Table 1
    if lock.cell_voltage_max_v > cell_max + FLOAT_NOISE:
        found.append(f"interlock cell voltage {lock.cell_voltage_max_v} V > {cell_max}")
    if lock.battery_voltage_max_v > cell_max * cells + FLOAT_NOISE:
        found.append(f"interlock battery voltage {lock.battery_voltage_max_v} V")
    if lock.current_max_a > PUBLISHED_MAX_IT[chem] * capacity + FLOAT_NOISE:
        found.append(f"interlock current {lock.current_max_a} A")
    if lithium and plan.finish != "stop":
        found.append("a lithium plan holds at the end")  # BU-702: no float or trickle
    if channel is not None and channel.get("can_disable_high_voltage_stages") is False:
        # common practice: a channel whose equalization or desulfation cannot be
        # switched off harms lithium and gel; such a pairing is refused.
        if chem in ("lifepo4", "nmc", "gel"):
            found.append("a channel that cannot switch off high-voltage stages was accepted")

    if not lithium:
        # Never charge a frozen battery (common practice); freezing point by specific
        # gravity from TM 5-1185 Table III, gravity by state of charge from the BCI
        # table; the measured gravity first, else the state of charge, else flat.
        state = data.get("state", {})
        if "specific_gravity" in state:
            # US Army TM 5-4210-230-14&P-1: add 0.004 per 10 degF above 80 degF (a reading
            # is corrected for the electrolyte's temperature before the table is used)
            gravity = float(state["specific_gravity"]) + 0.0004 * (temperature * 1.8 + 32 - 80)
        else:
            if "state_of_charge" in state:
                soc = _number(state["state_of_charge"])
            elif "rest_voltage" in state:
                per_cell = _number(state["rest_voltage"]) / cells
                table = p["ocv_table"]
                soc = _interp(per_cell, [v for _s, v in table], [s for s, _v in table])
            else:
                soc = 0.0
            gravity = _interp(soc, BCI_SOC_PCT, BCI_GRAVITY)
        freeze = _freezing_point_c(gravity)
        if temperature <= freeze - FLOAT_NOISE:
            found.append(f"planned at {temperature} degC, at or below freezing {freeze:.2f}")
        if lock.charge_temperature_min_c < freeze - 1e-6:
            found.append(f"interlock minimum {lock.charge_temperature_min_c} degC < {freeze}")
    return found


def test_profile_files_stay_inside_published_limits():
    """The limits the properties read from profiles/*.yaml are no looser than the published ones."""
    for chem, p in PROFILES.items():
        # the published ceilings above (cell handling guidelines, BU-808, BU-403, ...)
        assert p["cell_voltage_max_v"] <= PUBLISHED_MAX_CELL_V[chem], chem
        assert p["max_it"] <= PUBLISHED_MAX_IT[chem], chem
        assert FORBIDDEN[chem] - {"float"} <= p["forbidden"] | ({"desulfation", "equalization"}
                                                               if chem == "agm" else set()), chem
        low, high = PUBLISHED_WINDOW_C[chem]  # BU-410 Table 1
        assert low <= p["window_c"][0] < p["window_c"][1] <= high, chem
        assert p["cool"] is not None, chem
    # A profile's cool zone may start warmer and allow less, never the other way.
    boundary, rate = PROFILES["lifepo4"]["cool"]
    assert boundary >= LFP_COOL_BELOW_C and rate <= LFP_COOL_IT  # cell handling guidelines
    boundary, rate = PROFILES["nmc"]["cool"]
    assert boundary >= NMC_COOL_BELOW_C and rate <= NMC_COOL_IT  # JEITA (2007), BU-409
    for chem in LEAD_ACID:
        boundary, rate = PROFILES[chem]["cool"]
        assert boundary >= 0.0 and rate <= LEAD_ACID_BELOW_FREEZING_IT  # BU-410 Table 1
    boundary, cell_v = PROFILES["nmc"]["warm"]
    assert boundary <= LITHIUM_WINDOW_C[1] and cell_v <= NMC_WARM_CELL_V  # JEITA (2007)


@settings(max_examples=2000, deadline=None)
@given(data=battery_files())
def test_any_valid_battery_file_gets_a_safe_plan_or_a_clean_refusal(data):
    outcome = _plan_or_outcome(data)
    if isinstance(outcome, str):
        event(outcome)
        return
    plan = outcome
    event(f"plan ({data['battery']['chemistry']})")
    note(plan.summary())
    note(repr([(s.kind.value, s.voltage_v, s.current_a) for s in plan.stages]))
    found = _independent_violations(data, plan)
    assert not found, "; ".join(found)
    # The library's own check must agree: it passes on every plan ours passes.
    assert safety.violations(plan, hard_envelope(plan.battery.chemistry)) == []
    safety.verify(plan, hard_envelope(plan.battery.chemistry))


@settings(max_examples=800, deadline=None)
@given(
    data=battery_files(LEAD_ACID, with_channel=False),
    t1=st.integers(-200, 500),
    t2=st.integers(-200, 500),
)
def test_lead_acid_colder_never_gets_a_lower_charge_voltage(data, t1, t2):
    """BU-410: lead-acid charge voltages rise as the battery cools (-3 mV/degC/cell)."""
    assume(t1 != t2)
    cold_c, warm_c = min(t1, t2) / 10, max(t1, t2) / 10
    plans = []
    for t in (cold_c, warm_c):
        variant = copy.deepcopy(data)
        variant["conditions"]["battery_temperature"] = f"{t} degC"
        outcome = _plan_or_outcome(variant)
        event("plan" if not isinstance(outcome, str) else outcome)
        assume(not isinstance(outcome, str))
        plans.append(outcome)
    cold, warm = plans
    chem, cells = data["battery"]["chemistry"], data["battery"]["cells_in_series"]
    v_max = PUBLISHED_MAX_CELL_V[chem] * cells + FLOAT_NOISE  # the published ceiling
    for kind in ("absorption", "float", "storage_hold"):
        at_cold, at_warm = cold.stage(kind), warm.stage(kind)
        if kind == "absorption":
            assert at_cold is not None and at_warm is not None
        if at_cold is None or at_warm is None:
            continue
        note(f"{kind}: {at_cold.voltage_v} V at {cold_c} degC, {at_warm.voltage_v} V at {warm_c}")
        assert at_cold.voltage_v >= at_warm.voltage_v - FLOAT_NOISE
        assert at_cold.voltage_v <= v_max and at_warm.voltage_v <= v_max


def _integer_paths(node: Any, path: tuple = ()) -> list[tuple]:
    """The path of every integer (not boolean) in a JSON-like document."""
    if isinstance(node, bool):
        return []
    if isinstance(node, int):
        return [path]
    if isinstance(node, dict):
        return [q for key, value in node.items() for q in _integer_paths(value, (*path, key))]
    if isinstance(node, list):
        return [q for i, value in enumerate(node) for q in _integer_paths(value, (*path, i))]
    return []


@settings(max_examples=600, deadline=None)
@given(data=battery_files(with_channel=False, in_window=True))
def test_setpoint_document_rounds_toward_safety_and_detects_edits(data):
    outcome = _program_or_outcome(data)
    if isinstance(outcome, str):
        event(outcome)
    assume(not isinstance(outcome, str))
    plan = outcome
    doc = encode(plan)
    note(json.dumps(doc))
    # The committed JSON Schema (schemas/setpoints.schema.json), Draft 2020-12.
    VALIDATOR.validate(doc)
    # a program: the pre-charge is its own block, the stages follow it
    # (lead-acid has none: the block is switched off, 0 mV / 0 mA / 0 s; BU-403)
    if plan.stages[0].kind.value == "precharge":
        pre, *planned = plan.stages
        assert doc["precharge"]["below_voltage_mV"] <= pre.voltage_v * 1000 + SCALED_NOISE
        assert doc["precharge"]["current_mA"] <= pre.current_a * 1000 + SCALED_NOISE
    else:
        planned = list(plan.stages)
        assert plan.battery.family == "lead_acid"
        assert doc["precharge"] == {"below_voltage_mV": 0, "current_mA": 0, "timer_s": 0}
    assert len(doc["stages"]) == len(planned)
    # Limits round down (never above the plan), in integer mV / mA.
    for stage, out in zip(planned, doc["stages"], strict=True):
        assert out["kind"] == stage.kind.value
        assert out["voltage_mV"] <= stage.voltage_v * 1000 + SCALED_NOISE
        assert out["current_mA"] <= stage.current_a * 1000 + SCALED_NOISE
        for e, e_out in zip(stage.exits, out["exits"], strict=True):
            if e.kind == ExitKind.VOLTAGE_REACHED:
                assert e_out["voltage_mV"] <= e.value * 1000 + SCALED_NOISE
            elif e.kind == ExitKind.CURRENT_BELOW:  # a tail current rounds up: ends sooner
                assert e_out["current_mA"] >= e.value * 1000 - SCALED_NOISE
            elif e.kind == ExitKind.DURATION:
                assert e_out["duration_s"] <= e.value + SCALED_NOISE
            else:  # a fault guard rounds down: it trips sooner
                assert e.then == "fault"
                key, scale = {ExitKind.CHARGE_ABOVE: ("charge_mAh", 1000),
                              ExitKind.CURRENT_RISING: ("current_mA", 1000),
                              ExitKind.TEMPERATURE_RISE: ("temperature_rise_dK", 10)}[e.kind]
                assert e_out[key] <= e.value * scale + SCALED_NOISE
        if stage.timer_s is not None:
            assert out["timer_s"] <= stage.timer_s + SCALED_NOISE
    # And in whole integers, never above the published ceiling.
    chem, cells = plan.battery.chemistry, plan.battery.cells_in_series
    cell_mv = round(PUBLISHED_MAX_CELL_V[chem] * 1000)  # the published ceiling
    for out in doc["stages"]:
        assert out["voltage_mV"] <= cell_mv * cells
    lock, doc_lock = plan.interlocks, doc["interlocks"]
    # Temperature interlocks: the minimum rounds up, the maximum down (0.1 degC).
    assert doc_lock["charge_temperature_min_dC"] >= lock.charge_temperature_min_c * 10 - (
        SCALED_NOISE
    )
    assert doc_lock["charge_temperature_max_dC"] <= lock.charge_temperature_max_c * 10 + (
        SCALED_NOISE
    )
    if chem in LITHIUM:
        assert doc_lock["charge_temperature_min_dC"] >= 0  # BU-410 Table 1: never below 0 degC
    assert doc_lock["cell_voltage_max_mV"] <= lock.cell_voltage_max_v * 1000 + SCALED_NOISE
    assert doc_lock["battery_voltage_max_mV"] <= lock.battery_voltage_max_v * 1000 + SCALED_NOISE
    assert doc_lock["current_max_mA"] <= lock.current_max_a * 1000 + SCALED_NOISE
    assert doc_lock["cell_voltage_max_mV"] <= cell_mv
    # The digest covers the document: any single edited integer changes it.
    assert compute_digest(doc) == doc["digest"]
    paths = _integer_paths(doc)
    assert paths
    edited = copy.deepcopy(doc)
    for path in paths:
        node = edited
        for key in path[:-1]:
            node = node[key]
        original = node[path[-1]]
        for delta in (1, -1):
            node[path[-1]] = original + delta
            assert compute_digest(edited) != doc["digest"], f"editing {path} went unnoticed"
        node[path[-1]] = original
    assert compute_digest(edited) == doc["digest"]


@settings(max_examples=300, deadline=None)
@given(data=battery_files(in_window=True))
def test_estimates_keep_every_plan_safe_and_timers_tight(data):
    """Estimating a plan never loosens it: timers only shorten, never below their floors,
    and the plan still passes the library's safety check (estimate_plans re-runs it)."""
    from chargeplan.estimate import estimate_plans

    outcome = _plan_or_outcome(data)
    assume(not isinstance(outcome, str))
    plan = outcome
    before = [stage.timer_s for stage in plan.stages]
    estimate_plans([plan])
    for stage, timer in zip(plan.stages, before, strict=True):
        if stage.estimate is None:  # no estimate: the model did not settle, or an earlier
            # stage would end on its safety timer (a fault) so this one would not run
            assert any("did not settle" in f.message or "would stop with a fault" in f.message
                       for f in plan.findings)
            continue
        assert stage.estimate.charge_ah >= 0 and stage.estimate.energy_wh >= 0
        if timer is None:
            assert stage.timer_s is None
            continue
        assert stage.timer_s <= timer + 1e-9
        if stage.kind.value == "precharge":
            assert stage.timer_s == timer  # never tightened
        if stage.kind.value == "bulk":
            assert stage.timer_s >= min(1800.0, timer) - 1e-9  # the bulk floor
    assert not _independent_violations(data, plan)


_DEFINE = re.compile(r"^#define (CP_\w+) \(?(-?\d+)u?\)?$", re.M)
_STAGE = re.compile(r"\{(CP_KIND_\w+), (\d+)u, (\d+)u, (\d+)u, (\d+u|CP_NONE_U32),\s+"
                    r"(\d+)u, (\d+)u, (\d+)u, (\d+)u, (\d+)u, (\d+)u,\s+"
                    r"(\d+)u, (\d+)u, (\d+)u\}")
_ROW = re.compile(r"^    \{(-?\d+), (\d+)u, (\d+)u, (\d+)u\},?$", re.M)
NONE_U32 = 0xFFFFFFFF


def _exit_of(stage: dict[str, Any], condition: str, key: str) -> tuple[int, int]:
    for e in stage["exits"]:
        if e["condition"] == condition:
            return e[key], 0 if e["then"] == "next" else 1
    return NONE_U32, 0


@settings(max_examples=1200, deadline=None)
@given(data=battery_files(), bit=st.integers(0, 1 << 20))
def test_json_header_and_image_carry_the_same_numbers(data, bit):
    """The three firmware outputs agree number for number: the header is read back with
    regular expressions written here, the image through its decoder; one flipped bit in the
    image is always caught (zlib.crc32 detects every single-bit error, ITU-T V.42)."""
    from chargeplan.firmware import image
    from chargeplan.firmware.c_header import render_c_header

    outcome = _program_or_outcome(data)
    if isinstance(outcome, str):
        event(outcome)
    assume(not isinstance(outcome, str))
    doc = encode(outcome)
    if any(e["condition"] not in ("voltage_reached", "current_below", "duration")
           for stage in doc["stages"] for e in stage["exits"]):
        event("fault guards carried")
    header = render_c_header(outcome, doc)
    defines = {name: int(value) for name, value in _DEFINE.findall(header)}
    lock = doc["interlocks"]
    assert defines["CP_FORMAT_VERSION"] == doc["version"]
    assert defines["CP_CELLS_IN_SERIES"] == doc["cells_in_series"]
    assert defines["CP_PLANNED_TEMPERATURE_DC"] == doc["planned_temperature_dC"]
    for key in ("charge_temperature_min_dC", "charge_temperature_max_dC", "cell_voltage_max_mV",
                "battery_voltage_max_mV", "current_max_mA"):
        assert defines["CP_" + key.upper()] == lock[key], key
    assert f'#define CP_DIGEST "{doc["digest"]}"' in header
    stages = _STAGE.findall(header)
    assert len(stages) == defines["CP_STAGE_COUNT"] == len(doc["stages"])
    for row, stage in zip(stages, doc["stages"], strict=True):
        kind, comp, volts, amps, timer, *exits, cap, rising, warm = row
        assert kind == "CP_KIND_" + stage["kind"].upper()
        assert int(comp) == int(stage["compensated"])
        assert (int(volts), int(amps)) == (stage["voltage_mV"], stage["current_mA"])
        assert timer == ("CP_NONE_U32" if stage["timer_s"] is None else f"{stage['timer_s']}u")
        assert [int(v) for v in exits] == [
            *_exit_of(stage, "voltage_reached", "voltage_mV"),
            *_exit_of(stage, "current_below", "current_mA"),
            *_exit_of(stage, "duration", "duration_s")]
        # the fault guards, CP_NONE_U32 where the stage has none (never dropped)
        assert [int(cap), int(rising), int(warm)] == [
            _exit_of(stage, "charge_above", "charge_mAh")[0],
            _exit_of(stage, "current_rising", "current_mA")[0],
            _exit_of(stage, "temperature_rise", "temperature_rise_dK")[0]]
    table = doc["temperature_table"]
    rows = [[int(v) for v in r] for r in _ROW.findall(header)]
    assert rows == [[r["temperature_dC"], r["charge_voltage_mV"], r["hold_voltage_mV"] or 0,
                     r["current_max_mA"]] for r in (table["rows"] if table else [])]
    # The image decodes to the document's numbers.
    data_bytes = image.encode(doc)
    back = image.decode(data_bytes)
    for key in ("cells_in_series", "planned_temperature_dC", "interlocks",
                "temperature_compensation", "temperature_table", "digest", "precharge",
                "restart", "faults", "hysteresis"):
        assert back[key] == doc[key], key
    for mine, theirs in zip(back["stages"], doc["stages"], strict=True):
        assert mine == {k: theirs[k] for k in mine}
    flipped = bytearray(data_bytes)
    where = bit % (len(flipped) * 8)
    flipped[where // 8] ^= 1 << (where % 8)
    try:
        image.decode(bytes(flipped))
    except image.ImageError:
        pass
    else:
        raise AssertionError(f"bit {where} flipped went unnoticed")


@settings(max_examples=600, deadline=None)
@given(data=battery_files(in_window=True),
       voltage_step=st.sampled_from([1, 5, 10, 20, 50, 100, 200]),
       current_step=st.sampled_from([1, 10, 50, 100, 250, 500]))
def test_quantisation_never_moves_a_limit_toward_danger(data, voltage_step, current_step):
    """The same battery on a channel with and without output steps: on the steps every
    voltage and current limit is at or below, every tail current at or above (the stage ends
    sooner), and no stage can put in more charge before its timer trips (common practice:
    round limits toward safety)."""
    data.setdefault("charger", {"max_voltage": "60 V", "max_current": "500 A",
                                "can_disable_high_voltage_stages": True})
    data["charger"].pop("voltage_step", None)
    data["charger"].pop("current_step", None)
    plain = _plan_or_outcome(data)
    assume(not isinstance(plain, str))
    stepped_data = copy.deepcopy(data)
    stepped_data["charger"]["voltage_step"] = f"{voltage_step} mV"
    stepped_data["charger"]["current_step"] = f"{current_step} mA"
    stepped = _plan_or_outcome(stepped_data)
    if isinstance(stepped, str):
        event(f"stepped: {stepped}")  # refused (CP405) when a step leaves the channel's range
        return
    event("both planned")
    assert [s.kind for s in stepped.stages] == [s.kind for s in plain.stages]
    for a, b in zip(plain.stages, stepped.stages, strict=True):
        assert b.voltage_v <= a.voltage_v + FLOAT_NOISE
        assert b.current_a <= a.current_a + FLOAT_NOISE
        if a.timer_s is not None:
            # a lower current may run longer, but the charge a stage can put in before its
            # timer trips never grows (timers are set from the stage's charge, common practice)
            assert b.timer_s is not None
            assert b.current_a * b.timer_s <= a.current_a * a.timer_s * (1 + 1e-9) + 1e-6
        for e, f in zip(a.exits, b.exits, strict=True):
            if e.kind == ExitKind.CURRENT_BELOW:
                assert f.value >= e.value - FLOAT_NOISE
            else:
                assert f.value <= e.value + FLOAT_NOISE
    lock_a, lock_b = plain.interlocks, stepped.interlocks
    assert lock_b.battery_voltage_max_v <= lock_a.battery_voltage_max_v + FLOAT_NOISE
    assert lock_b.current_max_a <= lock_a.current_max_a + FLOAT_NOISE
    assert lock_b.charge_temperature_min_c >= lock_a.charge_temperature_min_c - FLOAT_NOISE
