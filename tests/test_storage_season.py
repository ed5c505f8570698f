"""The storage season as staff live it: freeze risk in every interval, intake actions with
charger settings, and readings that change the plan."""

from __future__ import annotations

import csv
import datetime as dt
import html
import io

import numpy as np
import pytest
from typer.testing import CliRunner

from chargeplan.cli import app
from chargeplan.physics.electrolyte import freezing_point_tm5_1185
from chargeplan.planners.storage import Reading, plan_storage
from chargeplan.planners.storage_kernel import Act, Kind, Remedy
from chargeplan.profiles import ProfileSet
from chargeplan.render.storage_docs import SCHEDULE_COLUMNS, procedure, schedule_csv
from chargeplan.render.storage_sections import procedure_sections
from tests.test_storage import _battery, _site

runner = CliRunner()
COLD = {"mean": "-8 degC", "low": "-20 degC", "days": 120, "round_days": 14}
WARM_BAYS = [{"name": "A", "mains": True}, {"name": "warm", "mains": True, "offset": "+25 K"}]


def _rows(plan):
    return list(csv.DictReader(io.StringIO(schedule_csv(plan))))


def test_schedule_keeps_its_columns():
    plan = plan_storage(_site([_battery(1, "agm")], days=30, round_days=14))
    header = schedule_csv(plan).splitlines()[0].split(",")
    assert header[:9] == ["date", "battery", "owner", "chemistry", "bay", "predicted_soc_pct",
                          "action", "freeze_risk", "charge_plan"]
    assert tuple(header) == SCHEDULE_COLUMNS


def test_freeze_risk_flagged_in_every_interval_and_acted_on():
    # a flooded battery whose 110 mA load must stay connected falls from full to about 40 %
    # in nine days at -8 degC; 40 % is SG 1.176 (BCI), freezing near -22 degC (TM 5-1185),
    # within 3 K of a -20 degC minimum: every interval is at risk, not only the first
    plan = plan_storage(_site([_battery(1, "flooded", parasitic_draw="110 mA",
                                        loads="connected")], **COLD))
    v = plan.visits
    stored = v.kind != Kind.RELEASE
    assert v.freeze[stored].all()
    assert (v.remedy[stored] != Remedy.NONE).all()
    assert (plan.first_freeze_day < 0).all()  # and the actions keep it from freezing
    rows = _rows(plan)
    assert all(r["freeze_risk"] == "yes" for r in rows if r["visit"] != "release")
    assert any(r["freeze_action"].startswith("top it up again by 2026-") for r in rows)
    # the margin is the bay minimum against the freezing point (TM 5-1185), shown per row
    first = rows[1]
    assert float(first["bay_min_c"]) == -20.0
    assert float(first["freeze_margin_k"]) == pytest.approx(
        float(first["bay_min_c"]) - float(first["freeze_point_c"]), abs=0.15)


def test_freeze_remedies_disconnect_the_load_or_move_to_the_warm_room():
    loose = plan_storage(_site([_battery(1, "flooded", parasitic_draw="110 mA")], **COLD))
    assert loose.visits.remedy[0] == Remedy.DISCONNECT
    assert not loose.visits.freeze[1:].any()  # with the load off it stays full enough
    kept = plan_storage(_site([_battery(1, "flooded", parasitic_draw="110 mA",
                                        loads="connected")], bays=WARM_BAYS, warm_room="warm",
                              **COLD))
    assert kept.visits.remedy[0] == Remedy.MOVE
    assert _rows(kept)[2]["bay"] == "warm"


def test_intake_of_a_low_flooded_battery_in_the_cold():
    # 25 % flooded is SG 1.155 (BCI), freezing near -16 degC (TM 5-1185): in a -20 degC bay it
    # may be frozen: thaw first, look for ice or a bulging case, then charge it in the warm room
    assert freezing_point_tm5_1185(1.155) > -20
    plan = plan_storage(_site([_battery(1, "flooded", soc="25 %")], bays=WARM_BAYS,
                              warm_room="warm", **COLD))
    first = _rows(plan)[0]
    assert first["visit"] == "intake" and first["predicted_soc_pct"] == "25"
    assert "thaw" in first["action"] and "bulging" in first["action"]
    assert first["charge_in"] == "warm"
    assert first["charger_setting"] == "Flooded lead-acid (vented)"
    volts, amps = float(first["charge_voltage_v"]), float(first["charge_current_a"])
    # IEC 62485-2 / BU-403: absorption about 2.40-2.50 V/cell (compensated at 17 degC, BU-410)
    assert 2.40 * 6 <= volts <= 2.55 * 6
    assert 0.10 * 50 <= amps <= 0.30 * 50  # BU-403: bulk 0.1-0.3 C
    assert float(first["charge_hours"]) > 1
    assert first["soc_after_pct"] == "100"


@pytest.mark.parametrize(("chemistry", "soc", "act"), [
    ("lifepo4", "20 %", Act.COUNT_DOWN), ("nmc", "15 %", Act.TO_STORAGE),
    ("nmc", "90 %", Act.DISCHARGE), ("lifepo4", "45 %", Act.STORE)])
