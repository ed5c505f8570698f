"""`chargeplan check` against mutants: every numeric field of a valid document and of a valid
image, moved 10 % toward danger one at a time, with the digest or CRC recomputed.

"Toward danger" per field (DANGER below): voltages, currents, timers, durations, capacities,
cells and guard thresholds up (more energy in, or a fault found later); tail currents down
(the stage ends later); temperature minima and the cool zone's boundary down (charging
allowed colder, the cut covering less); maxima and the warm zone's boundary up; the
compensation coefficient larger in size (more voltage in the cold); its clamp range wider;
the planned temperature up (compensated firmware adds more voltage below it). 10 % is of the
value's size, at least one unit (one kelvin for temperatures).

A mutant that crosses a limit must exit 1 (or 2 where no field of the image or header can
hold it). Fields whose 10 % move crosses no limit the checker can know are listed in
NO_LIMIT with the reason; the test lists every mutant that passes and fails on any not
listed there, and on any NO_LIMIT entry that no longer passes (a stale reason).
"""

from __future__ import annotations

import copy
import fnmatch
import json
import math
from typing import Any

import pytest
from hypothesis import assume, given, settings

from chargeplan.api import load_battery_file, program_file
from chargeplan.demo import example_paths
from chargeplan.errors import InputError
from chargeplan.firmware import image
from chargeplan.firmware.check import check_document, check_file
from chargeplan.firmware.limits import LIMITS
from chargeplan.firmware.setpoints import compute_digest, encode

from .test_properties import battery_files

CHEMISTRIES = ("flooded", "agm", "gel", "lifepo4", "nmc")

#: (path pattern, +1 up / -1 down). The first matching pattern wins.
DANGER: list[tuple[str, int]] = [
    ("*.exits[*].current_below.current_mA", -1),  # tail current: the stage ends later
    ("interlocks.charge_temperature_min_dC", -1),
    ("interlocks.cool_zone.below_dC", -1),
    ("temperature_compensation.range_min_dC", -1),
    ("temperature_compensation.reference_dC", -1),
    ("temperature_compensation.coefficient_uV_per_K_per_cell", -1),  # negative: larger size
    ("*", +1),
]

#: Mutants that pass, and why no limit is crossed. Keys: (chemistry or "*", path pattern).
NO_LIMIT: dict[tuple[str, str], str] = {
    ("*", "stages[*].estimated_duration_s"): "an estimate, not a limit; only a timer shorter "
    "than it is refused",
    ("*", "stages[*].charge_mAh"): "an estimate, not a limit",
    ("*", "stages[*].energy_mWh"): "an estimate, not a limit",
    ("*", "planned_temperature_dC"): "any temperature inside the window may be planned; "
    "compensation is bounded by its clamp range and the voltage interlock",
    ("*", "temperature_table.step_dC"): "the step only spaces the rows; between rows firmware "
    "takes the lower value of each column",
    ("*", "temperature_table.rows[*].temperature_dC"): "a row may sit anywhere in the window "
    "(rows at refused temperatures are left out); its limits are checked at its temperature",
    ("*", "stages[*].timer_s"): "a timer 10 % longer stays inside every sourced limit (lead-acid "
    "dwell at most 48 h, BU-403; a lithium constant-voltage stage at most 4 h, BU-409, and a "
    "lithium bulk timer at most 2 x the capacity at its lowest current)",
    ("*", "stages[*].exits[*].current_below.current_mA"): "a tail current 10 % lower stays above "
    "the smallest sensible tail (BU-403 0.5 % of C lead-acid, BU-409 1 % of C lithium)",
    ("*", "interlocks.current_max_mA"): "the current interlock may sit above the stage currents, "
    "up to the chemistry's C-rate and the channel's maximum",
    ("*", "interlocks.cool_zone.current_max_mA"): "inside the sourced cool-zone limit (lead-acid "
    "0.3 It below 0 degC, BU-410; NMC 0.5 It, JEITA)",
    ("*", "temperature_table.rows[*].current_max_mA"): "a row's current may reach the "
    "chemistry's C-rate (rows outside the cool zone are not cut)",
    ("*", "temperature_compensation.range_max_dC"): "the clamp's warm end only lowers voltages "
    "further (a negative coefficient)",
    ("*", "temperature_compensation.range_min_dC"): "a wider cold clamp is bounded by the voltage "
    "interlock, which firmware never exceeds",
    ("*", "temperature_compensation.reference_dC"): "the reference is informative: compensation "
    "runs from the planned temperature",
    ("*", "temperature_compensation.coefficient_uV_per_K_per_cell"): "-3.3 mV/K/cell lies inside "
    "the sourced -3 to -5 (BU-410), with its margin",
    ("flooded", "interlocks.charge_temperature_min_dC"): "the flooded minimum sits at the "
    "electrolyte's freezing point (-15.6 degC here), above the -20 degC limit (BU-410)",
    ("agm", "interlocks.charge_temperature_min_dC"): "above the -20 degC limit (BU-410): a "
    "program's minimum sits at a flat battery's freezing point",
    ("gel", "interlocks.charge_temperature_min_dC"): "above the -20 degC limit (BU-410): a "
    "program's minimum sits at a flat battery's freezing point",
    ("*", "precharge.timer_s"): "a pre-charge timer 10 % longer puts in far less than the rated "
    "capacity (P403); a switched-off lead-acid block (0 mV, 0 mA) stays off",
    ("*", "precharge.below_voltage_mV"): "still below the first stage (P402): the pre-charge "
    "runs a little longer at its small current",
    ("*", "precharge.current_mA"): "still at most the first stage's current and the cool zone's "
    "(P402)",
    ("*", "restart.float_below.filter_s"): "a longer filter only delays a restart: less "
    "charging, not more",
    ("*", "restart.rest_below.filter_s"): "a longer filter only delays a restart: less "
    "charging, not more",
    ("*", "faults[*].below_voltage_mV"): "a higher no-battery threshold only refuses more "
    "batteries: less charging, not more",
    ("*", "faults[*].above_voltage_mV"): "a higher cell-count threshold stays below the voltage "
    "interlock (P408), which still trips",
    ("*", "hysteresis.temperature_margin_dK"): "a wider margin resumes further inside the window: "
    "safer, not less safe",
    ("*", "hysteresis.voltage_filter_s"): "one second more stays within P409's few seconds "
    "(protection-IC practice, about 1 s, from memory)",
    ("lifepo4", "battery.nominal_voltage_mV"): "13.2 V is within the 8 % a trade name may sit "
    "from 4 x 3.2 V (common practice: 12.8 V LiFePO4 is sold as 12 V)",
    ("lifepo4", "stages[*].voltage_mV"): "this charge stops at the storage voltage, 3.28 V/cell; "
    "10 % more is 3.61 V/cell, still inside the 3.65 V/cell maximum",
    ("lifepo4", "temperature_table.rows[*].charge_voltage_mV"): "as the stage voltage: 3.61 "
    "V/cell is inside the 3.65 V/cell maximum",
    ("nmc", "interlocks.warm_zone.above_dC"): "44 degC is inside JEITA's 45 degC warm-zone "
    "boundary (the profile's 40 degC is tighter, common practice)",
}


