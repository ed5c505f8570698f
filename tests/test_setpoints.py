"""The setpoint document: integers in the units their keys name, rounded toward safety,
valid against the committed schema, with a digest that detects edits."""

from __future__ import annotations

import copy
import json

import pytest
from jsonschema import Draft202012Validator

from chargeplan.firmware.setpoints import compute_digest, down, encode, up
from chargeplan.render.text import render_text

from .conftest import REPO, battery, plan_of

SCHEMA = json.loads((REPO / "schemas" / "setpoints.schema.json").read_text())


def _doc(**sections):
    return encode(plan_of(battery(**sections)))


def test_rounding_helpers_round_toward_safety():
    assert down(14.9399, 1000) == 14939  # a voltage limit never rounds up
    assert down(14.94, 1000) == 14940  # float noise (14.940000000000001) is not a step
    assert up(0.1801, 1000) == 181  # a tail current rounds up: the stage ends earlier
    assert up(-15.71, 10) == -157  # a minimum temperature rounds up


def test_document_is_valid_and_integer():
    doc = _doc(conditions={"battery_temperature": "5 degC"}, state={"rest_voltage": "12.31 V"})
    Draft202012Validator(SCHEMA).validate(doc)  # jsonschema: the committed schema
    assert doc["format"] == "chargeplan-setpoints" and doc["version"] == 3
    for stage in doc["stages"]:
        assert isinstance(stage["voltage_mV"], int) and isinstance(stage["current_mA"], int)
    # BU-410 worked arithmetic: 2.43 x 6 + (-0.003 x 6 x (5 - 25)) = 14.94 V
    absorption = next(s for s in doc["stages"] if s["kind"] == "absorption")
    assert absorption["voltage_mV"] == 14940
    assert doc["temperature_compensation"]["coefficient_uV_per_K_per_cell"] == -3000


def test_integers_never_exceed_the_plan():
    plan = plan_of(battery(battery={"chemistry": "nmc", "nominal_voltage": None,
                                    "cells_in_series": 3, "capacity": "3.35 Ah"},
                           state={"rest_voltage": "11.2 V"},
                           conditions={"battery_temperature": "7.33 degC"}))
    doc = encode(plan)
    for stage, encoded in zip(plan.stages, doc["stages"], strict=True):
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
