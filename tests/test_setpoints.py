"""The setpoint document, a charge program (version 4): integers in the units their keys
name, rounded toward safety, valid against the committed schema, with a digest that detects
edits, and the program's own rules."""

from __future__ import annotations

import copy
import json

import pytest
from jsonschema import Draft202012Validator

from chargeplan.firmware.charge_program import program_plan
from chargeplan.firmware.setpoints import compute_digest, down, encode, up
from chargeplan.model.battery import BatteryFile
from chargeplan.render.text import render_text

from .conftest import REPO, battery, plan_of

SCHEMA = json.loads((REPO / "schemas" / "setpoints.schema.json").read_text())


def _program(data, **options):
    return program_plan(BatteryFile.model_validate(data), **options)


def _doc(**sections):
    return encode(_program(battery(**sections), estimate=False))


def test_rounding_helpers_round_toward_safety():
    assert down(14.9399, 1000) == 14939  # a voltage limit never rounds up
    assert down(14.94, 1000) == 14940  # float noise (14.940000000000001) is not a step
    assert up(0.1801, 1000) == 181  # a tail current rounds up: the stage ends earlier
    assert up(-15.71, 10) == -157  # a minimum temperature rounds up


def test_document_is_valid_and_integer():
    doc = _doc(conditions={"battery_temperature": "5 degC"}, state={"rest_voltage": "12.31 V"})
    Draft202012Validator(SCHEMA).validate(doc)  # jsonschema: the committed schema
    assert doc["format"] == "chargeplan-setpoints" and doc["version"] == 4
    for stage in doc["stages"]:
        assert isinstance(stage["voltage_mV"], int) and isinstance(stage["current_mA"], int)
    # BU-410 worked arithmetic: 2.43 x 6 + (-0.003 x 6 x (5 - 25)) = 14.94 V
    absorption = next(s for s in doc["stages"] if s["kind"] == "absorption")
    assert absorption["voltage_mV"] == 14940
    assert doc["temperature_compensation"]["coefficient_uV_per_K_per_cell"] == -3000


def test_integers_never_exceed_the_plan():
    plan = _program(battery(battery={"chemistry": "nmc", "nominal_voltage": None,
                                     "cells_in_series": 3, "capacity": "3.35 Ah"},
                            state={"rest_voltage": "11.2 V"},
                            conditions={"battery_temperature": "7.33 degC"}))
    doc = encode(plan)
    for stage, encoded in zip(plan.stages[1:], doc["stages"], strict=True):
        assert encoded["voltage_mV"] <= stage.voltage_v * 1000 + 1e-6
        assert encoded["current_mA"] <= stage.current_a * 1000 + 1e-6
    lock = doc["interlocks"]
    assert lock["charge_temperature_min_dC"] >= plan.interlocks.charge_temperature_min_c * 10
    assert lock["charge_temperature_max_dC"] <= plan.interlocks.charge_temperature_max_c * 10
    assert lock["cell_voltage_max_mV"] <= 4200  # BU-808: 4.20 V/cell


def test_digest_detects_an_edit():
    doc = _doc(state={"state_of_charge": "50 %"})
    assert doc["digest"] == compute_digest(doc)
    edited = copy.deepcopy(doc)
    edited["stages"][0]["voltage_mV"] += 1
    assert compute_digest(edited) != doc["digest"]


def test_digest_is_sha256_of_canonical_json():
    import hashlib

    doc = _doc()
    body = {k: v for k, v in doc.items() if k != "digest"}
    canonical = json.dumps(body, sort_keys=True, separators=(",", ":"), ensure_ascii=False)
    # hashlib.sha256 over the canonical form, as the document's contract says
    assert doc["digest"] == "sha256:" + hashlib.sha256(canonical.encode()).hexdigest()


@pytest.mark.parametrize("chemistry", ["flooded", "agm", "gel", "lifepo4", "nmc"])
def test_text_carries_the_cautions_and_the_deferral(chemistry):
    sections = {"battery": {"chemistry": chemistry, "nominal_voltage": None,
                            "cells_in_series": 4}}
    text = render_text(plan_of(battery(**sections)))
    assert "maker's datasheet, local codes or licensed practice" in text
    if chemistry in ("lifepo4", "nmc"):
        assert "thermal runaway" in text and "below 0 °C" in text
    else:
        assert "hydrogen" in text and "eye protection" in text and "frozen" in text