def _leaves(node: Any, path: str = "") -> list[tuple[str, tuple]]:
    """Every integer leaf: (display path, key path). An exit's path names its condition."""
    out: list[tuple[str, tuple]] = []
    if isinstance(node, dict):
        for key, value in node.items():
            if key == "digest":
                continue
            shown = f"{path}.{key}" if path else key
            if "condition" in node and key not in ("condition", "then"):
                shown = f"{path}.{node['condition']}.{key}"
            out += [(s, (key, *k)) for s, k in _leaves(value, shown)]
    elif isinstance(node, list):
        for n, value in enumerate(node):
            out += [(s, (n, *k)) for s, k in _leaves(value, f"{path}[{n}]")]
    elif isinstance(node, int) and not isinstance(node, bool):
        out.append((path, ()))
    return out


def _generic(path: str) -> str:
    """The path with its list indices as '#', as the patterns write '[*]'."""
    import re

    return re.sub(r"\[\d+\]", "#", path)


def _match(path: str, pattern: str) -> bool:
    return fnmatch.fnmatchcase(_generic(path), pattern.replace("[*]", "#"))


def _direction(path: str) -> int:
    return next(sign for pattern, sign in DANGER if _match(path, pattern))


def _moved(value: int, path: str) -> int:
    unit = 10 if path.endswith(("_dC", "_dK")) else 1
    step = max(math.ceil(abs(value) * 0.10), unit)
    return value + _direction(path) * step


def _set(doc: dict, keys: tuple, value: int) -> None:
    node = doc
    for key in keys[:-1]:
        node = node[key]
    node[keys[-1]] = value


def _outcome(tmp_path, doc: dict, kind: str, battery) -> int:
    path = tmp_path / f"mutant.{kind}"
    try:
        if kind == "json":
            path.write_text(json.dumps(dict(doc, digest=compute_digest(doc))))
        else:
            path.write_bytes(image.encode(doc))
        report = check_file(path, battery_file=battery)
    except InputError:
        return 2
    return 0 if report.ok else 1


def _allowed(chemistry: str, path: str) -> str | None:
    for (chem, pattern), reason in NO_LIMIT.items():
        if chem in ("*", chemistry) and _match(path, pattern):
            return reason
    return None


def _specific_first() -> None:
    """NO_LIMIT is searched in order: chemistry-specific entries are the reasons; a '*' entry
    with the same pattern would hide a chemistry that should fail, so none may overlap."""
    patterns = [pattern for chem, pattern in NO_LIMIT if chem != "*"]
    assert not {pattern for chem, pattern in NO_LIMIT if chem == "*"} & set(patterns)


