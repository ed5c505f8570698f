"""The bench through a working week: sheets that carry every finding, cold lithium, days and
hours, re-planning, the workshop's files, and the scheduling fixes."""

from __future__ import annotations

import csv
import datetime as dt
import io
import json
import re

import icalendar
import pytest
from typer.testing import CliRunner

from chargeplan.cli import app
from chargeplan.model.bench import BenchFile, ProgressRow
from chargeplan.physics.ventilation import gas_current_at_voltage, gas_current_from_charge
from chargeplan.planners.bench import plan_bench
from chargeplan.planners.bench_intake import COLD_INSTRUCTION
from chargeplan.planners.bench_progress import Progress
from chargeplan.render.bench_docs import bench_document, bench_sheets, setpoint_files
from chargeplan.render.bench_files import schedule_csv, schedule_ics

runner = CliRunner()
DAY = dt.date(2026, 12, 7)  # a Monday
PROBE = {"max_voltage": "16 V", "max_current": "10 A", "min_current": "0.1 A",
         "temperature_probe": True, "can_disable_high_voltage_stages": True}
LITHIUM = {**PROBE, "lithium_mode": True}


def _bench(batteries, channels=None, **extra):
    data = {"room": {"airflow": "10 m3/h"}, "date": DAY.isoformat(),
            "channels": channels or [{"name": "A", **PROBE}], "batteries": batteries,
            "hours": {"start": "08:00", "end": "18:00"}, **extra}
    return BenchFile.model_validate(data)


def _battery(i, chemistry="agm", capacity="20 Ah", soc="50 %", temperature="20 degC", **extra):
    size = {"cells_in_series": 3} if chemistry == "nmc" else {"nominal_voltage": "12 V"}
    return {"id": f"b{i}", "chemistry": chemistry, **size, "capacity": capacity,
            "state_of_charge": soc, "temperature": temperature, **extra}


def _text(html: str) -> str:
    import html as h

    return h.unescape(re.sub(r"<[^>]+>", " ", html))


def test_every_finding_reaches_the_card_bench_md_and_bench_html():
    # a LiFePO4 battery at 1 degC on a channel with no probe: the single plan warns (CP404)
    # that nothing stops the charge below 0 degC; so must every sheet built from the bench
    no_probe = {**LITHIUM, "temperature_probe": False}
    plan = plan_bench(_bench([_battery(1, "lifepo4", temperature="1 degC"), _battery(2),
                              _battery(3, "flooded", "60 Ah", "30 %")],
                             [{"name": "L", **no_probe}, {"name": "A", **PROBE}]))
    md = " ".join(bench_document(plan).replace("\\", "").split())
    html = " ".join(_text(bench_document(plan, html=True)).split())
    cards = " ".join(_text(bench_sheets(plan)["cards.html"]).split())
    lfp = next(j for j in plan.jobs if j.battery == 0)
    assert any(f.rule_id == "CP404" and "below 0 °C" in f.message
               for f in plan.plan_of(lfp).findings)
    for job in plan.jobs:
        for f in plan.plan_of(job).findings:
            message = " ".join(f.message.split())
            for sheet in (md, html, cards):
                assert f.rule_id in sheet and message in sheet
    assert "set the channel to its lithium mode" in cards
    assert "no probe on this channel" in cards and "attach the temperature probe" in cards
    assert "safety timer" in cards and "Stop at once if" in cards


def test_cards_sorted_by_channel_then_time():
    plan = plan_bench(_bench([_battery(i, soc="80 %") for i in range(4)],
                             [{"name": "A", **PROBE}, {"name": "B", **PROBE}]))
    cards = bench_sheets(plan)["cards.html"]
    heads = re.findall(r"<h3>(\w+): (b\d)", cards)
    by_plan = [(plan.bench.channels[j.channel].name, plan.batteries[j.battery].id)
               for j in sorted(plan.jobs, key=lambda j: (j.channel, j.start_min))]
    assert heads == by_plan


def test_cold_lithium_waits_for_a_warm_up_and_its_card_says_measure():
    # BU-410 Table 1: no lithium charging below 0 degC cell temperature
    plan = plan_bench(_bench([_battery(1, "lifepo4", temperature="-5 degC")],
                             [{"name": "L", **LITHIUM}]))
    (job,) = plan.jobs
    assert plan.moment(job.start_min) >= dt.datetime.combine(DAY, dt.time(12, 0))  # 4 h
    assert plan.plan_of(job).battery.temperature_c >= 0.0
    assert COLD_INSTRUCTION in _text(bench_sheets(plan)["cards.html"])
    assert "CP104" in schedule_csv(plan)


