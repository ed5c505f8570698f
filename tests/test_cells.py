"""Cell counts, rest-voltage readings and runtime: one answer per battery for every command,
checked against the published tables they come from."""

from __future__ import annotations

import pytest

from chargeplan.cells import CellFields, check_rest_voltage, count_cells
from chargeplan.errors import InputError, PlanRefused
from chargeplan.model.battery import BatteryFile
from chargeplan.physics.discharge import peukert_runtime_h, runtime_capped_h
from chargeplan.planners.readings import runtime, state_of_charge
from chargeplan.profiles import load_builtin

from .conftest import battery, plan_of

# Battery Council International table, as reproduced in handbooks (12 V, rested):
BCI_OCV_12V = {100: 12.65, 75: 12.45, 50: 12.24, 25: 12.06, 0: 11.89}


@pytest.mark.parametrize(("soc", "volts"), sorted(BCI_OCV_12V.items()))
def test_bci_table_points_read_back(soc, volts):
    """Every point of the BCI table, 11.89 V (its own 0 %) included, reads as its charge."""
    reading = state_of_charge("flooded", rest_voltage_v=volts)
    assert reading.cells == 6
    assert reading.state_of_charge_pct == pytest.approx(soc, abs=0.5)
    plan = plan_of(battery(battery={"chemistry": "flooded"}, state={"rest_voltage": f"{volts} V"}))
    assert plan.battery.state_of_charge_pct == pytest.approx(soc, abs=0.5)


def test_readings_outside_the_table_clamp_with_a_note():
    low = state_of_charge("flooded", rest_voltage_v=11.7, cells=6)
    assert low.state_of_charge_pct == 0 and any("read as 0 %" in n for n in low.notes)
    high = state_of_charge("flooded", rest_voltage_v=13.1, cells=6)
    assert high.state_of_charge_pct == 100 and any("read as 100 %" in n for n in high.notes)


@pytest.mark.parametrize("nominal", [12.0, 24.0, 36.0, 48.0, 51.2])
@pytest.mark.parametrize("chemistry", ["lifepo4", "nmc", "flooded"])
def test_state_and_plan_agree_on_the_cell_count(chemistry, nominal):
    """`state` and `plan` count cells with the same function, so they agree or both refuse
    (common practice: 48 V LiFePO4 is sold as 15 or 16 cells; the label must say)."""
    profile = load_builtin(chemistry)
    rest = nominal * 1.04
    try:
        reading = state_of_charge(chemistry, rest_voltage_v=rest, nominal_voltage_v=nominal)
    except InputError as error:
        state_error = error.problem
    else:
        state_error = None
    data = battery(battery={"chemistry": chemistry, "nominal_voltage": f"{nominal} V"},
                   state={"rest_voltage": f"{rest} V"})
    try:
        plan_cells = plan_of(data).battery.cells_in_series
    except InputError as error:
        assert state_error is not None and error.problem == state_error
        return
    except PlanRefused:  # refused on the reading itself, after the same count
        plan_cells = count_cells(profile, nominal_voltage_v=nominal).cells
    assert state_error is None and reading.cells == plan_cells


def test_48v_lifepo4_is_ambiguous_for_both_commands():
    # the case the two commands used to disagree on: 53 V on "48 V" LiFePO4
    with pytest.raises(InputError, match="could be 14 or 15 or 16") as state_error:
        state_of_charge("lifepo4", rest_voltage_v=53.0, nominal_voltage_v=48.0)
    assert state_error.value.field == "--nominal-voltage"
    data = battery(battery={"chemistry": "lifepo4", "nominal_voltage": "48 V"},
                   state={"rest_voltage": "53 V"})
    with pytest.raises(InputError, match="could be 14 or 15 or 16") as plan_error:
        plan_of(data)
    assert plan_error.value.field == "battery.nominal_voltage"


def test_count_cells_names_the_callers_fields():
    fields = CellFields(cells="batteries[3].cells_in_series",
                        nominal="batteries[3].nominal_voltage")
    with pytest.raises(InputError) as caught:
        count_cells(load_builtin("lifepo4"), nominal_voltage_v=48.0, fields=fields)
    assert caught.value.field == "batteries[3].nominal_voltage"
    assert "batteries[3].cells_in_series" in caught.value.fix


def test_shorted_cell_reads_like_fewer_cells():
    # common practice: a 12 V lead-acid battery resting near 10.5 V has a shorted cell
    check = check_rest_voltage(load_builtin("flooded"), 6, 10.5)
    assert check.verdict == "fewer_cells" and "5" in check.problem


def test_no_false_cells_verified_finding():
    plan = plan_of(battery(battery={"chemistry": "flooded"}, state={"rest_voltage": "11.8 V"}))
    messages = " ".join(f.message for f in plan.findings)
    assert "because state.cells_verified is true" not in messages
    assert "state.cells_verified is not set" in messages


def test_vrla_tables_rest_higher_than_flooded():
    # REFERENCES (from memory: verify before use): AGM full about 2.13-2.15 V/cell
    for chemistry in ("agm", "gel"):
        table = load_builtin(chemistry).rest_voltage.table
        assert 2.13 <= table[-1][1] <= 2.15
        flooded = load_builtin("flooded").rest_voltage.table
        assert table[-1][1] > flooded[-1][1]


def test_ocv_temperature_correction_reads_a_cold_battery_higher():
    # from memory: lead-acid OCV rises about 0.2 mV/K per cell, so a cold battery reads low
    warm = state_of_charge("flooded", rest_voltage_v=12.24, temperature_c=26.7)
    cold = state_of_charge("flooded", rest_voltage_v=12.24, temperature_c=-10.0)
    assert warm.state_of_charge_pct == pytest.approx(50, abs=0.5)
    # 0.2 mV/K x 6 x 36.7 K = 44 mV, about 6 points on the BCI table near 50 %
    assert 3 < cold.state_of_charge_pct - warm.state_of_charge_pct < 10


def test_flat_band_is_one_profile_value():
    rest = load_builtin("lifepo4").rest_voltage
    assert rest.flat_band is not None
    assert rest.in_flat_band(30, 80) and not rest.in_flat_band(10, 50)
    assert load_builtin("nmc").rest_voltage.flat_band is None
    reading = state_of_charge("lifepo4", rest_voltage_v=13.1, cells=4)
    assert any("rough guide between 20 and 90 %" in n for n in reading.notes)


def test_peukert_capped_at_the_low_rate_capacity():
    # general lead-acid references (from memory): C100 is about 1.1-1.25 x C20, so a 100 Ah
    # C20 battery at 1 A (below C100's rate) lasts at most about 110-125 h
    assert peukert_runtime_h(100, 1, 20, 1.25) > 125  # uncapped: 150 % of its rating
    capped = float(runtime_capped_h(100, 1, 20, 1.25, 1.1))
    assert 110 - 1e-9 <= capped <= 125
    # at the rated current the cap does not bite (Peukert's law: t = H at I = C/H)
    assert float(runtime_capped_h(100, 5, 20, 1.25, 1.1)) == pytest.approx(20)


def test_runtime_reports_the_cap():
    data = battery(battery={"chemistry": "flooded", "capacity": "100 Ah", "capacity_hours": 20},
                   state={"state_of_charge": "100 %"})
    result = runtime(BatteryFile.model_validate(data), "1 A")
    assert 110 - 1e-6 <= result.runtime_h <= 125
    assert any("capped at 1.1" in n for n in result.notes)