# --- version 4: a charge program ------------------------------------------------------
def _lithium(chemistry, cells, **sections):
    return battery(battery={"chemistry": chemistry, "nominal_voltage": None,
                            "cells_in_series": cells, "capacity": "20 Ah"}, **sections)


def test_program_does_not_depend_on_the_state():
    """Two batteries of one kind, one flat and one nearly full, get the same program; the
    printable plans still differ (the flat one is pre-charged, the full one is not)."""
    flat = battery(state={"rest_voltage": "10.2 V", "cells_verified": True})
    full = battery(state={"state_of_charge": "95 %"})
    assert _doc(**flat) == _doc(**full) == _doc()
    # NMC below about 3.0 V/cell is pre-charged now (BU-808a); the program is the same
    low = _lithium("nmc", 3, state={"rest_voltage": "8.4 V", "cells_verified": True})
    high = _lithium("nmc", 3, state={"state_of_charge": "90 %"})
    assert _doc(**low) == _doc(**high)
    assert plan_of(low).kinds != plan_of(high).kinds


def test_operator_stages_are_never_in_a_program():
    # IEEE 450-1987 cl. 4.4 equalization and a desulfation of a sulfated flooded battery
    # are in this battery's plan now, never in the program its charger runs by itself
    data = battery(battery={"chemistry": "flooded", "capacity": "60 Ah"},
                   state={"state_of_charge": "30 %", "capacity_test": "failed",
                          "equalize": True})
    kinds = {k.value for k in plan_of(data).kinds}
    assert "desulfation" in kinds  # with both warranted, equalization waits for a later charge
    doc = encode(_program(data, estimate=False))
    assert [s["kind"] for s in doc["stages"]] == ["bulk", "absorption", "float"]
    data["state"].pop("capacity_test")
    assert "equalization" in {k.value for k in plan_of(data).kinds}
    doc = encode(_program(data, estimate=False))
    assert [s["kind"] for s in doc["stages"]] == ["bulk", "absorption", "float"]


@pytest.mark.parametrize(("chemistry", "cells", "below_mV", "current_mA"), [
    ("nmc", 3, 3 * 3000, 2000),  # BU-808a: pre-charge below about 3.0 V/cell at 0.1 C
    ("lifepo4", 4, 4 * 2500, 2000),  # BU-808a, cell datasheets: LFP below about 2.5 V/cell
])
def test_precharge_is_always_present(chemistry, cells, below_mV, current_mA):
    doc = _doc(**_lithium(chemistry, cells, state={"state_of_charge": "80 %"}))
    pre = doc["precharge"]
    assert (pre["below_voltage_mV"], pre["current_mA"]) == (below_mV, current_mA)
    assert pre["timer_s"] > 0
    assert all(s["kind"] != "precharge" for s in doc["stages"])


def test_every_timer_is_longer_than_its_duration_exit():
    for data in (battery(), _lithium("nmc", 3), _lithium("lifepo4", 4),
                 battery(battery={"chemistry": "flooded"})):
        doc = _doc(**data)
        for stage in doc["stages"]:
            for e in stage["exits"]:
                if e["condition"] == "duration":
                    assert stage["timer_s"] > e["duration_s"], stage


def test_bulk_timer_covers_the_rated_capacity_in_the_cool_zone():
    # JEITA guideline (as in the NMC profile): 0.25 It below 10 degC; a program must still
    # charge a flat battery there before its bulk timer faults (the rated capacity at the
    # cool-zone current, with the profile's 1.02 charge factor)
    doc = _doc(**_lithium("nmc", 3))
    bulk = doc["stages"][0]
    cool = doc["interlocks"]["cool_zone"]["current_max_mA"]
    assert cool == 5000
    assert bulk["timer_s"] * cool / 3600 >= doc["battery"]["capacity_mAh"] * 1.02


