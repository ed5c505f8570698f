"""The temperature table for firmware: made by the same rules as the plan."""

from __future__ import annotations

import pytest

from chargeplan.firmware.setpoints import encode
from chargeplan.firmware.tables import temperature_table
from chargeplan.model.battery import BatteryFile

from .conftest import battery, plan_of


def _table(data, step=5.0):
    plan = plan_of(data)
    plan.temperature_table = temperature_table(BatteryFile.model_validate(data), plan,
                                               step_c=step)
    plan.table_step_c = step
    return plan


def test_lead_acid_rows_follow_the_compensation():
    # BU-410: -3 mV/degC per cell about 25 degC, across its Table 1 window -20 to 50 degC;
    # clamped at the AGM envelope's 2.55 V/cell on the cold side
    plan = _table(battery(state={"state_of_charge": "90 %"}))
    rows = {round(r.temperature_c): r for r in plan.temperature_table}
    assert rows[25].charge_voltage_v == pytest.approx(2.43 * 6)
    assert rows[5].charge_voltage_v == pytest.approx(2.43 * 6 + 0.018 * 20)
    assert rows[45].charge_voltage_v == pytest.approx(2.43 * 6 - 0.018 * 20)  # no warm hold
    assert rows[50].charge_voltage_v == pytest.approx(2.43 * 6 - 0.018 * 25)
    assert rows[-15].charge_voltage_v == pytest.approx(2.55 * 6)  # 2.43 + 0.12: at the clamp
    assert rows[-20].charge_voltage_v == pytest.approx(2.55 * 6)  # 2.565 clamped to 2.55
    assert rows[25].hold_voltage_v == pytest.approx(2.27 * 6)  # IEC 62485-2 Table 1 float
    volts = [r.charge_voltage_v for r in plan.temperature_table]
    assert volts == sorted(volts, reverse=True)  # colder never lower


def test_lithium_rows_never_below_zero_and_cut_when_cool():
    # BU-410 Table 1: no lithium charging below 0 degC; cell handling guidelines: at most
    # 0.2 C below 10 degC (LFP)
    plan = _table(battery(battery={"chemistry": "lifepo4", "capacity": "100 Ah"},
                          state={"rest_voltage": "13.0 V"}))
    temps = [r.temperature_c for r in plan.temperature_table]
    assert min(temps) == 0.0 and max(temps) == 45.0
    for row in plan.temperature_table:
        assert row.charge_voltage_v <= 3.65 * 4 + 1e-9
        assert row.hold_voltage_v is None
        assert row.current_max_a <= (20.0 if row.temperature_c < 10 else 50.0) + 1e-9


def test_table_in_the_document_rounds_toward_safety():
    from chargeplan.firmware.charge_program import program_plan

    data = battery(battery={"capacity": "7.7 Ah"}, state={"state_of_charge": "50 %"})
    plan = program_plan(BatteryFile.model_validate(data), table_step_c=2.5, estimate=False)
    doc = encode(plan)
    table = doc["temperature_table"]
    assert table["step_dC"] == 25
    for row, out in zip(plan.temperature_table, table["rows"], strict=True):
        assert out["charge_voltage_mV"] <= row.charge_voltage_v * 1000 + 1e-6
        assert out["current_max_mA"] <= row.current_max_a * 1000 + 1e-6