def test_a_night_shift_and_closed_days():
    hours = {"monday": {"start": "22:00", "end": "06:00"}, "tuesday": "closed"}
    plan = plan_bench(_bench([_battery(i, "nmc", "5 Ah", "30 %") for i in range(3)],
                             [{"name": "L", **LITHIUM}], hours=hours))
    assert plan.jobs
    for job in plan.jobs:
        span = plan.calendar.span_at(job.start_min)
        assert span is not None and job.end_min <= plan.calendar.closes[span] + 1e-6
        start = plan.moment(job.start_min)
        assert start.weekday() in (0, 1) and (start.hour >= 22 or start.hour < 6)


def test_a_conditioning_overcharge_ends_while_someone_is_there_even_unattended():
    # CP203 / CP205: desulfation and equalization need someone nearby to the end, so an
    # unattended channel does not take one past closing; one that cannot end inside any
    # working span is not scheduled, and says why
    channel = {**PROBE, "unattended": True}
    full = plan_bench(_bench([_battery(1, "flooded", "24 Ah", "95 %", desulfate=True),
                              _battery(2, "flooded", "24 Ah", "95 %", equalize=True)],
                             [{"name": "U", **channel}]))
    assert len(full.jobs) == 2
    for job in full.jobs:
        span = full.calendar.span_at(job.start_min)
        assert span is not None and job.end_min <= full.calendar.closes[span] + 1e-6
    short = plan_bench(_bench([_battery(1, "flooded", "60 Ah", "20 %", desulfate=True)],
                              [{"name": "U", **channel}],
                              hours={"start": "08:00", "end": "12:00"}))
    assert not short.jobs and "needs a person there" in short.unscheduled[0]


def test_unattended_channel_runs_past_closing_but_nothing_starts_at_night():
    # the queue on an unattended channel: the next battery waits for the next opening
    channel = {**PROBE, "unattended": True, "max_current": "2 A"}
    plan = plan_bench(_bench([_battery(i, "flooded", "60 Ah", "20 %") for i in range(3)],
                             [{"name": "U", **channel}], hours={"start": "08:00",
                                                                 "end": "12:00"}))
    assert any(plan.calendar.span_at(j.end_min) is None for j in plan.jobs)  # past closing
    for job in plan.jobs:
        assert plan.calendar.span_at(job.start_min) is not None


def test_due_as_a_date_time():
    plan = plan_bench(_bench([_battery(1, due="2026-12-08T10:00")]))
    assert plan.moment(plan.due_min[0]) == dt.datetime(2026, 12, 8, 10, 0)
    assert "2026-12-08T10:00" in schedule_csv(plan)


def _files(plan):
    return {**bench_sheets(plan), "bench.md": bench_document(plan),
            "bench.html": bench_document(plan, html=True), "schedule.csv": schedule_csv(plan)}


def test_replan_with_no_progress_at_opening_is_the_same_schedule_byte_for_byte():
    bench = _bench([_battery(i, soc="40 %") for i in range(4)],
                   [{"name": "A", **PROBE}, {"name": "B", **PROBE}])
    first = plan_bench(bench)
    again = plan_bench(bench, now=dt.datetime.combine(DAY, dt.time(8, 0)), progress=Progress())
    assert _files(first) == _files(again)
    assert schedule_ics(first) == schedule_ics(again)


def test_replan_keeps_what_is_on_charge_and_drops_finished_and_faulted():
    bench = _bench([_battery(i, soc="40 %") for i in range(4)],
                   [{"name": "A", **PROBE}, {"name": "B", **PROBE}])
    now = dt.datetime.combine(DAY, dt.time(9, 30))
    rows = [ProgressRow(battery="b0", channel="B", started=dt.datetime.combine(DAY, dt.time(8))),
            ProgressRow(battery="b1", channel="A", started=dt.datetime.combine(DAY, dt.time(8)),
                        finished=dt.datetime.combine(DAY, dt.time(9))),
            ProgressRow(battery="b2", finished="faulted")]
    plan = plan_bench(bench, now=now, progress=Progress(rows=rows))
    kept = next(j for j in plan.jobs if j.battery == 0)
    assert kept.on_charge and plan.bench.channels[kept.channel].name == "B"
    assert plan.moment(kept.start_min) == dt.datetime.combine(DAY, dt.time(8))
    assert {j.battery for j in plan.jobs} == {0, 3}
    assert all(plan.moment(j.start_min) >= now for j in plan.jobs if not j.on_charge)
    assert "b2: faulted" in plan.summary() and "faulted: inspect" in schedule_csv(plan)