def test_lithium_intake_goes_to_its_storage_level(chemistry, soc, act):
    # BU-702: lithium is stored at 40-50 %; low lithium is not assumed to be there
    plan = plan_storage(_site([_battery(1, chemistry, soc=soc)], days=30, round_days=14))
    v = plan.visits
    assert v.act[0] == act
    assert 40 <= v.soc_after[0] <= 50
    row = _rows(plan)[0]
    if act == Act.COUNT_DOWN:
        # charged full (the known point), then the Ah stated taken out: 50 Ah x (100 - 50) %
        assert "take out 25.0 Ah" in row["action"] and row["charge_voltage_v"]
    if act == Act.TO_STORAGE:
        assert row["charge_voltage_v"] and "storage level" in row["action"]


def test_intake_charger_hours_are_totalled():
    plan = plan_storage(_site([_battery(1, "flooded", soc="40 %"), _battery(2, "lifepo4",
                                                                           soc="20 %")],
                              days=30, round_days=14))
    rows = _rows(plan)
    hours = sum(float(r["charge_hours"]) for r in rows if r["visit"] == "intake")
    assert plan.intake_charger_hours() == pytest.approx(hours, abs=0.1)
    assert f"{plan.intake_charger_hours():.1f} charger-hours" in plan.summary()


def _reading_site(arrive=None, soc="100 %", rest=None):
    extra = {"arrive": arrive} if arrive else {}
    state = {"rest_voltage": rest} if rest else {"state_of_charge": soc}
    battery = {"id": "T-1", "chemistry": "flooded", "nominal_voltage": "12 V",
               "capacity": "60 Ah", "bay": "A", **state, **extra}
    other = _battery(2, "agm")
    return _site([battery, other], mean="-5 degC", low="-12 degC", days=120, round_days=14)


def test_a_reading_restarts_the_forecast_as_a_fresh_intake():
    # BCI table: 12.06 V rested on 6 cells is 25 %. Later rows must equal a fresh run that
    # takes the reading as the battery's intake on that date.
    day = dt.date(2026, 12, 3)  # between two rounds
    measured = plan_storage(_reading_site(), readings=[Reading(day, "T-1", 12.06)])
    fresh = plan_storage(_reading_site(arrive=day, rest="12.06 V"))
    d = (day - measured.dates[0]).days
    np.testing.assert_allclose(measured.soc_daily[0, d:], fresh.soc_daily[0, d:], atol=1e-4)
    a = [r for r in _rows(measured) if r["battery"] == "T-1" and r["date"] >= day.isoformat()]
    b = [r for r in _rows(fresh) if r["battery"] == "T-1" and r["date"] >= day.isoformat()]
    drop = ("visit", "reading", "action")
    assert [{k: v for k, v in r.items() if k not in drop} for r in a] == [
        {k: v for k, v in r.items() if k not in drop} for r in b]
    assert a[0]["predicted_soc_pct"] == "25" and a[0]["visit"] == "reading"
    assert a[0]["reading"].startswith("fast-loss")
    assert float(measured.soc_daily[0, d - 1]) > 80  # the old forecast, before the reading


def test_reading_flags_reach_every_document():
    day = dt.date(2026, 12, 3)
    plan = plan_storage(_reading_site(), readings=[Reading(day, "T-1", 12.06)])
    profiles = ProfileSet(use_environment=False)
    text = "discharges faster than its chemistry should"
    assert text in procedure(plan, profiles=profiles)
    assert text in html.unescape(procedure(plan, profiles=profiles, html=True))
    assert any(text in r["reading"] for r in _rows(plan))


@pytest.mark.parametrize("volts, why", [
    (-12.6, "leads are reversed"),  # CP103 (core rules): a negative reading is reversed leads
    (125.0, "more than a rested 6-cell"),  # a slipped decimal point
    (0.0125, "dead or shorted cell"),  # 12.5 mV: the meter on the wrong range
    (10.2, "reads like 5"),  # 1.70 V/cell: a shorted cell (BCI: 1.75 V/cell is flat)
])
def test_a_reading_is_judged_as_an_intake_would_be(volts, why):
    # the same core rules refuse the same voltage at intake; a reading they refuse is flagged
    # and does not reset the plan (the forecast is kept)
    day = dt.date(2026, 12, 3)
    intake = plan_storage(_reading_site(rest=f"{volts} V"))
    assert any(why in n.text for n in intake.notes if n.code == "refused")
    plain = plan_storage(_reading_site())
    plan = plan_storage(_reading_site(), readings=[Reading(day, "T-1", volts)])
    flags = [f for f in plan.reading_flags if f.battery == "T-1"]
    assert [f.code for f in flags] == ["implausible"] and why in flags[0].text
    assert "Measure again" in flags[0].text
    assert not (plan.visits.kind == Kind.READING).any()
    np.testing.assert_array_equal(plan.soc_daily, plain.soc_daily)
    # and a good reading of a battery set aside at intake is not taken as used
    again = plan_storage(_reading_site(rest=f"{volts} V"), readings=[Reading(day, "T-1", 12.6)])
    assert [f.code for f in again.reading_flags if f.battery == "T-1"] == ["set-aside"]


