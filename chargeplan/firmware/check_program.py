"""The rules a version-4 setpoint document (a charge program) must also keep.

A tuple of small named checks, each reading only the document; each finding starts with
its rule id (``P4nn``). :func:`program_violations` runs them all; ``check.py`` calls it
for every version-4 document, JSON or image, and for a version-3 one (those that apply).
"""

from __future__ import annotations

from collections.abc import Callable, Iterator
from typing import Any

from chargeplan.firmware.limits import LIMITS

__all__ = ["PROGRAM_CHECKS", "VERSION_3_CHECKS", "program_violations"]

Doc = dict[str, Any]

#: A stage that is only asked for by an operator, never run by a program by itself.
_OPERATOR_STAGES = frozenset({"equalization", "desulfation"})
#: The kinds a program's stage list may hold (the pre-charge is its own block).
_PROGRAM_KINDS = frozenset({"bulk", "absorption", "float", "storage_hold"})
#: An Ah cap on a program is a multiple of the rated capacity: at least the whole capacity
#: (a flat battery must be able to charge), at most twice it (lead-acid returns at most
#: 1.10-1.30 Ah per Ah taken out, common practice: a cap above 2x caps nothing).
_CAP_RANGE = (1.0, 2.0)
#: The longest a voltage or current trip may be filtered (common practice: seconds).
_FILTER_MAX_S = 10
#: The widest temperature resume margin (0.1 K) that still leaves a usable window.
_MARGIN_MAX_DK = 100


def _held(doc: Doc, index: int) -> bool:
    """The last stage of a document that holds, and has no exit: it runs until unplugged."""
    stage = doc["stages"][index]
    return (doc["finish"] == "hold" and index == len(doc["stages"]) - 1
            and not any(e["then"] in ("next", "stop") for e in stage["exits"]))


def stage_kinds(doc: Doc) -> Iterator[str]:
    """P401: a program's stages are bulk, absorption, float or a storage hold."""
    for n, stage in enumerate(doc["stages"], 1):
        if stage["kind"] in _OPERATOR_STAGES:
            yield (f"P401: stage {n} ({stage['kind']}) is operator-requested: never automatic "
                   "in a charge program")
        elif stage["kind"] not in _PROGRAM_KINDS:
            yield (f"P401: stage {n} ({stage['kind']}) does not belong in a program's stages "
                   "(a pre-charge is the 'precharge' block)")


def precharge_below_charge(doc: Doc) -> Iterator[str]:
    """P402: the pre-charge sits below the first stage, at no more than its current."""
    pre, first = doc["precharge"], doc["stages"][0]
    if pre["below_voltage_mV"] >= first["voltage_mV"]:
        yield (f"P402: precharge.below_voltage_mV {pre['below_voltage_mV']} is not below the "
               f"first stage's {first['voltage_mV']} mV")
    if pre["current_mA"] > first["current_mA"]:
        yield (f"P402: precharge.current_mA {pre['current_mA']} is above the first stage's "
               f"{first['current_mA']} mA")
    cool = doc["interlocks"]["cool_zone"]
    if cool and pre["current_mA"] > cool["current_max_mA"]:
        yield "P402: precharge.current_mA is above the cool zone's current"


def precharge_timer(doc: Doc) -> Iterator[str]:
    """P403: the pre-charge timer is set and puts in at most the rated capacity."""
    pre = doc["precharge"]
    if pre["below_voltage_mV"] == pre["current_mA"] == pre["timer_s"] == 0:
        if doc["battery"]["chemistry"] in ("lifepo4", "nmc"):
            yield "P403: a lithium program needs its pre-charge (BU-808a); it is switched off"
        return  # switched off: lead-acid takes the bulk current from the start (BU-403)
    if not pre["timer_s"] or pre["timer_s"] <= 0:
        yield "P403: precharge.timer_s must be a positive number of seconds"
        return
    charge_mah = pre["timer_s"] * pre["current_mA"] / 3600
    if charge_mah > doc["battery"]["capacity_mAh"]:
        yield (f"P403: the pre-charge may put in {charge_mah:.0f} mAh before its timer, more "
               f"than the rated {doc['battery']['capacity_mAh']} mAh")