def test_schedule_csv_columns_and_ics_sequence(tmp_path):
    bench = _bench([_battery(i, soc="40 %") for i in range(3)])
    plan = plan_bench(bench)
    rows = list(csv.DictReader(io.StringIO(schedule_csv(plan))))
    assert set(rows[0]) >= {"battery", "channel", "start", "end", "chemistry", "due",
                            "warnings"}
    dt.datetime.fromisoformat(rows[0]["start"])  # ISO 8601
    first = schedule_ics(plan)
    (tmp_path / "schedule.ics").write_bytes(first)
    same = schedule_ics(plan, tmp_path / "schedule.ics")
    later = plan_bench(bench, now=dt.datetime.combine(DAY, dt.time(11, 0)))
    moved = schedule_ics(later, tmp_path / "schedule.ics")

    def events(data):
        return {str(e["UID"]): int(e["SEQUENCE"])
                for e in icalendar.Calendar.from_ical(data).walk("VEVENT")}

    assert events(first) == events(same) and set(events(first)) == set(events(moved))
    assert all(n == 0 for n in events(same).values())
    assert all(n == 1 for n in events(moved).values())  # RFC 5545 3.8.7.4: raised on change


def test_ics_keeps_an_unchanged_jobs_stamp_and_drops_a_finished_job_uncancelled(tmp_path):
    # the one calendar writer (render/ics.py) for the bench: an unchanged event keeps its
    # DTSTAMP and SEQUENCE (RFC 5545 3.8.7.2, 3.8.7.4); a job that finished is not in the
    # re-plan and is dropped, not written as STATUS:CANCELLED (3.8.1.11), which would tell
    # staff it never ran; each event names its channel as LOCATION
    bench = _bench([_battery(i, soc="40 %") for i in range(3)],
                   [{"name": "A", **PROBE}, {"name": "B", **PROBE}])
    plan = plan_bench(bench)
    path = tmp_path / "schedule.ics"
    path.write_bytes(schedule_ics(plan))

    def events(data):
        return {str(e["UID"]): e for e in icalendar.Calendar.from_ical(data).walk("VEVENT")}

    first = events(path.read_bytes())
    finished = next(j for j in plan.jobs if plan.moment(j.start_min).hour == 8)
    name = plan.batteries[finished.battery].id
    channel = plan.bench.channels[finished.channel].name
    later = dt.datetime.combine(DAY, dt.time(8, 0)) + dt.timedelta(
        minutes=finished.end_min - finished.start_min + 1)
    running = next(j for j in plan.jobs if j is not finished
                   and plan.moment(j.start_min).hour == 8)  # still on charge: unchanged
    rows = [ProgressRow(battery=name, channel=channel,
                        started=plan.moment(finished.start_min),
                        finished=plan.moment(finished.end_min)),
            ProgressRow(battery=plan.batteries[running.battery].id,
                        channel=plan.bench.channels[running.channel].name,
                        started=plan.moment(running.start_min))]
    again = events(schedule_ics(plan_bench(bench, now=later, progress=Progress(rows=rows)),
                                path))
    gone = set(first) - set(again)
    assert len(gone) == 1 and all(str(e["STATUS"]) != "CANCELLED" for e in again.values())
    unchanged = [uid for uid, e in again.items() if int(e["SEQUENCE"]) == 0]
    assert unchanged
    for uid, event in again.items():
        assert str(event["LOCATION"]).startswith("bench channel ")
        if uid in unchanged:  # the same stamp as before
            assert event["DTSTAMP"].to_ical() == first[uid]["DTSTAMP"].to_ical()