def test_the_sheets_checks_and_gravity_are_read_back(tmp_path):
    # readings.csv as staff fill it in: a hydrometer reading (SG 1.150 is about 20 %, BCI
    # table via physics.electrolyte, corrected to the bay's temperature, TM 5-4210-230-14&P-1),
    # a bulging case, low electrolyte and a note; a LiFePO4 pack's own display
    from chargeplan.physics.electrolyte import (
        specific_gravity_corrected,
        state_of_charge_from_gravity_bci,
    )
    from chargeplan.planners.storage import read_readings
    from chargeplan.render.storage_rounds import READINGS_COLUMNS

    path = tmp_path / "readings.csv"
    row = dict.fromkeys(READINGS_COLUMNS, "")
    first = {**row, "date": "2026-12-03", "battery": "T-1", "specific_gravity": "1.150",
             "electrolyte_level_ok": "no", "terminals_case_ok": "No", "notes": "case bulging"}
    second = {**row, "date": "2026-12-03", "battery": "T-2", "state_of_charge": "45 %",
              "returned_to_bay": "yes"}
    with path.open("w", newline="") as out:
        writer = csv.DictWriter(out, READINGS_COLUMNS)
        writer.writeheader()
        writer.writerows([first, second])
    readings = read_readings(path)
    assert readings[0].specific_gravity == 1.150 and readings[0].terminals_case_ok is False
    assert readings[1].state_of_charge_pct == 45.0 and readings[1].returned_to_bay is True
    site = _site([{**_battery(1, "flooded"), "bay": "A"}, _battery(2, "lifepo4", soc="45 %")],
                 mean="-5 degC", low="-12 degC", days=120, round_days=14)
    plan = plan_storage(site, readings=readings)
    codes = {f.code for f in plan.reading_flags if f.battery == "T-1"}
    assert {"damaged", "electrolyte", "note"} <= codes
    assert any("case bulging" in f.text for f in plan.reading_flags)
    d = (dt.date(2026, 12, 3) - plan.dates[0]).days
    reset = plan.visits.kind == Kind.READING
    by_battery = dict(zip(plan.visits.battery[reset].tolist(),
                          plan.visits.soc_before[reset].tolist(), strict=True))
    expected = float(state_of_charge_from_gravity_bci(
        specific_gravity_corrected(1.150, float(plan.bay_mean[0, d]))))
    assert by_battery[0] == pytest.approx(expected, abs=0.01) and expected < 30
    assert by_battery[1] == 45.0
    page = procedure(plan, profiles=ProfileSet(use_environment=False))
    assert "do not charge it until it is checked" in page and "case bulging" in page


@pytest.mark.parametrize("column, text, fragment", [
    ("electrolyte_level_ok", "maybe", "write yes or no"),
    ("specific_gravity", "1.9", "outside 1.000-1.350"),
    ("state_of_charge", "145 %", "outside 0-100 %"),
    ("terminals_case_ok", "no\u200b", "'no<U+200B>' is not an answer"),  # shown, not hidden
    ("specific_gravity", "\"1,150\"", "decimal comma"),  # quoted, as a spreadsheet writes it
])
def test_a_bad_sheet_answer_names_its_line_and_column(tmp_path, column, text, fragment):
    path = tmp_path / "readings.csv"
    path.write_text(f"date,battery,rest_voltage,{column}\n2026-12-03,T-1,,{text}\n")
    site = tmp_path / "site.yaml"
    site.write_text("site: {name: D, start: 2026-11-01, duration: 60 d}\n"
                    "monthly: [{month: 11, mean: 5 degC, min: 0 degC}, "
                    "{month: 12, mean: 5 degC, min: 0 degC}]\nbays: [{name: A}]\n"
                    "inventory: [{id: T-1, chemistry: flooded, nominal_voltage: 12 V, "
                    "capacity: 60 Ah, state_of_charge: 90 %, bay: A}]\n")
    result = runner.invoke(app, ["storage", str(site), "--readings", str(path)])
    assert result.exit_code == 2
    assert f"{path}: line 2: {column}" in result.stderr and fragment in result.stderr


def test_flat_lifepo4_readings_are_reported_not_skipped():
    # LiFePO4's rest voltage is flat from about 20 to 90 % (BU-409 curves; common practice)
    plan = plan_storage(_site([_battery(1, "lifepo4", soc="45 %")], days=60, round_days=14),
                        readings=[Reading(dt.date(2026, 11, 20), "T-1", 13.2)])
    assert [f.code for f in plan.reading_flags] == ["flat-curve"]
    assert "not usable for state of charge" in plan.reading_flags[0].text
    assert not (plan.visits.kind == Kind.READING).any()


def test_procedure_html_holds_every_passage_of_the_markdown():
    from chargeplan.render.markdown import md_text

    plan = plan_storage(_site([_battery(1, "flooded", parasitic_draw="110 mA",
                                        loads="connected"), _battery(2, "lifepo4", soc="20 %")],
                              bays=WARM_BAYS, warm_room="warm", **COLD),
                        readings=[Reading(dt.date(2026, 11, 20), "T-2", 13.2)])
    profiles = ProfileSet(use_environment=False)
    markdown = procedure(plan, profiles=profiles)
    page = html.unescape(procedure(plan, profiles=profiles, html=True))
    _title, sections = procedure_sections(plan, profiles)
    for section in sections:
        for passage in section.passages():
            # table cells are user text in Markdown, escaped (chargeplan.render.markdown)
            assert md_text(passage) in markdown or passage in markdown, passage
            assert passage in page, passage
    for line in markdown.splitlines():
        text = line.lstrip("#- ").strip()
        if text and not text.startswith("|") and not text.startswith("**"):
            assert text in page, text
    for name in ("warm", "A"):
        assert f"<td>{name}</td>" in page  # the site's bays are named


