"""Storage intake: the inventory CSV read into rows, and the rows resolved into the fleet.

Reading is quick because each field remembers what a distinct text reads as, and the CSV's
rows are checked a row's text at a time; these tests hold it to what reading each cell on
its own row gives: a bad cell is reported on every row it is on, with that row's line. The
fleet's arrays are made a kind of battery and a rest-voltage curve at a time; they are
checked against the Battery Council International rested-voltage table (the flooded
profile's table_source) and against numpy.interp and the profile's flat band, one battery
at a time.
"""

from __future__ import annotations

import datetime as dt
import math

import numpy as np
import pytest

from chargeplan.csvfile import InputErrors
from chargeplan.model.fields import REMEMBERED_TEXTS
from chargeplan.planners.storage import load_site, read_inventory
from chargeplan.planners.storage_intake import flat_reading, profile_for, resolve_fleet
from chargeplan.profiles import ProfileSet
from tests.test_storage import _site

HEADER = "id,chemistry,nominal_voltage,capacity,state_of_charge,rest_voltage,bay\n"
PROFILES = ProfileSet(use_environment=False)


def _lines(tmp_path, body: str) -> list[str]:
    path = tmp_path / "inventory.csv"
    path.write_text(body, encoding="utf-8", newline="")
    with pytest.raises(InputErrors) as caught:
        read_inventory(path)
    return [line.removeprefix(f"{path}: ") for line in caught.value.lines]


def test_a_bad_cell_is_reported_on_every_row_it_is_on(tmp_path):
    lines = _lines(tmp_path, HEADER
                   + "K-1,agm,12 V,1,5 Ah,50 %,,A\n".replace("1,5 Ah", '"1,5 Ah"')
                   + "K-2,agm,12 V,60 Ah,50 %,,A\n"
                   + 'K-3,agm,12 V,"1,5 Ah",50 %,,A\n'
                   + "K-4,agm,12 V,60 Ah,150 %,,A\n"
                   + "K-5,agm,12 V,60 Ah,150 %,,A\n")
    assert lines == [
        "line 2: capacity: '1,5 Ah' has a decimal comma; write 1.5, not 1,5",
        "line 4: capacity: '1,5 Ah' has a decimal comma; write 1.5, not 1,5",
        "line 5: state_of_charge: 150 percent is above the largest sensible 100 percent; "
        "correct the value",
        "line 6: state_of_charge: 150 percent is above the largest sensible 100 percent; "
        "correct the value",
    ]


def test_a_text_read_well_in_one_field_is_still_checked_in_another(tmp_path):
    # '0.5 V' is a sensible rest voltage (of a flat battery) and no nominal voltage (at least
    # 1 V): each field remembers its own readings, with its own bounds
    lines = _lines(tmp_path, HEADER + "K-1,agm,12 V,60 Ah,,0.5 V,A\n"
                   + "K-2,agm,0.5 V,60 Ah,50 %,,A\n")
    assert lines == ["line 3: nominal_voltage: 0.5 V is below the least sensible 1 V; "
                     "correct the value"]


def test_more_distinct_texts_than_are_remembered_all_read_right(tmp_path):
    n = REMEMBERED_TEXTS + 300
    body = HEADER + "".join(f"K-{i},agm,12 V,{1 + i / 100:.2f} Ah,50 %,,A\n" for i in range(n))
    path = tmp_path / "inventory.csv"
    path.write_text(body + f"K-{n},agm,12 V,1;5 Ah,50 %,,A\n", encoding="utf-8")
    with pytest.raises(InputErrors) as caught:
        read_inventory(path)
    assert len(caught.value.lines) == 1 and f"line {n + 2}: capacity:" in caught.value.lines[0]
    path.write_text(body, encoding="utf-8")
    rows = read_inventory(path)
    assert [r.capacity_ah for r in rows] == [float(f"{1 + i / 100:.2f}") for i in range(n)]