def timers_beyond_exits(doc: Doc) -> Iterator[str]:
    """P404: every stage that ends has a timer, strictly longer than its duration exit."""
    for n, stage in enumerate(doc["stages"], 1):
        timer = stage["timer_s"]
        if timer is None:
            if not _held(doc, n - 1):
                yield f"P404: stage {n} ({stage['kind']}) ends but has no safety timer"
            continue
        for e in stage["exits"]:
            if e["condition"] == "duration" and timer <= e["duration_s"]:
                yield (f"P404: stage {n} ({stage['kind']}) timer {timer} s is not longer than "
                       f"its duration exit {e['duration_s']} s")


def caps_on_rated_capacity(doc: Doc) -> Iterator[str]:
    """P405: an Ah cap is a multiple of the rated capacity, not of one state's charge."""
    capacity = doc["battery"]["capacity_mAh"]
    low, high = _CAP_RANGE
    for n, stage in enumerate(doc["stages"], 1):
        for e in stage["exits"]:
            if e["condition"] == "charge_above" and not (
                    low * capacity <= e["charge_mAh"] <= high * capacity):
                yield (f"P405: stage {n} Ah cap {e['charge_mAh']} mAh is outside {low:g}-"
                       f"{high:g} x the rated {capacity} mAh")


def lead_acid_guards(doc: Doc) -> Iterator[str]:
    """P410: every lead-acid bulk and absorption stage faults on an Ah cap and a temperature
    rise, and absorption on a current that rises at constant voltage, each within bounds."""
    chemistry = doc["battery"]["chemistry"]
    limits = LIMITS.get(chemistry)
    if limits is None or limits.guard_cap_it is None:  # lithium: its own protection guards it
        return
    cap_it, rise_max = limits.guard_cap_it, limits.guard_rise_max_dK
    current_rise_it = limits.guard_current_rise_max_it
    capacity = doc["battery"]["capacity_mAh"]
    for n, stage in enumerate(doc["stages"], 1):
        if stage["kind"] not in ("bulk", "absorption"):
            continue
        name = f"stage {n} ({stage['kind']})"
        guards = {e["condition"]: e for e in stage["exits"] if e["then"] == "fault"}
        cap = guards.get("charge_above")
        if cap is None:
            yield f"P410: {name} has no charge_above guard: a charge that goes to gas runs on"
        elif cap["charge_mAh"] > cap_it * capacity:
            yield (f"P410: {name} Ah cap {cap['charge_mAh']} mAh is above {cap_it:g} x the "
                   f"rated {capacity} mAh for {chemistry}")
        rise = guards.get("temperature_rise")
        if rise is None:
            yield f"P410: {name} has no temperature_rise guard"
        elif rise_max is not None and rise["temperature_rise_dK"] > rise_max:
            yield (f"P410: {name} temperature rise {rise['temperature_rise_dK']} dK is above "
                   f"{rise_max} dK")
        if stage["kind"] != "absorption":
            continue
        rising = guards.get("current_rising")
        if rising is None:
            yield (f"P410: {name} has no current_rising guard: thermal runaway at constant "
                   "voltage would not be stopped")
        elif current_rise_it is not None and rising["current_mA"] > current_rise_it * capacity:
            yield (f"P410: {name} current rise {rising['current_mA']} mA is above "
                   f"{current_rise_it:g} x the rated {capacity} mAh")


#: Lead-acid goes back to bulk from float only when it cannot hold about 2.08-2.12 V/cell
#: (common practice, from memory); 2.13 V/cell allows a 10 mV/cell margin above that range.
_FLOAT_RESTART_MAX_MV = 2130