def test_input_is_forgiving_where_it_can_be(tmp_path):
    # chemistry names in any case; 24 V LiFePO4 is 8 cells of 3.2 V (25.6 V, sold as 24 V)
    plan = plan_storage(_site([_battery(1, "LiFePO4", soc="45 %"), _battery(2, "AGM"),
                               {**_battery(3, "lifepo4", soc="45 %"), "nominal_voltage": "24 V"}],
                              days=30))
    assert plan.chemistry == ["lifepo4", "agm", "lifepo4"]
    loaded = plan_storage(_site([{**_battery(1, "agm"), "parasitic_draw": "20 mA",
                                  "loads": " Connected"}], days=30))
    assert loaded.rows[0].loads == "connected"  # in any case, as the chemistry is
    assert plan.cells.tolist() == [4, 6, 8]
    site = tmp_path / "site.yaml"
    site.write_text("site: {name: D, start: 2026-11-01, duration: 60 d, round_interval: 36 h}\n"
                    "monthly: [{month: 11, mean: 5 degC, min: 0 degC}]\nbays: [{name: A}]\n")
    result = runner.invoke(app, ["storage", str(site)])
    assert result.exit_code == 2 and "whole number of days" in result.stderr
    assert str(site) in result.stderr


def test_errors_name_their_file(tmp_path):
    site = tmp_path / "site.yaml"
    site.write_text("site: {name: D, start: 2026-11-01, duration: 60 d}\n"
                    "monthly: [{month: 11, mean: 5 degC, min: 0 degC}]\nbays: [{name: A}]\n"
                    "inventory: [{id: B1, chemistry: agm, nominal_voltage: 12 V, capacity: 60 Ah,"
                    " state_of_charge: 80 %, bay: A}]\n")
    result = runner.invoke(app, ["storage", str(site)])
    assert result.exit_code == 2
    assert "no temperature for 2026-12-01" in result.stderr and str(site) in result.stderr


def test_extra_inventory_columns_are_carried_as_notes(tmp_path):
    csv_path = tmp_path / "batteries.csv"
    csv_path.write_text("id,owner,phone,chemistry,nominal_voltage,capacity,state_of_charge,bay\n"
                        "B1,shed,555 0100,agm,12 V,60 Ah,80 %,A\n", encoding="utf-8")
    site = tmp_path / "site.yaml"
    site.write_text("site: {name: D, start: 2026-11-01, duration: 20 d}\n"
                    "monthly: [{month: 11, mean: 5 degC, min: 0 degC}]\nbays: [{name: A}]\n")
    result = runner.invoke(app, ["storage", str(site), "--inventory", str(csv_path)])
    assert result.exit_code == 0, result.stderr
    from chargeplan.planners.storage import read_inventory

    assert read_inventory(csv_path)[0].notes == "phone: 555 0100"


def _lakeside():
    from chargeplan.demo import example_paths

    return next(p for p in example_paths(include_storage=True) if "storage" in p.name)


def test_calendar_signals_changed_and_cancelled_rounds(tmp_path):
    # RFC 5545 3.8.7.4 (SEQUENCE), 3.8.7.2 (DTSTAMP) and 3.8.1.11 (STATUS:CANCELLED),
    # read back with the icalendar library
    import icalendar

    from chargeplan.planners.storage import load_site
    from chargeplan.render.ics import read_previous
    from chargeplan.render.storage_docs import calendar_ics

    first = dt.datetime(2026, 10, 1, 8, 0, tzinfo=dt.UTC)
    later = dt.datetime(2026, 10, 20, 9, 30, tzinfo=dt.UTC)
    site = load_site(_lakeside())
    path = tmp_path / "calendar.ics"
    path.write_bytes(calendar_ics(plan_storage(site), {}, first))
    assert calendar_ics(plan_storage(site), read_previous(path), later) == path.read_bytes()
    shorter = site.model_copy(update={"site": site.site.model_copy(
        update={"end": dt.date(2027, 3, 20)})})
    inventory = [r.model_copy(update={"state_of_charge_pct": 60.0, "rest_voltage_v": None})
                 if r.id == "LS-002" else r for r in site.inventory]
    changed = shorter.model_copy(update={"inventory": inventory})
    path.write_bytes(calendar_ics(plan_storage(changed), read_previous(path), later))
    events = {str(e["uid"]): e for e in icalendar.Calendar.from_ical(
        path.read_bytes()).walk("VEVENT")}
    first_round = events[next(u for u in events if u.startswith("2026-10-15"))]
    assert int(first_round["sequence"]) == 0  # LS-002 was charged at intake before, too
    gone = [e for u, e in events.items() if u.startswith(("2027-04-01", "2027-04-15"))]
    assert gone and all(str(e["status"]) == "CANCELLED" and int(e["sequence"]) == 1
                        for e in gone)
    assert all(e.decoded("dtstamp") == later for e in gone)
    moved = [e for u, e in events.items() if u.startswith("release-2027-03-20")]
    assert moved and int(moved[0]["sequence"]) == 0
    # kept as cancelled on the next run (unchanged bytes), and a round that comes back has
    # its SEQUENCE raised again, never back to 0 (RFC 5545 3.8.7.4: a lower one is stale)
    path.write_bytes(calendar_ics(plan_storage(changed), read_previous(path), later))
    assert calendar_ics(plan_storage(changed), read_previous(path), later) == path.read_bytes()
    back = calendar_ics(plan_storage(site), read_previous(path), later)
    events = {str(e["uid"]): e for e in icalendar.Calendar.from_ical(back).walk("VEVENT")}
    returned = [e for u, e in events.items() if u.startswith(("2027-04-01", "2027-04-15"))]
    assert returned and all(str(e["status"]) == "CONFIRMED" and int(e["sequence"]) == 2
                            for e in returned)