def test_blank_lines_are_skipped_and_lines_stay_physical(tmp_path):
    lines = _lines(tmp_path, HEADER + "\n" + "K-1,agm,12 V,60 Ah,50 %,,A\n" + "\n\n"
                   + "K-2,agm,12 V,60 kg,50 %,,A\n" + "   \n")
    assert lines[0].startswith("line 6: capacity: '60 kg' is not a capacity")
    assert lines[1].startswith("line 7: id: is missing")
    assert len(lines) == 2


def test_a_quote_left_open_to_the_end_of_the_file_is_reported(tmp_path):
    # the open quote takes in only the last line break: the row is still one line long
    lines = _lines(tmp_path, HEADER + "K-1,agm,12 V,60 Ah,50 %,,A\n" + 'K-2,agm,12 V,"60 Ah\n')
    assert lines == ["line 3: a quote is not closed (it runs to line 3); check the row for a "
                     "stray double quote"]


def test_guarded_cells_read_back_as_written(tmp_path):
    path = tmp_path / "inventory.csv"
    path.write_text("id,owner,chemistry,nominal_voltage,capacity,state_of_charge,bay\n"
                    "'=K-1, '-2+3 ,agm,12 V,60 Ah,50 %,A\n"
                    "'K-2,'plain,agm,12 V,60 Ah,50 %,A\n", encoding="utf-8")
    rows = read_inventory(path)
    assert [(r.id, r.owner) for r in rows] == [("=K-1", "-2+3"), ("'K-2", "'plain")]


def test_extra_columns_are_noted_only_on_the_rows_that_fill_them(tmp_path):
    path = tmp_path / "inventory.csv"
    path.write_text("id,chemistry,nominal_voltage,capacity,state_of_charge,bay,berth,notes\n"
                    "K-1,agm,12 V,60 Ah,50 %,A,B4,keep dry\n"
                    "K-2,agm,12 V,60 Ah,50 %,A,,\n", encoding="utf-8")
    assert [r.notes for r in read_inventory(path)] == ["keep dry; berth: B4", ""]


def _fleet(batteries, bays=None):
    site = _site(batteries, bays=bays or [{"name": "A", "mains": True}, {"name": "B"}])
    return resolve_fleet(site, list(site.inventory or []), PROFILES, "inventory.csv")


def _row(i, chemistry, rest=None, soc=None, bay="A", size=None, **extra):
    row = {"id": f"R-{i}", "chemistry": chemistry, "capacity": "60 Ah", "bay": bay,
           **(size or {"nominal_voltage": "12 V"}), **extra}
    row.update({"rest_voltage": rest} if rest is not None else {"state_of_charge": soc})
    return row


def test_intake_state_of_charge_follows_the_bci_table():
    # Battery Council International rested-voltage table, as the flooded profile's
    # table_source gives it: 12.65 / 12.45 / 12.24 / 12.06 V on 6 cells are 100 / 75 / 50 /
    # 25 %; a 6 V battery (3 cells) at half those voltages reads alike
    fleet = _fleet([_row(0, "flooded", rest="12.24 V"), _row(1, "flooded", soc="33 %"),
                    _row(2, "Flooded", rest="12.45 V", bay="B"),
                    _row(3, "flooded", rest="12.06 V", size={"nominal_voltage": "6 V"}),
                    _row(4, "flooded", rest="6.12 V", size={"nominal_voltage": "6 V"}),
                    _row(5, "flooded", rest="12.24 V"), _row(6, "flooded", rest="12.65 V")])
    assert fleet.cells.tolist() == [6, 6, 6, 3, 3, 6, 6]
    # 12.06 V on 3 cells is 4.02 V/cell, above the table: held at 100 %
    assert fleet.intake_soc == pytest.approx([50, 33, 75, 100, 50, 50, 100], abs=0.05)


