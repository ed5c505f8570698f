"""The engine against the cases in cases/engine.yaml, each with its source."""

from __future__ import annotations

from pathlib import Path

import pytest
from ruamel.yaml import YAML

from chargeplan.errors import InputError, PlanRefused

from .conftest import battery, plan_of

CASES = YAML(typ="safe").load((Path(__file__).parent / "cases" / "engine.yaml").read_text())


def _merge(case_battery: dict) -> dict:
    sections = {k: v for k, v in case_battery.items()}
    data = battery(**sections)
    # a null in a case removes the key (e.g. nominal_voltage when only cells are given)
    for section in data.values():
        if isinstance(section, dict):
            for key in [k for k, v in section.items() if v is None]:
                del section[key]
    return data


@pytest.mark.parametrize("case", CASES, ids=[c["id"] for c in CASES])
def test_engine_case(case):
    assert case.get("source"), "every case names its source"
    expect = case["expect"]
    data = _merge(case["battery"])
    if "refused" in expect:
        with pytest.raises(PlanRefused) as caught:
            plan_of(data)
        assert caught.value.rule_id == expect["refused"]
        assert expect.get("refusal", "") in caught.value.reason
        return
    if "input_error" in expect:
        with pytest.raises(InputError) as caught:
            plan_of(data)
        assert caught.value.field == expect["input_error"]
        return
    plan = plan_of(data)
    kinds = [s.kind.value for s in plan.stages]
    if "stages" in expect:
        assert kinds == expect["stages"]
    for kind in expect.get("absent", []):
        assert kind not in kinds
    for kind, volts in expect.get("voltage_v", {}).items():
        assert plan.stage(kind).voltage_v == pytest.approx(volts, abs=0.005), kind
    for kind, amps in expect.get("current_a", {}).items():
        assert plan.stage(kind).current_a == pytest.approx(amps, abs=0.005), kind
    cells, capacity = plan.battery.cells_in_series, plan.battery.capacity_ah
    for kind, (low, high) in expect.get("cell_voltage_between", {}).items():
        assert low - 1e-9 <= plan.stage(kind).voltage_v / cells <= high + 1e-9, kind
    for kind, (low, high) in expect.get("current_it_between", {}).items():
        assert low - 1e-9 <= plan.stage(kind).current_a / capacity <= high + 1e-9, kind
    for kind, (low, high) in expect.get("current_a_between", {}).items():
        assert low - 1e-9 <= plan.stage(kind).current_a <= high + 1e-9, kind
    if "storage_soc_between" in expect:
        from chargeplan.physics.ocv import soc_from_ocv
        from chargeplan.profiles import load_builtin

        table = load_builtin(plan.battery.chemistry).rest_voltage.table
        low, high = expect["storage_soc_between"]
        assert low <= float(soc_from_ocv(plan.stage("storage_hold").voltage_v / cells,
                                         table)) <= high
    for kind, volts in expect.get("voltage_below", {}).items():
        assert plan.stage(kind).voltage_v < volts, kind
    for kind in expect.get("fault_guards", []):
        stage = plan.stage(kind)
        guards = {e.kind.value for e in stage.exits if e.then == "fault"}
        assert {"charge_above", "temperature_rise"} <= guards, kind
        assert stage.compensated, kind
    if "state_of_charge_between" in expect:
        low, high = expect["state_of_charge_between"]
        assert low <= plan.battery.state_of_charge_pct <= high
    if "trace" in expect:
        assert expect["trace"] in " | ".join(t.text for t in plan.trace)
    if "finding_rule" in expect:
        assert expect["finding_rule"] in {f.rule_id for f in plan.findings}
    if "finding" in expect:
        messages = " | ".join(f.message for f in plan.findings)
        assert expect["finding"] in messages
    if "finish" in expect:
        assert plan.finish == expect["finish"]