def test_calendar_over_one_with_timed_events_cancels_them_and_keeps_its_rounds(tmp_path):
    # a calendar.ics with timed events (a bench's, copied into the folder): read back, its
    # events are written once as CANCELLED (RFC 5545 3.8.1.11) among the all-day rounds,
    # in order of start, with no error for comparing a date with a date-time
    import icalendar

    from chargeplan.planners.storage import load_site
    from chargeplan.render.ics import EventSpec, read_previous, write_calendar
    from chargeplan.render.storage_docs import calendar_ics

    path = tmp_path / "calendar.ics"
    path.write_bytes(write_calendar(
        [EventSpec("job-1@bench", dt.datetime(2026, 10, 15, 8, 0),
                   dt.datetime(2026, 10, 15, 15, 24), "Charge b0 on A", "agm, 60 Ah",
                   location="bench channel A")], {}, prodid="-//test//EN",
        now=dt.datetime(2026, 10, 1, tzinfo=dt.UTC)))
    data = calendar_ics(plan_storage(load_site(_lakeside())), read_previous(path),
                        dt.datetime(2026, 10, 2, tzinfo=dt.UTC))
    events = list(icalendar.Calendar.from_ical(data).walk("VEVENT"))
    job = [e for e in events if str(e["uid"]) == "job-1@bench"]
    assert len(job) == 1 and str(job[0]["status"]) == "CANCELLED"
    assert job[0].decoded("dtstart") == dt.datetime(2026, 10, 15, 8, 0)
    starts = [e.decoded("dtstart").isoformat() for e in events]
    assert starts == sorted(starts) and len(events) > 1


def test_round_sheets_carry_the_freeze_remedies_staff_carry_out():
    # 2 A on 18 Ah empties a battery in about 9 h (Ah / A); empty lead-acid electrolyte
    # (SG about 1.100, BCI) freezes near -8 degC (TM 5-1185), so in a -18 degC yard one whose
    # load must stay on is moved to the warm room, and one whose load may come off has it
    # disconnected; the sheet says so, the arrow runs from the yard to the warm room, and
    # later rounds never ask to reconnect the load
    from chargeplan.render.storage_rounds import sheets

    bays = [{"name": "yard", "mains": True}, {"name": "shop", "mains": True, "offset": "+25 K"}]
    plan = plan_storage(_site([
        {**_battery(1, "flooded"), "bay": "yard", "parasitic_draw": "2 A", "loads": "connected",
         "capacity": "18 Ah"},
        {**_battery(2, "agm"), "bay": "yard", "parasitic_draw": "2 A", "capacity": "18 Ah"}],
        bays=bays, warm_room="shop", mean="-8 degC", low="-18 degC", days=60, round_days=14))
    v = plan.visits
    assert v.remedy[(v.battery == 0) & (v.kind == Kind.INTAKE)][0] == Remedy.MOVE
    assert v.remedy[(v.battery == 1) & (v.kind == Kind.INTAKE)][0] == Remedy.DISCONNECT
    found, _left = sheets(plan)
    lines = {line.battery: line for line in found[0].lines + found[1].lines
             if found[0].date == found[1].date} if len(found) > 1 else {
        line.battery: line for line in found[0].lines}
    assert lines["T-1"].location == "yard -> shop"
    assert "move it to shop and keep it there" in lines["T-1"].action
    assert "store it as it is" not in lines["T-1"].action
    assert "disconnect its load and leave it off" in lines["T-2"].action
    later = [line for sheet in found[1:] for line in sheet.lines if line.battery == "T-2"]
    assert later and not any("reconnect" in line.action for line in later)