@pytest.mark.parametrize("kind", ["json", "image"])
def test_every_mutant_toward_danger_fails_or_is_listed(tmp_path, kind):
    _specific_first()
    passing, used = [], set()
    for index, chemistry in enumerate(CHEMISTRIES):
        source = example_paths()[index]
        battery = load_battery_file(source)
        doc = encode(program_file(source))
        if kind == "image":
            doc = image.decode(image.encode(doc))
        assert _outcome(tmp_path, doc, kind, battery) == 0, chemistry
        for shown, keys in _leaves(doc):
            mutant = copy.deepcopy(doc)
            node = doc
            for key in keys[:-1]:
                node = node[key]
            before = node[keys[-1]]
            moved = _moved(before, shown)
            _set(mutant, keys, moved)
            if _outcome(tmp_path, mutant, kind, battery) != 0:
                continue
            reason = _allowed(chemistry, shown)
            if reason is None:
                passing.append(f"{chemistry} {kind} {shown}: {before} -> {moved}")
            else:
                used.add(reason)
    assert not passing, "mutants toward danger that pass the checker:\n" + "\n".join(passing)
    if kind == "json":
        stale = set(NO_LIMIT.values()) - used
        assert not stale, f"NO_LIMIT reasons no mutant needs any more: {sorted(stale)}"


def test_the_checkers_table_matches_the_profiles_hard_envelopes():
    """The checker's own limits (chargeplan/firmware/limits.py) are the bundled profiles'
    hard envelopes, number for number, and never looser where they add a rule."""
    from chargeplan.profiles import hard_envelope

    for chemistry in CHEMISTRIES:
        mine, env = LIMITS[chemistry], hard_envelope(chemistry)
        assert mine.cell_max_mV == round(env.cell_voltage_max_v * 1000)
        assert mine.current_max_it == pytest.approx(env.max_current_it)
        assert mine.charge_min_dC == round(env.charge_temperature_min_c * 10)
        assert mine.charge_max_dC == round(env.charge_temperature_max_c * 10)
        assert set(env.forbidden_stages) <= mine.forbidden_stages
        if env.cool_zone_below_c is not None and mine.cool_below_dC is not None:
            assert mine.cool_below_dC <= round(env.cool_zone_below_c * 10)
            assert env.cool_zone_current_it <= mine.cool_current_it + 1e-9
        if env.warm_zone_above_c is not None:
            assert mine.warm_above_dC >= round(env.warm_zone_above_c * 10)
            assert env.warm_zone_cell_v * 1000 <= mine.warm_cell_max_mV


def test_the_checkers_guard_bounds_pass_the_bundled_profiles_guards():
    """P410's bounds (firmware/limits.py) are the loosest lead-acid guards a program may
    carry: the bundled profiles' termination blocks (whose reasoning they repeat) sit inside
    them, and lithium has neither."""
    from chargeplan.profiles import load_builtin

    for chemistry in CHEMISTRIES:
        mine, term = LIMITS[chemistry], load_builtin(chemistry).termination
        if mine.lithium:
            assert term is None and mine.guard_cap_it is None
            continue
        assert term.charge_cap.value <= mine.guard_cap_it
        assert term.temperature_rise.value * 10 <= mine.guard_rise_max_dK
        assert term.current_rise.value <= mine.guard_current_rise_max_it + 1e-12


def test_the_checkers_stage_bounds_hold_the_bundled_profiles():
    """The bounds CK315-CK317, P411 and P412 add (firmware/limits.py, each sourced there) are
    the loosest a program may carry: the bundled profiles' own values (sourced in profiles/)
    sit inside them, so the rules' programs pass."""
    from chargeplan.firmware.charge_program import (
        LITHIUM_RESTART_BELOW_V_CELL,
        LITHIUM_RESTART_FILTER_S,
        TIMER_BEYOND_EXIT,
    )
    from chargeplan.profiles import load_builtin

    for chemistry in CHEMISTRIES:
        mine, profile = LIMITS[chemistry], load_builtin(chemistry)
        c, rest = profile.charge, profile.rest_voltage
        assert rest.dead_below.value * 1000 >= mine.dead_cell_min_mV, chemistry
        if not mine.lithium:
            assert c.absorption_voltage.value * 1000 <= mine.charge_cell_max_mV, chemistry
            assert c.float_voltage.value * 1000 <= mine.hold_cell_max_mV, chemistry
            assert c.storage_voltage.value * 1000 <= mine.hold_cell_max_mV, chemistry
            continue
        assert c.absorption_time_max.value * TIMER_BEYOND_EXIT <= mine.cv_timer_max_s
        assert c.storage_voltage.value * 1000 <= mine.storage_cell_max_mV, chemistry
        assert c.precharge_below.value * 1000 >= mine.precharge_cell_min_mV, chemistry
        assert LITHIUM_RESTART_BELOW_V_CELL * 1000 >= mine.restart_below_cell_min_mV
        assert LITHIUM_RESTART_FILTER_S >= mine.restart_filter_min_s