def test_restart_values_per_chemistry():
    # charger-IC practice (common practice, from memory): Li-ion restarts about 100 mV per
    # cell below its regulation voltage; NMC regulates at 4.20 V/cell (BU-808)
    nmc = _doc(**_lithium("nmc", 3))["restart"]
    assert nmc == {"voltage_mV": 3 * 4100, "condition": "rest_below", "filter_s": 60}
    # LiFePO4 rests at 3.40 V/cell full (the profile's table), below 3.55 - 0.10: the 100 mV
    # rule would restart it on its own rest, so its table's 90 % rest voltage is used
    lfp = _doc(**_lithium("lifepo4", 4))["restart"]
    assert lfp["voltage_mV"] == 4 * 3340 and lfp["voltage_mV"] < 4 * 3400
    # lead-acid on float goes back to bulk below about 2.08-2.12 V/cell for a while
    # (common practice, from memory)
    lead = _doc()["restart"]
    assert lead["condition"] == "float_below" and 6 * 2080 <= lead["voltage_mV"] <= 6 * 2120
    assert lead["filter_s"] >= 60


def test_faults_cover_the_required_set_with_unique_codes():
    from chargeplan.firmware.faults import FAULT_CODES

    doc = _doc()
    codes = [f["code"] for f in doc["faults"]]
    assert len(codes) == len(set(codes)) and 0 not in codes
    names = {f["name"]: f for f in doc["faults"]}
    for name in ("over_voltage", "over_current", "temperature_low", "temperature_high",
                 "probe_open", "probe_short", "stage_timer", "charge_above", "current_rising",
                 "temperature_rise", "no_battery", "wrong_cell_count"):
        assert names[name]["code"] == FAULT_CODES[name]
    assert names["over_voltage"]["action"] == "latch"
    assert names["temperature_high"]["action"] == "pause"
    # a rested 6-cell lead-acid battery reads at most 2.30 V/cell (the profile's plausibility
    # limit, surface charge): above it, more cells
    assert names["wrong_cell_count"]["above_voltage_mV"] == 6 * 2300


def _signed(doc):
    doc["digest"] = compute_digest(doc)
    return doc


@pytest.mark.parametrize(("rule", "change"), [
    ("P402", lambda d: d["precharge"].__setitem__("current_mA", 99_999)),
    ("P403", lambda d: d["precharge"].__setitem__("timer_s", 10 * 86_400)),
    ("P404", lambda d: d["stages"][1].__setitem__("timer_s", 28_800)),
    ("P404", lambda d: d["stages"][0].__setitem__("timer_s", None)),
    ("P406", lambda d: d["restart"].__setitem__("voltage_mV", 13_900)),
    ("P406", lambda d: d["restart"].__setitem__("condition", "rest_below")),
    ("P407", lambda d: d["faults"][0].__setitem__("action", "pause")),
    ("P407", lambda d: d["faults"][1].__setitem__("code", 1)),
    ("P407", lambda d: d["faults"].pop()),
    ("P408", lambda d: d["faults"][-1].__setitem__("above_voltage_mV", 11_000)),
    ("P409", lambda d: d["hysteresis"].__setitem__("voltage_filter_s", 30)),
])
def test_check_refuses_a_program_that_breaks_a_rule(tmp_path, rule, change):
    from chargeplan.firmware.check import check_file

    # the pre-charge rules need a pre-charge: lithium has one (BU-808a), lead-acid none
    doc = (_doc(**_lithium("nmc", 3)) if rule in ("P402", "P403")
           else _doc(battery={"chemistry": "flooded"}))
    good = tmp_path / "good.json"
    good.write_text(json.dumps(doc))
    assert check_file(good).ok, check_file(good).violations
    edited = copy.deepcopy(doc)
    change(edited)
    bad = tmp_path / "bad.json"
    bad.write_text(json.dumps(_signed(edited)))
    found = check_file(bad).violations
    assert any(v.code == rule for v in found), found


def test_check_refuses_operator_stages_in_an_image():
    """An image is not schema-checked: the program rule itself refuses a desulfation."""
    from chargeplan.firmware import image
    from chargeplan.firmware.check_program import program_violations

    doc = _doc(battery={"chemistry": "flooded"})
    doc["stages"].insert(0, {**doc["stages"][0], "kind": "desulfation"})
    back = image.decode(image.encode(_signed(doc)))
    assert any(v.startswith("P401") for v in program_violations(back))