def test_lithium_load_that_would_drain_it_is_disconnected_and_kept_off():
    # BU-702: lithium is stored at 40-50 % with its loads off; 1 A on 20 Ah is 5 %/h, below
    # the 40 % threshold within hours; a load that may come off is disconnected at intake
    # and never reconnected; one that must stay on (loads: connected) is not
    plan = plan_storage(_site([_battery(1, "lifepo4", soc="50 %", capacity="20 Ah",
                                        parasitic_draw="1 A"),
                               _battery(2, "lifepo4", soc="50 %", capacity="20 Ah",
                                        parasitic_draw="1 A", loads="connected")],
                              days=60, round_days=14))
    v = plan.visits
    intake = v.kind == Kind.INTAKE
    assert v.remedy[intake & (v.battery == 0)][0] == Remedy.DISCONNECT
    assert v.remedy[intake & (v.battery == 1)][0] == Remedy.NONE
    assert not v.freeze.any()  # not a freeze remedy: lithium has no electrolyte to freeze
    assert float(np.nanmin(plan.soc_daily[0])) > 40
    rows = [r for r in _rows(plan) if r["battery"] == "T-1"]
    assert "disconnect its load and leave it off" in rows[0]["action"]
    assert rows[0]["freeze_action"] == ""
    assert not any("reconnect" in r["action"] for r in rows[1:] if r["visit"] == "round")


def test_inventory_notes_and_extra_columns_reach_the_round_sheets(tmp_path):
    # README: "other columns are kept as notes on the round sheets"
    inventory = tmp_path / "inventory.csv"
    inventory.write_text("id,owner,chemistry,nominal_voltage,capacity,state_of_charge,bay,berth,"
                         "notes\nB1,harbour crew,flooded,12 V,100 Ah,80 %,A,9,keep upright\n")
    site = tmp_path / "site.yaml"
    site.write_text("site: {name: D, start: 2026-11-01, duration: 30 d, round_interval: 14 d}\n"
                    "monthly: [{month: 11, mean: 5 degC, min: 0 degC}]\n"
                    "bays: [{name: A, mains: true}]\n")
    out = tmp_path / "out"
    result = runner.invoke(app, ["storage", str(site), "--inventory", str(inventory), "-o",
                                 str(out)])
    assert result.exit_code == 0, result.stderr
    for name in ("rounds.md", "rounds.html"):
        page = html.unescape((out / name).read_text())
        assert "keep upright" in page and "berth: 9" in page, name
    assert "keep upright" not in (out / "readings.csv").read_text()


def test_a_waiting_charge_names_why_the_warm_room_will_not_do():
    # BU-410 Table 1: no lithium charge below 0 degC; a warm room that itself falls to
    # -3 degC is no place for it, and the sheet says so instead of sending it there
    bays = [{"name": "A", "mains": True}, {"name": "lab", "mains": True, "offset": "+9 K"}]
    plan = plan_storage(_site([_battery(1, "nmc", soc="20 %")], bays=bays, warm_room="lab",
                              mean="-10 degC", low="-12 degC", days=30, round_days=14))
    rows = _rows(plan)
    assert rows[0]["action"].startswith("a charge is due")
    assert "lab falls to -3 degC itself" in rows[0]["action"]


def test_calendar_has_every_visit_day_and_no_empty_round():
    # staff go by the calendar (RFC 5545 events read back with icalendar): an arrival between
    # rounds is an event; a round with nobody in store is none; a departure before the
    # season's end is a release, not the spring release
    import icalendar

    from chargeplan.render.storage_docs import calendar_ics

    plan = plan_storage(_site([
        _battery(1, "agm", arrive=dt.date(2026, 11, 20)),
        _battery(2, "agm", depart=dt.date(2026, 11, 5))], days=61, round_days=14))
    events = list(icalendar.Calendar.from_ical(calendar_ics(plan, {}, None)).walk("VEVENT"))
    days = {e.decoded("dtstart"): str(e["summary"]) for e in events}
    assert days[dt.date(2026, 11, 20)].startswith("Battery visit")
    assert days[dt.date(2026, 11, 5)].startswith("Release, ")
    assert days[dt.date(2026, 12, 31)].startswith("Spring release")
    assert dt.date(2026, 11, 15) not in days  # the round of 11-15: nobody is in store


def test_round_sheets_and_their_readings_template(tmp_path):
    out = tmp_path / "out"
    result = runner.invoke(app, ["storage", str(_lakeside()), "-o", str(out)])
    assert result.exit_code == 0, result.output
    sheet = (out / "rounds.md").read_text()
    schedule = list(csv.DictReader(io.StringIO((out / "schedule.csv").read_text())))
    first = schedule[0]
    # the sheet carries the engine's charger settings, exactly as the schedule has them
    assert first["charge_plan"] and first["charge_plan"] in sheet
    assert "## Round 1, 2026-10-15: shed north" in sheet
    assert "electrolyte level and SG" in sheet and "terminals and case" in sheet
    assert "returned to shed north" in sheet
    template = (out / "readings.csv").read_text()
    assert template.splitlines()[0].startswith("date,battery,owner,bay,expected_rest_voltage,"
                                               "rest_voltage")
    # read back as it is (all blank), then with one reading filled in
    from chargeplan.planners.storage import read_readings

    assert read_readings(out / "readings.csv") == []
    lines = template.splitlines()
    cells = lines[1].split(",")
    cells[5] = "12.10 V"
    (out / "readings.csv").write_text("\n".join([lines[0], ",".join(cells), *lines[2:]]) + "\n")
    assert [r.rest_voltage_v for r in read_readings(out / "readings.csv")] == [12.10]
    rerun = runner.invoke(app, ["storage", str(_lakeside()), "--readings",
                                str(out / "readings.csv")])
    assert rerun.exit_code == 0 and "reading: LS-001" in rerun.stdout