def test_checks_run_one_at_a_time():
    """Each check is a function on its own: a violation of one rule comes from its check."""
    from chargeplan.firmware import check as module

    doc = encode(program_file(example_paths()[4]))
    doc["interlocks"]["warm_zone"] = None
    subject = module.Subject(doc, "json", LIMITS["nmc"], doc["battery"]["capacity_mAh"])
    assert list(module.locks_warm_zone(subject)) == ["the nmc warm zone is missing"]
    assert list(module.locks_cool_zone(subject)) == []
    assert [v.code for v in check_document(doc)] == ["CK407"]


@settings(max_examples=200, deadline=None)
@given(data=battery_files())
def test_every_plan_the_rules_make_passes_the_checker(data):
    """No false refusals: any program the rules emit (with its estimate and temperature table)
    passes the independent checker with its battery file, as JSON and as an image."""
    from chargeplan.errors import PlanRefused
    from chargeplan.firmware.charge_program import program_plan
    from chargeplan.model.battery import BatteryFile

    battery_file = BatteryFile.model_validate(data)
    try:
        plan = program_plan(battery_file)
    except (PlanRefused, InputError):
        assume(False)
    doc = encode(plan)
    assert check_document(doc, battery_file=battery_file) == []
    back = image.decode(image.encode(doc))
    assert check_document(back, battery_file=battery_file, kind="image") == []


def test_the_contributor_guide_lists_every_check():
    from pathlib import Path

    from chargeplan.firmware.check import CHECKS, FORM_CHECKS

    guide = (Path(__file__).resolve().parent.parent / "DEVELOPERS.md").read_text()
    for check in FORM_CHECKS + CHECKS:
        assert f"| {check.code} | `{check.__name__}` |" in guide, check.code


def _doc(index: int) -> dict:
    return encode(program_file(example_paths()[index]))


def _battery(index: int, **overrides):
    """The example's battery file, with maker overrides given as their model values."""
    battery = load_battery_file(example_paths()[index])
    if not overrides:
        return battery
    new = battery.battery.overrides.model_copy(update=overrides)
    return battery.model_copy(update={"battery": battery.battery.model_copy(
        update={"overrides": new})})


def _maker_current(text: str):
    from chargeplan.model.battery import Overrides

    return Overrides.model_validate({"max_charge_current": text}).max_charge_current


def _channel(**fields):
    from chargeplan.model.charger import ChargerChannel

    return ChargerChannel.model_validate({"max_voltage": "16 V", "max_current": "10 A",
                                          **fields})


F, A, G, L, N = range(5)


def _relabelled_battery(index: int, chemistry: str):
    """The example's battery file with its chemistry renamed (a user profile's id)."""
    battery = load_battery_file(example_paths()[index])
    return battery.model_copy(update={"battery": battery.battery.model_copy(
        update={"chemistry": chemistry})})


def _rows(change):
    return lambda d: [change(row) for row in d["temperature_table"]["rows"]]


def _edit(index, change, **given):
    def build():
        doc = copy.deepcopy(_doc(index))
        change(doc)
        return doc, {k: v() for k, v in given.items()}
    return build


def _put(path, value):
    def change(doc):
        node = doc
        for key in path[:-1]:
            node = node[key]
        node[path[-1]] = value
    return change


