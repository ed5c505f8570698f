"""The storage planner against published rates, the trade's facts and the cold rules."""

from __future__ import annotations

import datetime as dt

import pytest
from typer.testing import CliRunner

from chargeplan.cli import app
from chargeplan.errors import InputError
from chargeplan.model.storage import SiteFile
from chargeplan.physics.self_discharge import self_discharge_rate
from chargeplan.planners.storage import InputErrors, plan_storage
from chargeplan.profiles import load_builtin

runner = CliRunner()
MONTH = 30.4375  # days


def _site(batteries, *, mean="20 degC", low="15 degC", days=61, round_days=None, policy="top-up",
          bays=None, warm_room=None):
    site = {"name": "Test depot", "start": dt.date(2026, 11, 1),
            "duration": f"{days} d", "round_interval": f"{round_days or days} d",
            "policy": policy}
    if warm_room:
        site["warm_room"] = warm_room
    return SiteFile.model_validate({
        "site": site,
        "periods": [{"start": dt.date(2026, 11, 1), "end": dt.date(2027, 12, 31),
                     "mean": mean, "min": low}],
        "bays": bays or [{"name": "A", "mains": True}],
        "inventory": batteries,
    })


def _battery(i, chemistry, soc="100 %", bay="A", capacity="50 Ah", **extra):
    size = {"cells_in_series": 3} if chemistry == "nmc" else {"nominal_voltage": "12 V"}
    return {"id": f"T-{i}", "chemistry": chemistry, **size, "capacity": capacity,
            "state_of_charge": soc, "bay": bay, **extra}


@pytest.mark.parametrize(("pid", "low", "high"), [
    # Battery University / D. Darling "self-discharge": Li-ion 2-3 %/month
    ("lifepo4", 2, 3), ("nmc", 2, 3),
    # general lead-acid references: lead-antimony 8-40, lead-calcium (AGM, gel) 2-10 %/month
    ("flooded", 8, 40), ("agm", 2, 10), ("gel", 2, 10),
])
def test_self_discharge_rates_in_published_ranges(pid, low, high):
    rate = load_builtin(pid).storage.self_discharge.value * MONTH
    assert low <= rate <= high
    assert load_builtin(pid).storage.doubling.value == 10.0  # BU-802b


def test_rate_doubles_per_10_degc():
    # BU-802b: the self-discharge rate about doubles per 10 degC
    assert self_discharge_rate(4.0, 30.0, 20.0, 10.0) == pytest.approx(8.0)
    warm = plan_storage(_site([_battery(1, "agm")], mean="30 degC"), plan_top_ups=False)
    cool = plan_storage(_site([_battery(1, "agm")], mean="20 degC"), plan_top_ups=False)
    loss_warm = 100 - warm.soc_daily[0, 9]
    loss_cool = 100 - cool.soc_daily[0, 9]
    assert loss_warm == pytest.approx(2 * loss_cool, rel=1e-4)


def test_two_months_at_room_temperature():
    # common practice: over two months at room temperature a flooded battery loses a
    # noticeable part of its charge (a fifth is not unusual); LFP very little
    plan = plan_storage(_site([_battery(1, "flooded"), _battery(2, "lifepo4", soc="50 %")]),
                        plan_top_ups=False)
    flooded_loss = 100 - plan.soc_daily[0, -1]
    lfp_loss = 50 - plan.soc_daily[1, -1]
    assert 12 <= flooded_loss <= 30
    assert lfp_loss <= 5
    assert not plan.top_ups  # one round at the start, none due yet at 100 %


def test_lead_acid_topped_up_before_it_sulfates():
    # common practice: top up lead-acid before 75-80 %
    plan = plan_storage(_site([_battery(1, "flooded")], days=120, round_days=14))
    assert plan.top_ups
    assert all(t.soc_before >= 75 - 1e-6 for t in plan.top_ups)
    assert plan.soc_daily[0].min() >= 70
    assert "bulk" in plan.top_ups[0].plan


def test_freeze_risk_is_met_with_a_top_up_in_time():
    # US Army TM 5-1185 Table III with the BCI table: a battery at 40 % (SG ~1.176) freezes
    # near -22 degC; the planner charges it before a -20 degC spell
    site = _site([_battery(1, "flooded", soc="100 %")], mean="-5 degC", low="-20 degC",
                 days=90, round_days=14)
    plan = plan_storage(site)
    assert (plan.first_freeze_day < 0).all()
    frozen = plan_storage(_site([_battery(1, "flooded")], mean="-30 degC", low="-65 degC"))
    assert frozen.would_freeze[0]  # a full battery freezes at about -60 degC
    assert any(n.code == "freezes-full" for n in frozen.notes)