def test_warm_room_jobs_go_to_the_bench_and_its_air_is_checked(tmp_path):
    from chargeplan.physics.ventilation import ventilation_airflow_iec62485
    from chargeplan.planners.bench import read_bench_batteries
    from chargeplan.planners.storage import load_site

    out = tmp_path / "out"
    assert runner.invoke(app, ["storage", str(_lakeside()), "-o", str(out)]).exit_code == 0
    jobs = read_bench_batteries(out / "warm-room-2026-10-15.csv")
    assert [b.id for b in jobs] == ["LS-001", "LS-003", "LS-005"]
    # each battery's own temperature as it comes in from shed north: the site's October
    # minimum of 1 degC (not the workshop's 29 degC), so the bench warms cold lithium first
    assert all(b.temperature_c == 1 for b in jobs)
    # IEC 62485-2 cl. 7: Q = 0.05 n Igas C 10^-3; boost: vented 20, VRLA 8 mA/Ah
    plan = plan_storage(load_site(_lakeside()))
    day = plan.ventilation()[0]
    expected = 0.05 * 6 * 20 * 75 * 1e-3 + 0.05 * 6 * 8 * 18 * 1e-3
    assert day.airflow_m3_per_h == pytest.approx(expected)
    assert float(ventilation_airflow_iec62485(6, 75, 20)) == pytest.approx(0.45)
    assert "Ventilation of workshop" in (out / "procedure.md").read_text()
    # and every other bay where lead-acid charges: LS-002 (AGM, 6 cells, 60 Ah) at intake in
    # shed south, Q = 0.05 x 6 x 8 x 60 x 10^-3 m3/h (IEC 62485-2 cl. 7, VRLA boost)
    south = plan.bay_names.index("shed south")
    assert south in plan.charging_bays()
    assert plan.ventilation(south)[0].airflow_m3_per_h == pytest.approx(0.05 * 6 * 8 * 60e-3)
    assert "Ventilation of shed south" in (out / "procedure.md").read_text()


def test_maintainer_hold_follows_the_month():
    # BU-410: -3 mV/degC per cell about 25 degC (IEC 62485-2 Table 1: VRLA float 2.27 V/cell);
    # each hold is set for the warmest month until the next visit, so it never runs high
    from chargeplan.model.storage import SiteFile

    months = [(11, -3, -8), (12, 0, -5), (1, 3, -2), (2, 8, 2)]
    plan = plan_storage(SiteFile.model_validate({
        "site": {"name": "Depot", "start": dt.date(2026, 11, 1), "duration": "120 d",
                 "round_interval": "14 d", "policy": "maintainer"},
        "monthly": [{"month": m, "mean": f"{a} degC", "min": f"{b} degC"} for m, a, b in months],
        "bays": [{"name": "A", "mains": True}], "inventory": [_battery(1, "agm")]}))
    v = plan.visits
    held = np.flatnonzero(v.act == Act.MAINTAINER)
    mean = {m: a for m, a, _b in months}
    temps = set()
    for k in held:
        stretch = plan.dates[int(v.day[k]):int(v.end_day[k]) + 1]
        temp = max(mean[d.month] for d in stretch)
        temps.add(temp)
        assert float(plan.visit_hold_v[k]) == pytest.approx((2.27 + 0.003 * (25 - temp)) * 6,
                                                            abs=0.011)
    assert {0, 8} <= temps  # a November round spans into December: set for December's 0 degC
    rows = _rows(plan)
    assert all("do not measure the rest voltage" in r["action"] for r in rows
               if r["visit"] == "round")


@pytest.mark.parametrize(("chemistry", "cells", "soc", "temp", "storage"), [
    ("flooded", 6, 30, -5, False), ("agm", 6, 70, 20, False), ("lifepo4", 4, 20, 25, False),
    ("nmc", 3, 15, 20, True), ("gel", 12, 55, 5, False)])
def test_settings_planned_once_per_kind_match_the_engine_at_each_capacity(chemistry, cells, soc,
                                                                         temp, storage):
    # the engine planning each capacity itself (no charger: currents are C-rates) is the check
    from chargeplan.planners.storage_charges import REFERENCE_AH, charge_settings

    profiles = ProfileSet(use_environment=False)
    reference = charge_settings([(chemistry, cells, soc, temp, storage)], profiles)[0]
    for capacity in (7.0, 42.0, 260.0):
        own = _engine_setting(chemistry, cells, capacity, soc, temp, storage, profiles)
        scaled = reference.for_capacity(capacity)
        assert scaled.voltage_v == pytest.approx(own.voltage_v, abs=1e-9)
        assert scaled.current_a == pytest.approx(own.current_a, rel=1e-9)
        assert scaled.duration_s == pytest.approx(own.duration_s, rel=0.01)
        assert scaled.stages == own.stages
    assert REFERENCE_AH == 100.0