#: One hand edit per check, that the check alone must find (and not find before the edit).
ONE_EACH = {
    "CK101": _edit(N, _put(("version",), 99)),
    "CK102": _edit(N, _put(("stages",), [])),
    "CK103": _edit(N, _put(("cells_in_series",), 0)),
    "CK104": _edit(N, _put(("finish",), "forever")),
    "CK105": _edit(N, _put(("stages", 0, "current_mA"), 0)),
    "CK201": _edit(F, _put(("battery", "cells_in_series"), 7)),
    "CK202": _edit(F, _put(("battery", "nominal_voltage_mV"), 24000)),
    "CK203": _edit(L, _put(("battery", "chemistry"), "nmc")),
    "CK301": _edit(L, lambda d: d["stages"].append({**d["stages"][-1], "kind": "float"})),
    "CK302": _edit(F, lambda d: d["stages"].reverse()),
    "CK303": _edit(F, _put(("stages", 1, "voltage_mV"), 17000)),
    "CK304": _edit(F, _put(("stages", 1, "voltage_mV"), 2450)),
    "CK305": _edit(F, _put(("stages", 0, "current_mA"), 99999)),
    "CK306": _edit(F, _put(("stages", 0, "current_mA"), 4900)),
    "CK307": _edit(N, _put(("stages", 1, "timer_s"), None)),
    "CK308": _edit(F, _put(("stages", 1, "timer_s"), 10)),
    "CK309": _edit(F, _put(("stages", 1, "timer_s"), 3 * 86400)),
    "CK310": _edit(F, _put(("stages", 0, "exits", 0, "voltage_mV"), 16000)),
    "CK311": _edit(N, lambda d: d["stages"].insert(0, {**d["stages"][0], "kind": "precharge",
                                                       "current_mA": 3000})),
    "CK312": _edit(F, _put(("stages", 2, "voltage_mV"), 15006)),
    "CK313": _edit(N, _put(("finish",), "hold")),
    "CK314": _edit(L, _put(("stages", 0, "current_mA"), 21000)),
    # float at 2.498 V/cell, still below absorption (so CK312 passes): BU-403 floats at
    # 2.25-2.27 V/cell
    "CK315": _edit(F, _put(("stages", 2, "voltage_mV"), 14990)),
    # BU-409: no float for lithium; the constant-voltage stage ends within hours
    "CK316": _edit(N, _put(("stages", 1, "timer_s"), 4_000_000_000)),
    # BU-702: store lithium at 40-50 %, not at 3.65 V/cell
    "CK317": _edit(L, _put(("stages", 1, "voltage_mV"), 14600)),
    "CK401": _edit(F, _put(("interlocks", "charge_temperature_min_dC"), 600)),
    "CK402": _edit(L, _put(("interlocks", "charge_temperature_min_dC"), -50)),
    "CK403": _edit(N, _put(("interlocks", "cell_voltage_max_mV"), 4300)),
    "CK404": _edit(N, _put(("interlocks", "battery_voltage_max_mV"), 12700)),
    "CK405": _edit(N, _put(("interlocks", "current_max_mA"), 6000)),
    "CK406": _edit(L, _put(("interlocks", "cool_zone"), None)),
    "CK407": _edit(N, _put(("interlocks", "warm_zone"), None)),
    "CK501": _edit(N, _put(("stages", 0, "compensated"), True)),
    "CK502": _edit(F, _put(("temperature_compensation", "coefficient_uV_per_K_per_cell"), 3000)),
    "CK503": _edit(F, _put(("temperature_compensation",), None)),
    # BU-410: lead-acid is compensated (about -3 mV/K/cell)
    "CK504": _edit(A, lambda d: [st.update(compensated=False) for st in d["stages"]]),
    # the range written in degC instead of dC (BU-410: compensate up to 50 degC)
    "CK505": _edit(A, lambda d: d["temperature_compensation"].update(range_min_dC=-20,
                                                                      range_max_dC=50)),
    "CK601": _edit(F, lambda d: d["temperature_table"]["rows"].reverse()),
    "CK602": _edit(F, _put(("temperature_table", "rows", 0, "charge_voltage_mV"), 17000)),
    "CK603": _edit(L, _put(("temperature_table", "rows", 0, "current_max_mA"), 30000)),
    "CK604": _edit(F, _put(("temperature_table", "rows", 5, "hold_voltage_mV"), 16000)),
    "CK605": _edit(F, _put(("temperature_table", "rows", 5, "current_max_mA"), 5000)),
    # AGM held at 2.53 V/cell at every temperature (BU-403 float 2.25-2.27; BU-410: lower
    # when hot); no row rises with temperature, so CK605 passes
    "CK606": _edit(A, _rows(lambda r: r.update(charge_voltage_mV=15300, hold_voltage_mV=15200))),
    "CK701": _edit(L, _put(("battery", "chemistry"), "nmc"), battery_file=lambda: _battery(L)),
    "CK702": _edit(N, _put(("battery", "capacity_mAh"), 50000), battery_file=lambda: _battery(N)),
    "CK703": _edit(L, _put(("cells_in_series",), 5), battery_file=lambda: _battery(L)),
    "CK704": _edit(N, lambda d: None, battery_file=lambda: _battery(
        N, max_charge_current=_maker_current("1 A"))),
    "CK705": _edit(F, lambda d: None, battery_file=lambda: _battery(
        F, temperature_coefficient_mv_per_k_per_cell=-5.0)),
    "CK706": _edit(L, lambda d: None, battery_file=lambda: _relabelled_battery(L, "shed-lfp")),
    "CK801": _edit(N, lambda d: None, channel=lambda: _channel(max_voltage="12 V")),
    "CK802": _edit(N, lambda d: None, channel=lambda: _channel(max_current="2 A")),
    "CK803": _edit(N, lambda d: None, channel=lambda: _channel(voltage_step="0.25 V")),
}


def test_every_check_has_its_own_case():
    from chargeplan.firmware.check import CHECKS, FORM_CHECKS

    assert {check.code for check in FORM_CHECKS + CHECKS} == set(ONE_EACH)