def restart_rule(doc: Doc) -> Iterator[str]:
    """P406: the restart matches the finish and lies below the voltage it returns from."""
    restart, stages = doc["restart"], doc["stages"]
    wanted = "float_below" if doc["finish"] == "hold" else "rest_below"
    if restart["condition"] != wanted:
        yield (f"P406: restart.condition is {restart['condition']} but the program finishes "
               f"with '{doc['finish']}' ({wanted})")
    last = stages[-1]["voltage_mV"]
    if restart["voltage_mV"] >= last:
        yield (f"P406: restart.voltage_mV {restart['voltage_mV']} is not below the "
               f"{last} mV the charge ends on: it would restart at once, again and again")
    if restart["voltage_mV"] <= doc["precharge"]["below_voltage_mV"]:
        yield "P406: restart.voltage_mV is at or below the pre-charge voltage"
    cells = doc.get("cells_in_series") or 1
    high = restart["voltage_mV"] > _FLOAT_RESTART_MAX_MV * cells
    if restart["condition"] == "float_below" and high:
        yield (f"P406: restart.voltage_mV {restart['voltage_mV']} is above "
               f"{_FLOAT_RESTART_MAX_MV} mV/cell: a battery on float would go back to bulk "
               "while it is still full")


def faults_complete(doc: Doc) -> Iterator[str]:
    """P407: every fault of the table, each with its own code, and latched where it must."""
    from chargeplan.firmware.faults import FAULT_CODES, LATCH_ONLY

    entries = doc["faults"]
    codes = [f["code"] for f in entries]
    if len(set(codes)) != len(codes):
        yield "P407: fault codes are not unique"
    by_name = {f["name"]: f for f in entries}
    for name, code in FAULT_CODES.items():
        entry = by_name.get(name)
        if entry is None:
            yield f"P407: the fault '{name}' is missing"
            continue
        if entry["code"] != code:
            yield f"P407: fault '{name}' has code {entry['code']}; its code is {code}"
        if name in LATCH_ONLY and entry["action"] != "latch":
            yield f"P407: fault '{name}' must latch, not {entry['action']}"


def connection_thresholds(doc: Doc) -> Iterator[str]:
    """P408: no battery below the pre-charge; a wrong cell count above a rested battery."""
    by_name = {f["name"]: f for f in doc["faults"]}
    none = by_name.get("no_battery", {}).get("below_voltage_mV")
    more = by_name.get("wrong_cell_count", {}).get("above_voltage_mV")
    if none is None or more is None:
        yield "P408: no_battery needs below_voltage_mV and wrong_cell_count above_voltage_mV"
        return
    if doc["precharge"]["below_voltage_mV"] and none >= doc["precharge"]["below_voltage_mV"]:
        yield "P408: no_battery.below_voltage_mV is not below the pre-charge voltage"
    if more <= doc["battery"]["nominal_voltage_mV"]:
        yield ("P408: wrong_cell_count.above_voltage_mV is not above the nominal voltage: "
               "every battery would latch")
    if more > doc["interlocks"]["battery_voltage_max_mV"]:
        yield "P408: wrong_cell_count.above_voltage_mV is above the voltage interlock"


def hysteresis_window(doc: Doc) -> Iterator[str]:
    """P409: a pause resumes inside the window; a trip is filtered for seconds at most."""
    hyst, lock = doc["hysteresis"], doc["interlocks"]
    margin = hyst["temperature_margin_dK"]
    if not 0 < margin <= _MARGIN_MAX_DK:
        yield f"P409: temperature_margin_dK {margin} is outside 1-{_MARGIN_MAX_DK}"
    elif (lock["charge_temperature_min_dC"] + margin
          >= lock["charge_temperature_max_dC"] - margin):
        yield "P409: the temperature margins close the charge window"
    if not 0 <= hyst["voltage_filter_s"] <= _FILTER_MAX_S:
        yield (f"P409: voltage_filter_s {hyst['voltage_filter_s']} is outside 0-"
               f"{_FILTER_MAX_S} s: an over-voltage would be held too long")