def _engine_setting(chemistry, cells, capacity, soc, temp, storage, profiles):
    from chargeplan.engine.planner import plan_charge
    from chargeplan.estimate import estimate_plans
    from chargeplan.model.storage import DAY_S
    from chargeplan.planners.storage_charges import _setting, battery_file

    charge = plan_charge(battery_file(chemistry, cells, capacity, temp, soc_pct=soc,
                                      storage_s=90 * DAY_S if storage else None),
                         profiles=profiles)
    estimate_plans([charge], profiles=profiles)
    return _setting(charge, temp)


def test_schedule_texts_made_once_per_kind_equal_each_visit_s_own():
    from chargeplan.render.storage_docs import action_text, charge_text

    batteries = [_battery(i, c, soc=s, parasitic_draw=d, capacity=f"{cap} Ah")
                 for i, (c, s, d, cap) in enumerate([
                     ("flooded", "40 %", "110 mA", 60), ("lifepo4", "20 %", None, 80),
                     ("lifepo4", "20 %", None, 100), ("nmc", "90 %", None, 50),
                     ("agm", "100 %", "30 mA", 20), ("gel", "60 %", None, 90)])]
    for b in batteries:
        if b["parasitic_draw"] is None:
            del b["parasitic_draw"]
    plan = plan_storage(_site(batteries, policy="maintainer", bays=WARM_BAYS, warm_room="warm",
                              **COLD))
    rows = _rows(plan)
    assert [r["action"] for r in rows] == [action_text(plan, k) for k in range(len(rows))]
    assert [r["charge_plan"] for r in rows] == [charge_text(plan, k) for k in range(len(rows))]


def test_plan_values_at_once_equal_each_visit_s_own():
    """The documents' vectorised forms of the plan's per-visit values give what the plan's
    own methods give, visit for visit (to the last bit)."""
    from chargeplan.render.storage_docs import setting_currents
    from chargeplan.render.storage_rounds import expected_rest_voltages

    batteries = [_battery(i, c, soc=s, capacity=f"{cap} Ah")
                 for i, (c, s, cap) in enumerate([
                     ("flooded", "40 %", 61), ("lifepo4", "20 %", 83), ("lifepo4", "60 %", 100),
                     ("nmc", "90 %", 47.5), ("agm", "30 %", 22), ("gel", "60 %", 90)])]
    plan = plan_storage(_site(batteries, policy="maintainer", bays=WARM_BAYS, warm_room="warm",
                              **COLD))
    every = np.arange(len(plan.visits))
    settings = [plan.setting_of(k) for k in every]
    assert any(s is not None for s in settings)
    assert setting_currents(plan, every).tolist() == pytest.approx(
        [np.nan if s is None else s.current_a for s in settings], nan_ok=True, rel=0, abs=0)
    expected = [plan.expected_rest_v(k) for k in every]
    assert np.isfinite(expected).any() and np.isnan(expected).any()
    assert expected_rest_voltages(plan, every).tolist() == pytest.approx(
        expected, nan_ok=True, rel=0, abs=0)


def test_each_round_sheet_carries_its_chemistries_cautions_and_the_deferral(tmp_path):
    # project rule: every human-readable output shows the cautions of its chemistry and
    # defers to the maker's datasheet, local codes and licensed practice; a round sheet
    # ("charge it fully", the charger setting) is read on its own, so each carries them
    from chargeplan.cautions import DEFERRAL, profile_cautions

    out = tmp_path / "out"
    result = runner.invoke(app, ["storage", str(_lakeside()), "-o", str(out)])
    assert result.exit_code == 0, result.output
    profiles = ProfileSet(use_environment=False)
    from chargeplan.planners.storage import load_site

    plan = plan_storage(load_site(_lakeside()))
    chemistry = {row.id: c for row, c in zip(plan.rows, plan.chemistry, strict=True)}
    markdown = (out / "rounds.md").read_text().replace("\\", "")
    page = html.unescape((out / "rounds.html").read_text())
    md_sheets = markdown.split("\n## Round ")[1:]
    html_sheets = page.split("<section>")[1:]
    assert md_sheets and len(md_sheets) == len(html_sheets)
    for md_sheet, html_sheet in zip(md_sheets, html_sheets, strict=True):
        on_sheet = {c for battery, c in chemistry.items() if f"| {battery} |" in md_sheet}
        assert on_sheet
        for sheet in (md_sheet, html_sheet):
            assert DEFERRAL in sheet
            for name in on_sheet:
                for line in profile_cautions(profiles.get(name))[:-1]:
                    assert line in sheet, (name, line)
        families = {profiles.get(name).family for name in on_sheet}
        if families == {"lead_acid"}:  # a sheet of lead-acid only carries no lithium lines
            assert "thermal runaway" not in md_sheet


def test_procedure_carries_each_profiles_own_cautions_as_its_plans_do():
    # the procedure's Cautions hold every line a plan of each chemistry on site carries
    # (chargeplan.cautions.profile_cautions, rule CP603), the profile's own lines included
    from chargeplan.cautions import profile_cautions
    from chargeplan.planners.storage import load_site

    profiles = ProfileSet(use_environment=False)
    plan = plan_storage(load_site(_lakeside()))
    text = procedure(plan, profiles=profiles)
    assert {"flooded", "agm"} <= set(plan.chemistry)
    for name in set(plan.chemistry):
        for line in profile_cautions(profiles.get(name))[:-1]:
            assert line in text, (name, line)