def test_lithium_never_charged_in_a_frozen_bay():
    # BU-410 Table 1: never charge lithium below 0 degC
    # (a load that must stay on drains it, so charges fall due in the cold)
    batteries = [_battery(1, "nmc", soc="45 %", parasitic_draw="40 mA", loads="connected")]
    cold = plan_storage(_site(batteries, mean="-5 degC", low="-10 degC", days=60,
                              round_days=7))
    assert not cold.top_ups and cold.postponed
    bays = [{"name": "A", "mains": True}, {"name": "warm", "mains": True, "offset": "+20 K"}]
    moved = plan_storage(_site(batteries, mean="-5 degC", low="-10 degC", days=60,
                               round_days=7, bays=bays, warm_room="warm"))
    assert moved.top_ups and all(t.where == "warm" for t in moved.top_ups)


def test_lithium_is_kept_off_maintainers():
    # rule CP206 and BU-702: lithium is not floated, so no maintainer holds it, even where the
    # bay stays above 0 degC and its maintainers have a lithium mode
    bays = [{"name": "A", "mains": True, "lithium_maintainer": True}]
    plan = plan_storage(_site([_battery(1, "lifepo4", soc="50 %"), _battery(2, "agm")],
                              low="2 degC", policy="maintainer", bays=bays), plan_top_ups=False)
    assert not plan.on_maintainer[0] and plan.on_maintainer[1]


def test_inventory_csv_reports_every_bad_row(tmp_path):
    csv_path = tmp_path / "batteries.csv"
    csv_path.write_text(
        "\ufeffid,owner,chemistry,nominal_voltage,capacity,state_of_charge,bay\r\n"
        "B1,shed,agm,12 V,60 Ah,80 %,A\r\n"
        "B2,shed,nicad,12 V,60 Ah,80 %,A\r\n"
        "B3,shed,agm,12 V,,80 %,A\r\n"
        'B4,"shed,agm,12 V,60 Ah,80 %,A\r\n', encoding="utf-8")
    site = tmp_path / "site.yaml"
    site.write_text("site: {name: Depot, start: 2026-11-01, duration: 30 d}\n"
                    "monthly: [{month: 11, mean: 5 degC, min: 0 degC},"
                    " {month: 12, mean: 2 degC, min: -4 degC}]\n"
                    "bays: [{name: A}]\n")
    out = tmp_path / "out"
    result = runner.invoke(app, ["storage", str(site), "--inventory", str(csv_path),
                                 "-o", str(out)])
    assert result.exit_code == 2
    lines = result.stderr.strip().splitlines()
    assert any("line 4" in line and "capacity" in line for line in lines)
    assert "Traceback" not in result.output
    assert not out.exists()
    # the chemistry error is found by the planner, named with its battery
    csv_path.write_text("id,chemistry,nominal_voltage,capacity,state_of_charge,bay\n"
                        "B2,nicad,12 V,60 Ah,80 %,A\nB5,agm,12 V,60 Ah,80 %,Z\n")
    result = runner.invoke(app, ["storage", str(site), "--inventory", str(csv_path)])
    assert result.exit_code == 2
    assert "B2: chemistry" in result.stderr and "B5: bay" in result.stderr


@pytest.mark.parametrize(("site", "fragment"), [
    ("site: {name: D, start: 2026-11-01, end: 2026-10-01}", "not after start"),
    ("site: {name: D, start: 2026-11-01, duration: 30 d}\nmonthly: [{month: 11, mean: 5, "
     "min: 0 degC}]", "has no unit"),
])
def test_bad_site_files_exit_2(tmp_path, site, fragment):
    path = tmp_path / "site.yaml"
    path.write_text(site + "\nbays: [{name: A}]\n")
    result = runner.invoke(app, ["storage", str(path)])
    assert result.exit_code == 2 and fragment in result.stderr


def test_outputs_are_written_and_well_formed(tmp_path):
    import icalendar

    from chargeplan.demo import example_paths

    site = next(p for p in example_paths(include_storage=True) if "storage" in p.name)
    out = tmp_path / "out"
    result = runner.invoke(app, ["storage", str(site), "-o", str(out)])
    assert result.exit_code == 0, result.output
    names = {p.name for p in out.iterdir()}
    assert {"procedure.md", "procedure.html", "schedule.csv", "calendar.ics", "rounds.md",
            "rounds.html", "readings.csv", "warm-room-2026-10-15.csv"} <= names
    cal = icalendar.Calendar.from_ical((out / "calendar.ics").read_bytes())
    events = [c for c in cal.walk("VEVENT")]
    assert len(events) == 15  # 183 days (both ends in), a round every 14 days; the release
    procedure = (out / "procedure.md").read_text()
    # Battery Council International table: 75 % rested is 12.45 V on 6 cells
    assert "12.45 V (75 %)" in procedure
    assert "Never charge lithium below 0 °C" in procedure
    assert "licensed practice" in procedure
    assert "<script" not in (out / "procedure.html").read_text()
    again = runner.invoke(app, ["storage", str(site), "-o", str(out)])
    assert again.exit_code == 2 and "--force" in again.stderr