def connection_floor(doc: Doc) -> Iterator[str]:
    """P411: the no-battery threshold is no lower than a dead cell (BU-808a: never revive
    lithium below 1.5 V/cell), and a lithium pre-charge covers every cell below the
    chemistry's discharge cut-off (BU-808a: pre-charge at about 0.1 C)."""
    limits = LIMITS.get(doc["battery"]["chemistry"])
    cells = doc.get("cells_in_series") or 1
    if limits is None:
        return
    none = {f["name"]: f for f in doc["faults"]}.get("no_battery", {}).get("below_voltage_mV")
    floor = limits.dead_cell_min_mV * cells
    if none is not None and none < floor:
        yield (f"P411: no_battery.below_voltage_mV {none} is below {floor} mV "
               f"({limits.dead_cell_min_mV} mV/cell): a dead {limits.chemistry} battery would "
               "be charged; raise it to at least that")
    if limits.precharge_cell_min_mV is not None:
        below, floor = doc["precharge"]["below_voltage_mV"], limits.precharge_cell_min_mV * cells
        if below < floor:
            yield (f"P411: precharge.below_voltage_mV {below} is below {floor} mV "
                   f"({limits.precharge_cell_min_mV} mV/cell): a deeply discharged "
                   f"{limits.chemistry} battery would get the full current; raise it")


def lithium_restart(doc: Doc) -> Iterator[str]:
    """P412: a lithium restart lies well below the charge voltage and waits for the battery
    to rest (charger-IC practice: about 100 mV/cell below regulation, from memory; BU-409:
    no trickle or float charge)."""
    limits = LIMITS.get(doc["battery"]["chemistry"])
    if limits is None or limits.restart_below_cell_min_mV is None:
        return
    restart, cells = doc["restart"], doc.get("cells_in_series") or 1
    top = max(stage["voltage_mV"] for stage in doc["stages"])
    highest = top - limits.restart_below_cell_min_mV * cells
    if restart["voltage_mV"] > highest:
        yield (f"P412: restart.voltage_mV {restart['voltage_mV']} is within "
               f"{limits.restart_below_cell_min_mV} mV/cell of the {top} mV charge voltage: a "
               f"full battery would be topped up again and again; set it at most {highest}")
    if restart["filter_s"] < limits.restart_filter_min_s:
        yield (f"P412: restart.filter_s {restart['filter_s']} is below "
               f"{limits.restart_filter_min_s} s: the voltage must rest below the restart "
               "before a new charge")


PROGRAM_CHECKS: tuple[Callable[[Doc], Iterator[str]], ...] = (
    stage_kinds,
    precharge_below_charge,
    precharge_timer,
    timers_beyond_exits,
    caps_on_rated_capacity,
    restart_rule,
    faults_complete,
    connection_thresholds,
    hysteresis_window,
    lead_acid_guards,
    connection_floor,
    lithium_restart,
)

#: The program rules that also hold for a version-3 document, which has no program blocks:
#: a version-3 file may not carry what version 4 forbids (operator-requested stages run
#: automatically, a timer no longer than its stage's duration, an Ah cap outside its range,
#: lead-acid without its fault guards), or rewriting "version": 4 as 3 would escape them.
VERSION_3_CHECKS: tuple[Callable[[Doc], Iterator[str]], ...] = (
    timers_beyond_exits,
    caps_on_rated_capacity,
    lead_acid_guards,
)


def program_violations(doc: Doc) -> list[str]:
    """Every way the version-4 ``doc`` breaks a program rule (empty when none); for a
    version-3 document, the rules of :data:`VERSION_3_CHECKS` and no automatic
    equalization or desulfation, each finding ending with the fix (write it again)."""
    if not doc.get("stages"):
        return ["P401: a program has no stages"]
    if doc.get("version") == 3:
        found = [f"P401: stage {n} ({stage['kind']}) is operator-requested: a version-3 "
                 "document would run it automatically"
                 for n, stage in enumerate(doc["stages"], 1) if stage["kind"] in _OPERATOR_STAGES]
        found += [finding for check in VERSION_3_CHECKS for finding in check(doc)]
        return [f"{finding} (version 3; write the document again as version 4 with "
                "'chargeplan plan')" for finding in found]
    return [finding for check in PROGRAM_CHECKS for finding in check(doc)]