def test_check_refuses_an_ah_cap_on_the_charge_missing():
    from chargeplan.firmware.check_program import program_violations

    doc = _doc()
    doc["stages"][1]["exits"].append({"condition": "charge_above", "charge_mAh": 2_000,
                                      "then": "fault"})  # a fifth of the rated 10 Ah
    assert any(v.startswith("P405") for v in program_violations(doc))


def test_check_still_reads_version_3(tmp_path):
    """A version-3 document (the pre-charge among the stages, no program blocks) passes."""
    from chargeplan.firmware.check import check_file

    doc = _doc()
    v3 = {key: value for key, value in doc.items()
          if key not in ("precharge", "restart", "faults", "hysteresis")}
    pre = doc["precharge"]
    assert pre["timer_s"] == 0  # lead-acid: no pre-charge (BU-403), so none among the stages
    v3["stages"] = doc["stages"]
    doc = _doc(**_lithium("nmc", 3, state={"state_of_charge": "80 %"}))
    v3 = {key: value for key, value in doc.items()
          if key not in ("precharge", "restart", "faults", "hysteresis")}
    pre = doc["precharge"]
    v3["stages"] = [{"kind": "precharge", "voltage_mV": pre["below_voltage_mV"],
                     "current_mA": pre["current_mA"], "timer_s": pre["timer_s"],
                     "compensated": False, "estimated_duration_s": None, "charge_mAh": None,
                     "energy_mWh": None,
                     "exits": [{"condition": "voltage_reached",
                                "voltage_mV": pre["below_voltage_mV"], "then": "next"}]},
                    *doc["stages"]]
    v3["version"] = 3
    path = tmp_path / "v3.json"
    path.write_text(json.dumps(_signed(v3)))
    report = check_file(path)
    assert report.ok, report.violations


def test_image_carries_the_program_and_the_guards():
    from chargeplan.firmware import image

    doc = _doc()
    # every lead-acid charge carries its guards (rule CP610): they must survive the image
    conditions = {e["condition"] for e in doc["stages"][1]["exits"]}
    assert {"charge_above", "current_rising", "temperature_rise"} <= conditions
    back = image.decode(image.encode(_signed(doc)))
    for key in ("precharge", "restart", "faults", "hysteresis", "stages"):
        got = back[key] if key != "stages" else [
            {k: s[k] for k in ("kind", "voltage_mV", "current_mA", "timer_s", "exits")}
            for s in back[key]]
        want = doc[key] if key != "stages" else [
            {k: s[k] for k in ("kind", "voltage_mV", "current_mA", "timer_s", "exits")}
            for s in doc[key]]
        assert got == want, key
    assert back["version"] == 4 and back["battery"]["nominal_voltage_mV"] == 12_000


@pytest.mark.parametrize("asked", ["desulfation", "equalization"])
def test_a_requested_conditioning_stage_stays_out_of_the_program(asked, tmp_path, write_yaml):
    """IEEE 450 / BU-804b (CP203, CP205): a conditioning overcharge needs someone present,
    so a program (which runs on its own) carries the normal charge and says where the asked
    stage went; the printed plan still has it. The CLI never exits 3 on such a file."""
    from typer.testing import CliRunner

    from chargeplan.cli import app

    data = battery(battery={"chemistry": "flooded", "capacity": "60 Ah"},
                   state={"state_of_charge": "95 %"})
    data["request"] = [asked]
    program = program_plan(BatteryFile.model_validate(data))
    kinds = [s.kind.value for s in program.stages]
    assert asked not in kinds and kinds[:2] == ["bulk", "absorption"]
    assert any(asked in f.message and "printed plan" in f.message for f in program.findings)
    assert asked in [s.kind.value for s in plan_of(data).stages]
    path = write_yaml(data)
    result = CliRunner().invoke(app, ["plan", str(path), "-f", "json",
                                      "-o", str(tmp_path / "p.json")])
    assert result.exit_code == 0, result.output