def test_cli_prints_what_moved_and_writes_the_sheets(tmp_path):
    path = tmp_path / "bench.yaml"
    import json

    path.write_text(json.dumps({"room": {"airflow": "10 m3/h"}, "date": DAY.isoformat(),
                                "channels": [{"name": "A", **PROBE}],
                                "batteries": [_battery(1), _battery(2)]}))
    out = tmp_path / "out"
    assert runner.invoke(app, ["bench", str(path), "-o", str(out)]).exit_code == 0
    for name in ("cards.html", "queues.html", "tags.html", "logs.html", "schedule.csv",
                 "schedule.ics"):
        assert (out / name).is_file()
    progress = tmp_path / "progress.csv"
    progress.write_text("battery,channel,started,finished\n")
    result = runner.invoke(app, ["bench", str(path), "-o", str(out), "--force", "--now",
                                 f"{DAY.isoformat()}T13:00", "--progress", str(progress)])
    assert result.exit_code == 0, result.output
    assert "moved: b" in result.stderr


def test_entry_mistake_exits_2_once_naming_the_battery_field(tmp_path):
    path = tmp_path / "bench.yaml"
    path.write_text("room: {airflow: 5 m3/h}\nchannels: [{name: A, max_voltage: 16 V, "
                    "max_current: 4 A}, {name: B, max_voltage: 16 V, max_current: 4 A}]\n"
                    "batteries:\n  - {id: x, chemistry: agm, nominal_voltage: 12 V, "
                    "cells_in_series: 3, capacity: 9 Ah, temperature: 20 degC}\n")
    result = runner.invoke(app, ["bench", str(path)])
    assert result.exit_code == 2
    assert "batteries[0].cells_in_series" in result.stderr
    assert result.stderr.count("\n") == 1


def test_power_max_lowers_the_current_and_says_so():
    free = plan_bench(_bench([_battery(1, "flooded", "100 Ah", "20 %")],
                             [{"name": "A", **PROBE, "unattended": True}]))
    assert len(free.jobs) == 1
    watts = free.options[(0, 0)].power_w
    capped = plan_bench(_bench([_battery(1, "flooded", "100 Ah", "20 %")],
                               [{"name": "A", **PROBE, "unattended": True,
                                 "power_max": f"{watts * 0.8:.0f} W"}]))
    assert len(capped.jobs) == 1
    option = capped.options[(0, 0)]
    assert option.power_w <= watts * 0.8 + 1e-6
    assert any(f.rule_id == "bench.power" and "current lowered" in f.message
               for f in option.plan.findings)


def test_lower_bound_counts_the_mains_budget():
    # two batteries, a budget for one at a time: the best order runs them one after the
    # other, and the bound says so (no gap for an optimal schedule)
    batteries = [_battery(i, "agm", "20 Ah", "50 %") for i in (1, 2)]
    channels = [{"name": "A", **PROBE, "unattended": True},
                {"name": "B", **PROBE, "unattended": True}]
    wide = plan_bench(_bench(batteries, channels))
    watts = max(o.power_w for o in wide.options.values())
    plan = plan_bench(_bench(batteries, channels, mains_budget=f"{watts * 1.5:.1f} W"))
    first, second = sorted(plan.jobs, key=lambda j: j.start_min)
    assert second.start_min >= first.end_min - 1e-6
    assert plan.lower_bound_min == pytest.approx(plan.makespan_min, abs=1.0)
    assert "at most 0 % from the best" in plan.summary()


def test_gas_current_follows_the_stage_voltage_iec62485():
    # IEC 62485-2 Table 1: vented float 5 mA/Ah at 2.23 V/cell, boost 20 mA/Ah at 2.40 V/cell
    assert gas_current_at_voltage(2.40, 2.23, 5, 2.40, 20) == pytest.approx(20.0)
    assert gas_current_at_voltage(2.23, 2.23, 5, 2.40, 20) == pytest.approx(5.0)
    assert gas_current_at_voltage(2.50, 2.23, 5, 2.40, 20) > 20.0
    # on a full battery nearly all current is gas: C/20 vented = 50 mA/Ah x fg 1 x fs 5
    assert gas_current_from_charge(5.0, 100.0, "vented") == pytest.approx(250.0)
    assert gas_current_from_charge(5.0, 100.0, "vrla") == pytest.approx(50.0)


def test_a_channel_that_cannot_switch_equalization_off_counts_as_equalizing():
    flooded = [_battery(1, "flooded", "100 Ah", "50 %")]
    off = plan_bench(_bench(flooded, [{"name": "A", **PROBE}]))
    on = plan_bench(_bench(flooded, [{"name": "A", **PROBE,
                                      "can_disable_high_voltage_stages": False}]))
    assert on.options[(0, 0)].airflow_m3_per_h > off.options[(0, 0)].airflow_m3_per_h