@pytest.mark.parametrize("code", sorted(ONE_EACH))
def test_each_check_on_its_own(code):
    from chargeplan.firmware.check import CHECKS, FORM_CHECKS, subject_for

    check = next(c for c in FORM_CHECKS + CHECKS if c.code == code)
    doc, given = ONE_EACH[code]()
    found = list(check(subject_for(doc, **given)))
    assert found, f"{code} found nothing in its case"
    assert all(isinstance(line, str) and line for line in found)
    # the unedited example passes the same check (against its own battery file, or a channel
    # that can run it, where those are what the check reads)
    index = next(i for i in range(5) if _doc(i)["battery"]["name"] == doc["battery"]["name"])
    clean = {"battery_file": _battery(index)} if code.startswith("CK7") else {}
    if code.startswith("CK8"):
        clean = {"channel": _channel()}
    assert list(check(subject_for(_doc(index), **clean))) == []


def test_the_checker_shares_no_code_with_the_rules_or_the_profiles():
    """Checking a document against its battery file and channel loads nothing of the rules
    engine, the profiles, the safety check or the estimate (a fresh interpreter)."""
    import subprocess
    import sys
    from pathlib import Path

    corpus = Path(__file__).parent / "corpus"
    script = f"""
import sys
from chargeplan.firmware.check import check_file, load_channel_file
from chargeplan.loading import read_mapping, validate
from chargeplan.model.battery import BatteryFile
path = {str(example_paths()[4])!r}
battery = validate(BatteryFile, read_mapping(path, what="battery"), file=path)
channel = load_channel_file({str(corpus / "channel" / "good-channel.yaml")!r})
for name in ("lithium-no-timers.json", "nmc-warm-zone-removed.json"):
    assert not check_file({str(corpus / "setpoints")!r} + "/" + name, battery_file=battery,
                          channel=channel).ok
print(" ".join(sorted(m for m in sys.modules if m.startswith((
    "chargeplan.engine", "chargeplan.profiles", "chargeplan.safety", "chargeplan.estimate")))))
"""
    out = subprocess.run([sys.executable, "-c", script], check=True, capture_output=True,
                         text=True).stdout
    assert out.strip() == ""


# --- hand edits that loosen a guard without crossing a single field's limit ----------------


def _lfp_hold_forever(d):
    hold = d["stages"][1]
    hold.update(voltage_mV=14600, exits=[], timer_s=4_000_000_000)


def _nmc_storage_hold_appended(d):
    absorption = d["stages"][1]
    for e in absorption["exits"]:
        e["then"] = "next"
    d["stages"].append({**absorption, "kind": "storage_hold", "voltage_mV": 12600, "exits": [],
                        "timer_s": 4_000_000_000})


def _nmc_absorption_tail_only(d):
    d["stages"][1].update(exits=[{"condition": "current_below", "current_mA": 50,
                                  "then": "stop"}], timer_s=4_294_967_294)


def _lithium_bulk_timer(d):
    d["stages"][0]["timer_s"] = 4_000_000_000


def _flooded_float_high(d):
    for st in d["stages"]:
        st["voltage_mV"] = 16000 if st["kind"] == "float" else 16020
        for e in st["exits"]:
            if e["condition"] == "voltage_reached":
                e["voltage_mV"] = 16020
    d["stages"][2]["timer_s"] = None
    for row in d["temperature_table"]["rows"]:
        row.update(charge_voltage_mV=16020, hold_voltage_mV=16000)


def _agm_no_compensation(d):
    d["temperature_compensation"] = None
    for st in d["stages"]:
        st["compensated"] = False


def _lfp_table_one_it(d):
    for row in d["temperature_table"]["rows"]:
        if row["temperature_dC"] >= 100:
            row["current_max_mA"] = 100_000


def _version_3_with_equalization(d):
    """The tester's downgrade: version 3, no program blocks, no fault guards, and an
    automatic equalization at 2.67 V/cell for 3 h between absorption and float."""
    d["version"] = 3
    for key in ("precharge", "restart", "faults", "hysteresis"):
        d.pop(key)
    for st in d["stages"]:
        st["exits"] = [e for e in st["exits"] if e["then"] != "fault"]
    d["stages"].insert(2, {**d["stages"][1], "kind": "equalization", "voltage_mV": 16020,
                           "timer_s": 3 * 3600, "estimated_duration_s": None,
                           "charge_mAh": None, "energy_mWh": None, "exits": [
                               {"condition": "duration", "duration_s": 3 * 3600 - 60,
                                "then": "next"}]})