def test_huge_inventories_are_refused_up_front(monkeypatch):
    import chargeplan.planners.storage as storage

    monkeypatch.setattr(storage, "MEMORY_LIMIT_BYTES", 1000)
    with pytest.raises(InputError, match="split the inventory"):
        plan_storage(_site([_battery(1, "agm")]))


def test_fast_dischargers_are_flagged():
    from chargeplan.planners.storage import Reading
    # AGM rested table (from memory): 12.06 V is about 30 %, far below the predicted ~94 %
    # BCI table: 12.06 V rested is 25 %, far below the predicted ~94 % after 30 days
    plan = plan_storage(_site([_battery(1, "agm")], days=60), plan_top_ups=False,
                        readings=[Reading(dt.date(2026, 12, 1), "T-1", 12.06)])
    assert [f.code for f in plan.reading_flags] == ["fast-loss"]
    assert "faster than its chemistry" in plan.reading_flags[0].text
    fine = plan_storage(_site([_battery(1, "agm")], days=60), plan_top_ups=False,
                        readings=[Reading(dt.date(2026, 12, 1), "T-1", 12.8)])
    assert [f.code for f in fine.reading_flags] == ["reset"]


def test_bad_rows_exception_lists_each():
    error = InputErrors(["a: line 2: x", "a: line 3: y"])
    assert error.lines == ["a: line 2: x", "a: line 3: y"]


def test_maintainer_holds_the_compensated_float():
    # IEC 62485-2 Table 1: VRLA float 2.27 V/cell; BU-410: -3 mV/degC per cell about 25 degC
    bays = [{"name": "A", "mains": True}]
    plan = plan_storage(_site([_battery(1, "agm")], mean="20 degC", policy="maintainer",
                              bays=bays))
    assert plan.on_maintainer[0]
    expected = (2.27 + 0.003 * (25 - 20)) * 6
    assert f"{expected:.2f} V" in plan.maintainer[0]


def test_a_top_up_that_cannot_be_done_is_flagged_not_assumed():
    # BU-410 Table 1: lead-acid charges from -20 degC; below that, or in a bay without mains,
    # the top-up waits, and the freeze risk it leaves is reported (TM 5-1185 Table III)
    site = _site([_battery(1, "flooded", soc="30 %")], mean="-25 degC", low="-45 degC",
                 days=60, round_days=14)
    plan = plan_storage(site)
    assert not plan.top_ups and plan.postponed
    assert (plan.first_freeze_day >= 0).any()  # 30 %: SG 1.162, freezes near -20 degC
    assert plan.visits.freeze.all() or plan.visits.freeze[:-1].all()
    assert any(n.code == "no-charge-window" for n in plan.notes)
    no_mains = plan_storage(_site([_battery(1, "flooded")], days=150, round_days=14,
                                  bays=[{"name": "A", "mains": False}]))
    assert not no_mains.top_ups and no_mains.postponed


def test_nmc_is_never_floated_on_a_maintainer():
    # BU-702 / BU-808a: no float or trickle for lithium-ion (NMC)
    bays = [{"name": "A", "mains": True, "lithium_maintainer": True}]
    plan = plan_storage(_site([_battery(1, "nmc", soc="50 %")], low="5 degC",
                              policy="maintainer", bays=bays), plan_top_ups=False)
    assert not plan.on_maintainer[0]


def test_damaged_batteries_are_not_stored_as_they_are():
    # BU-808a: never revive lithium cells below 1.5 V/cell; a 12 V lead-acid battery at 6.3 V
    # reads like three cells (BCI table)
    nmc = {"id": "N", "chemistry": "nmc", "cells_in_series": 3, "capacity": "5 Ah",
           "rest_voltage": "4.0 V", "bay": "A"}
    agm = {"id": "G", "chemistry": "agm", "nominal_voltage": "12 V", "capacity": "20 Ah",
           "rest_voltage": "6.3 V", "bay": "A"}
    # a negative reading is a meter on reversed leads (common practice), named as such
    reversed_leads = {"id": "R", "chemistry": "flooded", "nominal_voltage": "12 V",
                      "capacity": "60 Ah", "rest_voltage": "-12.4 V", "bay": "A"}
    plan = plan_storage(_site([nmc, agm, reversed_leads]), plan_top_ups=False)
    notes = " | ".join(n.text for n in plan.notes)
    assert notes.count("do not store it as it is") == 3
    assert "leads are reversed" in notes