def test_log_sheet_pass_line_from_the_ocv_table():
    # flooded 12 V: the BCI table's 90 % row lies between 12.45 (75 %) and 12.65 V (100 %)
    plan = plan_bench(_bench([_battery(1, "flooded", "60 Ah", "30 %")]))
    assert 12.45 < plan.pass_voltage_v[0] < 12.65
    logs = _text(bench_sheets(plan)["logs.html"])
    assert f"{plan.pass_voltage_v[0]:.2f} V" in logs and "12–24 h" in logs


def test_bench_md_is_short():
    plan = plan_bench(_bench([_battery(i, ["agm", "flooded", "gel"][i % 3], soc="60 %")
                              for i in range(10)],
                             [{"name": n, **PROBE} for n in "ABCD"]))
    assert len(bench_document(plan).splitlines()) <= 60  # about 60 lines per 10 batteries


def test_tail_at_the_channel_maximum_asks_for_a_larger_current_not_a_finer_step(tmp_path):
    # a 100 Ah AGM ends absorption near C/50 = 2 A (BU-403: 0.5-5 % of C); a 0.5 A channel
    # can never reach a tail above its own current, whatever its step
    path = tmp_path / "b.yaml"
    path.write_text("battery: {name: t, chemistry: agm, nominal_voltage: 12 V, capacity: 100 Ah}\n"
                    "conditions: {battery_temperature: 20 degC}\n"
                    "charger: {max_voltage: 16 V, max_current: 0.5 A, min_current: 0.1 A, "
                    "current_step: 0.25 A, can_disable_high_voltage_stages: true, "
                    "temperature_probe: true}\n")
    result = runner.invoke(app, ["plan", str(path)])
    assert result.exit_code == 1
    assert "larger current" in result.output and "finer" not in result.output


def test_replan_reusing_the_estimates_equals_planning_again():
    from chargeplan.planners.bench import replan_bench

    bench = _bench([_battery(i, soc="40 %") for i in range(4)],
                   [{"name": "A", **PROBE}, {"name": "B", **PROBE}])
    now = dt.datetime.combine(DAY, dt.time(9, 30))
    progress = Progress(rows=[ProgressRow(battery="b0", channel="A",
                                          started=dt.datetime.combine(DAY, dt.time(8)))])
    fresh = plan_bench(bench, now=now, progress=progress)
    again = replan_bench(plan_bench(bench), now=now, progress=Progress(rows=progress.rows))
    assert schedule_csv(fresh) == schedule_csv(again)


def test_equalization_is_requested_per_battery_and_its_gas_counted():
    # a flooded battery asked to equalize gets the stage from the engine (state.equalize);
    # its airflow counts the stage's current as gas (IEC 62485-2 cl. 7, full battery)
    channels = [{"name": "A", **PROBE, "unattended": True}]
    asked = plan_bench(_bench([_battery(1, "flooded", "60 Ah", "80 %", equalize=True)],
                              channels))
    plain = plan_bench(_bench([_battery(1, "flooded", "60 Ah", "80 %", equalize=False)],
                              channels))
    assert "equalization" in [s.kind.value for s in asked.plans[(0, 0)].stages]
    assert "equalization" not in [s.kind.value for s in plain.plans[(0, 0)].stages]
    assert asked.options[(0, 0)].airflow_m3_per_h > plain.options[(0, 0)].airflow_m3_per_h


@pytest.mark.parametrize(("chemistry", "asked", "planned"), [
    ("flooded", {"desulfate": True}, "desulfation"),
    ("flooded", {"equalize": True}, "equalization"),
    ("agm", {"desulfate": True}, None),  # only with the maker's permission (an override)
    ("gel", {"desulfate": True}, None),  # never (the gel envelope forbids it)
    ("gel", {"equalize": True}, None),
])
def test_a_workshops_request_reaches_the_engine_which_still_decides(chemistry, asked,
                                                                     planned):
    # IEEE 450 / BU-804b (the engine's CP203 and CP205): a conditioning overcharge follows
    # absorption on a flooded battery; AGM needs the maker's permission; gel never
    channels = [{"name": "A", **PROBE, "unattended": True}]
    plan = plan_bench(_bench([_battery(1, chemistry, "60 Ah", "95 %", **asked)], channels))
    charge = plan.plans[(0, 0)]
    kinds = [s.kind.value for s in charge.stages]
    if planned:
        assert kinds.index(planned) == kinds.index("absorption") + 1
    else:
        assert not {"desulfation", "equalization"} & set(kinds)
        assert any("asked for but left out" in f.message for f in charge.findings)