#: (example, edit, what is given besides the file, codes that must all be found). Each is
#: one class of the hand edits a test of the checker found passing; the source of each
#: bound is beside it in chargeplan/firmware/limits.py.
HOSTILE = {
    # BU-409 / BU-808a: no float for lithium; end on the tail or a set time
    "lithium storage hold at 3.65 V/cell with no exits": (L, _lfp_hold_forever, {},
                                                          {"CK316", "CK317"}),
    "NMC storage hold at 4.2 V/cell appended": (N, _nmc_storage_hold_appended, {},
                                                {"CK316", "CK317"}),
    "NMC absorption with a 136-year timer": (N, _nmc_absorption_tail_only, {}, {"CK316"}),
    "lithium bulk timer of 126 years": (L, _lithium_bulk_timer, {}, {"CK316"}),
    # BU-403: float 2.25-2.27 V/cell; 2.67 V/cell is equalization
    "flooded charged and floated at 2.67 V/cell": (F, _flooded_float_high, {},
                                                   {"CK315", "CK606"}),
    # BU-410: lower the voltage when hot
    "AGM table flat at 2.55/2.53 V/cell to 50 degC": (
        A, _rows(lambda r: r.update(charge_voltage_mV=15300, hold_voltage_mV=15200)), {},
        {"CK606"}),
    "AGM without compensation": (A, _agm_no_compensation, {}, {"CK504"}),
    "AGM compensation range 20-21 degC": (
        A, lambda d: d["temperature_compensation"].update(range_min_dC=200, range_max_dC=210),
        {}, {"CK505"}),
    # BU-808a: never revive lithium below 1.5 V/cell; pre-charge a deeply discharged pack
    "LiFePO4 no-battery threshold 1 mV": (
        L, lambda d: d["faults"][-2].update(below_voltage_mV=1), {}, {"P411"}),
    "LiFePO4 pre-charge only below 1.0 V/cell": (
        L, lambda d: (d["faults"][-2].update(below_voltage_mV=4000),
                      d["precharge"].update(below_voltage_mV=4001)), {}, {"P411"}),
    # charger-IC practice (from memory): restart about 100 mV/cell below regulation
    "NMC restart 1 mV below full, no filter": (
        N, lambda d: d["restart"].update(voltage_mV=12599, filter_s=0), {}, {"P412"}),
    # a downgrade to version 3 may not remove the guards or add an automatic equalization
    "flooded rewritten as version 3 with equalization": (
        F, _version_3_with_equalization, {}, {"P401", "P410"}),
}


def _codes(tmp_path, doc: dict, kind: str, **given) -> set[str]:
    path = tmp_path / f"edited.{kind}"
    if kind == "json":
        path.write_text(json.dumps(dict(doc, digest=compute_digest(doc))))
    else:
        path.write_bytes(image.encode(doc))
    return {v.code for v in check_file(path, **given).violations}


def _example_index(doc: dict) -> int:
    return next(i for i in range(5) if _doc(i)["battery"]["name"] == doc["battery"]["name"])


#: image format 1 (version 3) is read, never written, by chargeplan: that edit is JSON only
_HOSTILE_CASES = [(name, kind) for name in sorted(HOSTILE) for kind in ("json", "image")
                  if not (kind == "image" and "version 3" in name)]


@pytest.mark.parametrize(("name", "kind"), _HOSTILE_CASES)
def test_hand_edits_that_loosen_a_guard_are_refused(tmp_path, name, kind):
    index, change, given, codes = HOSTILE[name]
    given = {key: make() for key, make in given.items()}
    doc = _doc(index)
    assert _codes(tmp_path, doc, kind, **given) == set(), "the unedited example must pass"
    change(doc)
    found = _codes(tmp_path, doc, kind, **given)
    assert codes <= found, f"{name}: found {sorted(found)}"


def _user_profile(tmp_path, chemistry="lifepo4", pid="shed-lfp"):
    """A user profile: the bundled one under its own id (DEVELOPERS.md "A user profile")."""
    from chargeplan.profiles import data_dir

    text = (data_dir("profiles") / f"{chemistry}.yaml").read_text()
    folder = tmp_path / "profiles"
    folder.mkdir()
    (folder / f"{pid}.yaml").write_text(text.replace(f"id: {chemistry}", f"id: {pid}", 1))
    return folder


def test_a_user_profile_battery_is_held_to_its_chemistry(tmp_path):
    """README: with --battery the limits follow the battery file's chemistry; a user
    profile's is the built-in chemistry it names (read from --profiles), so an LFP pack
    relabelled as NMC at 4.1 V/cell is refused, and without --profiles nothing passes."""
    from chargeplan.api import program_file
    from chargeplan.profiles import ProfileSet

    folder = _user_profile(tmp_path)
    battery_path = tmp_path / "pack.yaml"
    battery_path.write_text("battery: {name: Launch house pack, chemistry: shed-lfp, "
                            "cells_in_series: 4, capacity: 100 Ah}\n"
                            "conditions: {battery_temperature: 20 degC}\n")
    battery = load_battery_file(battery_path)
    doc = encode(program_file(battery_path, profiles=ProfileSet([folder])))
    path = tmp_path / "shed.json"
    path.write_text(json.dumps(doc))
    assert check_file(path, battery_file=battery, profiles=[folder]).ok
    assert {v.code for v in check_file(path, battery_file=battery).violations} == {"CK706"}

    b, lock = doc["battery"], doc["interlocks"]
    b.update(chemistry="nmc", nominal_voltage_mV=14400)
    lock.update(cell_voltage_max_mV=4200, battery_voltage_max_mV=16800,
                warm_zone={"above_dC": 440, "cell_voltage_max_mV": 4150})
    for st in doc["stages"]:
        st["voltage_mV"] = 16400  # 4.1 V/cell, far above LFP's 3.65 (cell handling guidelines)
        for e in st["exits"]:
            if e["condition"] == "voltage_reached":
                e["voltage_mV"] = 16400
    for row in doc["temperature_table"]["rows"]:
        row["charge_voltage_mV"] = 16400
    doc["restart"]["voltage_mV"] = 16000
    doc["faults"][-1]["above_voltage_mV"] = 16800
    path.write_text(json.dumps(dict(doc, digest=compute_digest(doc))))
    found = {v.code for v in check_file(path, battery_file=battery, profiles=[folder])
             .violations}
    assert {"CK701", "CK303", "CK403"} <= found
    assert {v.code for v in check_file(path, battery_file=battery).violations} == {"CK706"}