def test_intake_state_of_charge_is_each_battery_s_own_reading():
    # numpy.interp on the profile's own table, battery by battery, and NaN inside the
    # profile's flat band (LiFePO4): the fleet's curve-at-a-time lookup must give the same
    rng = np.random.default_rng(11)
    kinds = [("lifepo4", {"nominal_voltage": "12 V"}, 4, 3.3), ("lifepo4", {"cells_in_series": 8},
             8, 3.3), ("agm", {"nominal_voltage": "12 V"}, 6, 2.05),
             ("gel", {"cells_in_series": 3}, 3, 2.05), ("nmc", {"cells_in_series": 3}, 3, 3.7)]
    rows, want = [], []
    for i in range(400):
        chemistry, size, cells, per_cell = kinds[i % len(kinds)]
        if i % 3 == 0:
            rows.append(_row(i, chemistry, soc=f"{i % 101} %", bay="AB"[i % 2], size=size))
            want.append(float(i % 101))
            continue
        volts = round(cells * per_cell * rng.uniform(0.9, 1.06), 2 if i % 2 else 4)
        rows.append(_row(i, chemistry, rest=f"{volts} V", bay="AB"[i % 2], size=size))
        profile = profile_for(PROFILES, chemistry)
        table = np.asarray(profile.rest_voltage.table, dtype=float)
        soc = float(np.interp(volts / cells, table[:, 1], table[:, 0]))
        want.append(math.nan if flat_reading(profile, soc) else soc)
    got = _fleet(rows).intake_soc
    assert np.isnan(got).sum() > 10 and (~np.isnan(got)).sum() > 100
    np.testing.assert_array_equal(got, np.array(want))


def test_fleet_columns_are_each_row_s_own():
    rows = [_row(0, "agm", soc="50 %", parasitic_draw="20 mA"),
            _row(1, "agm", soc="50 %", parasitic_draw="20 mA", loads="disconnected"),
            _row(2, "nmc", soc="40 %", size={"cells_in_series": 3}, loads="connected",
                 arrive=dt.date(2026, 11, 5)),
            _row(3, "agm", soc="50 %", depart=dt.date(2026, 12, 1)),
            _row(4, "lifepo4", soc="80 %", bay="B")]
    fleet = _fleet(rows)
    assert fleet.chemistry == ["agm", "agm", "nmc", "agm", "lifepo4"]
    assert fleet.connected.tolist() == [True, False, True, False, False]
    assert fleet.may_disconnect.tolist() == [True, True, False, True, True]
    assert fleet.arrive.tolist() == [0, 0, 4, 0, 0]
    assert fleet.depart.tolist() == [60, 60, 60, 30, 60]
    assert fleet.bay.tolist() == [0, 0, 0, 0, 1]
    # 20 mA all day is 0.48 Ah a day: 0.8 % of 60 Ah
    assert fleet.draw_pct_day == pytest.approx([0.8, 0.8, 0, 0, 0])
    assert [p.id for p in fleet.profiles] == fleet.chemistry


def test_every_unresolved_battery_is_named_even_with_braces_in_its_text(tmp_path):
    with pytest.raises(InputErrors) as caught:
        _fleet([_row(0, "{x}", soc="50 %"), _row(1, "agm", soc="50 %", bay="{A}"),
                _row(2, "{x}", soc="50 %")])
    lines = caught.value.lines
    assert len(lines) == 3
    assert lines[0].startswith("inventory.csv: battery R-0: chemistry: unknown chemistry '{x}'")
    assert lines[1].startswith("inventory.csv: battery R-1: bay: '{A}' is not a bay of the site")
    assert lines[2].startswith("inventory.csv: battery R-2: chemistry: unknown chemistry '{x}'")


def test_an_empty_inventory_resolves_to_an_empty_fleet(tmp_path):
    path = tmp_path / "inventory.csv"
    path.write_text(HEADER, encoding="utf-8")
    site = tmp_path / "site.yaml"
    site.write_text("site: {name: D, start: 2026-11-01, duration: 20 d}\n"
                    "monthly: [{month: 11, mean: 5 degC, min: 0 degC}]\nbays: [{name: A}]\n")
    fleet = resolve_fleet(load_site(site), read_inventory(path), PROFILES, str(path))
    assert fleet.n == 0 and fleet.intake_soc.shape == (0,) and fleet.cells.dtype.kind == "i"