def test_a_card_says_a_loaded_file_leaves_the_overcharge_to_the_person():
    # the setpoint file of a channel that loads files carries the normal charge only
    # (firmware.charge_program); the card tells the operator to run the desulfation by hand
    channels = [{"name": "F", **PROBE, "unattended": True, "loads_files": True}]
    plan = plan_bench(_bench([_battery(1, "flooded", "24 Ah", "95 %", desulfate=True)],
                             channels))
    card = _text(bench_sheets(plan)["cards.html"])
    assert "runs the normal charge only" in card and "desulfation stage below by hand" in card
    program = json.loads(next(iter(setpoint_files(plan).values())))
    assert "desulfation" not in [s["kind"] for s in program["stages"]]


def test_a_lithium_charge_ends_while_someone_is_there_even_on_an_unattended_channel():
    # the lithium caution says "do not leave the charge unattended" (chargeplan.cautions;
    # common practice for lithium packs): an unattended channel takes lead-acid past
    # closing, never lithium; one that cannot end inside a span is not scheduled, and says why
    channel = {**LITHIUM, "unattended": True, "max_current": "2 A"}
    hours = {"start": "08:00", "end": "12:00"}
    plan = plan_bench(_bench([_battery(1, "lifepo4", "100 Ah", "20 %"),
                              _battery(2, "nmc", "5 Ah", "20 %")],
                             [{"name": "U", **channel}], hours=hours))
    assert "bench.span" in plan.unscheduled[0]
    assert any("never left unattended" in m.text for m in plan.misfits[0][0])
    assert [plan.batteries[j.battery].id for j in plan.jobs] == ["b2"]
    for job in plan.jobs:
        span = plan.calendar.span_at(job.start_min)
        assert span is not None and job.end_min <= plan.calendar.closes[span] + 1e-6
    lead = plan_bench(_bench([_battery(3, "flooded", "60 Ah", "20 %")],
                             [{"name": "U", **PROBE, "unattended": True, "max_current": "2 A"}],
                             hours=hours))
    assert any(j.end_min > lead.calendar.closes[lead.calendar.span_at(j.start_min)]
               for j in lead.jobs)  # past closing
    queues = _text(bench_sheets(plan)["queues.html"])
    assert "a lead-acid charge may run past closing; lithium" in " ".join(queues.split())
    md = bench_document(plan)
    assert "unless its channel is marked" not in md


def test_every_sheet_carries_the_plans_own_cautions_whole_and_the_deferral():
    # project rule: every human-readable output shows its chemistry's cautions and defers to
    # the maker's datasheet, local codes and licensed practice; a card shows the plan's list
    # as the plan has it (one source: chargeplan.cautions.profile_cautions), not shortened
    plan = plan_bench(_bench([_battery(1, "lifepo4"), _battery(2, "nmc", "5 Ah"),
                              _battery(3, "flooded", "24 Ah")],
                             [{"name": "L", **LITHIUM}, {"name": "A", **PROBE}]))
    assert len(plan.jobs) == 3
    sheets = {name: " ".join(_text(page).split()) for name, page in bench_sheets(plan).items()}
    for name in ("cards.html", "queues.html", "tags.html", "logs.html"):
        page = sheets[name]
        assert "maker's datasheet, local codes or licensed practice" in page, name
        for job in plan.jobs:
            for line in plan.plan_of(job).cautions:
                assert " ".join(line.split()) in page, (name, line)
    for text in ("do not leave the charge unattended", "non-combustible surface",
                 "no float or trickle on NMC", "Bring a cold battery indoors"):
        assert text in sheets["cards.html"]
    # each log sheet (printed apart) carries its own battery's cautions and the deferral
    logs = sheets["logs.html"].split("Charge log:")[1:]
    assert len(logs) == 3
    for log in logs:
        assert "licensed practice" in log
        assert ("thermal runaway" in log) != ("hydrogen" in log)