def test_a_user_profile_envelope_tightens_the_limits(tmp_path):
    """A user profile may only tighten its chemistry's envelope: its own 3.60 V/cell then
    holds the document (DEVELOPERS.md: every user profile is held inside the envelope)."""
    from chargeplan.firmware.check import read_user_profiles

    folder = _user_profile(tmp_path)
    path = folder / "shed-lfp.yaml"
    path.write_text(path.read_text().replace("max_cell_voltage: {value: 3.65 V/cell",
                                             "max_cell_voltage: {value: 3.60 V/cell"))
    path.write_text(path.read_text()
                    .replace("charge_temperature_max: {value: 45 degC",
                             "charge_temperature_max: {value: 40 degC")
                    .replace("forbidden_stages: [equalization, desulfation]",
                             "forbidden_stages: [equalization, desulfation, storage_hold]"))
    found = read_user_profiles([folder])
    assert found["shed-lfp"].limits.cell_max_mV == 3600
    assert found["shed-lfp"].limits.charge_max_dC == 400
    assert "storage_hold" in found["shed-lfp"].limits.forbidden_stages
    assert found["shed-lfp"].chemistry == "lifepo4"
    loose = folder / "shed-lfp.yaml"
    loose.write_text(loose.read_text().replace("3.60 V/cell", "4.20 V/cell")
                     .replace("{value: 40 degC", "{value: 60 degC"))
    assert read_user_profiles([folder])["shed-lfp"].limits.cell_max_mV == 3650
    assert read_user_profiles([folder])["shed-lfp"].limits.charge_max_dC == 450


@pytest.mark.parametrize("kind", ["json", "image"])
def test_table_currents_are_held_to_the_maker_and_the_channel(tmp_path, kind):
    """README: firmware takes the lower value of each column of the table, so a row may not
    ask for more than the maker allows (CK704) or the channel gives (CK802): here 1 It on a
    battery whose maker allows 0.2 It, from a 30 A channel."""
    path = tmp_path / "maker.yaml"
    path.write_text("""battery:
  name: Launch house pack, berth 7
  chemistry: lifepo4
  nominal_voltage: 12 V
  capacity: 100 Ah
  overrides: {max_charge_current: 0.2 It}
conditions: {battery_temperature: 6 degC}
charger: {name: shed lithium channel, max_voltage: 15 V, max_current: 30 A, min_current: 0.5 A,
          temperature_probe: true, can_disable_high_voltage_stages: true}
""")
    battery = load_battery_file(path)
    doc = encode(program_file(path))
    assert _codes(tmp_path, doc, kind, battery_file=battery) == set()
    _lfp_table_one_it(doc)
    assert {"CK704", "CK802"} <= _codes(tmp_path, doc, kind, battery_file=battery)


def test_a_version_3_precharge_stage_does_not_loosen_the_lithium_bulk_timer():
    """CK316 bounds a lithium bulk timer at the lowest current the charge runs at; a
    version-3 pre-charge stage (0.1 It, its own timer; BU-808a) is not one of them, or its
    small current would allow a bulk timer of many hours more."""
    from chargeplan.firmware.check import stages_lithium_bounded, subject_for

    doc = _doc(N)
    doc["version"] = 3
    bulk = doc["stages"][0]
    precharge = {**bulk, "kind": "precharge", "voltage_mV": 9000, "current_mA": 50,
                 "timer_s": 5400, "exits": [{"condition": "voltage_reached",
                                             "voltage_mV": 9000, "then": "next"}]}
    doc["stages"].insert(0, precharge)
    # the lowest current after the pre-charge is the cool zone's 1250 mA: 2 x 5000 mAh
    # takes 28,800 s there; 40,000 s is refused, though at 50 mA it would take 200 h
    bulk["timer_s"] = 40_000
    found = list(stages_lithium_bounded(subject_for(doc)))
    assert any("stage 2 (bulk) timer 40000 s" in line for line in found), found
