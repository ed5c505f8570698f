"""The bench planner and the ventilation calculation."""

from __future__ import annotations

import datetime as dt
import json

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from typer.testing import CliRunner

from chargeplan.cli import app
from chargeplan.model.bench import BenchFile, Hours
from chargeplan.physics.ventilation import opening_area_iec62485, ventilation_airflow_iec62485
from chargeplan.planners.bench import plan_bench
from chargeplan.planners.ventilation import available_airflow, requirement

runner = CliRunner()


def test_iec62485_formula_and_factors():
    # IEC 62485-2 cl. 7: Q = v q s n Igas Crt 10^-3, v = 24, q = 0.42e-3 m3/Ah, s = 5
    assert 24 * 0.42e-3 * 5 == pytest.approx(0.05, abs=0.001)
    # 6 vented cells, 100 Ah, boost (Igas 20 mA/Ah, IEC 62485-2): 0.05 x 6 x 20 x 100 x 1e-3
    assert ventilation_airflow_iec62485(6, 100, 20) == pytest.approx(0.6)
    assert requirement(6, 100, "vented", "boost").airflow_m3_per_h == pytest.approx(0.6)
    # Igas: vented float 5, VRLA float 1, VRLA boost 8 mA/Ah
    assert requirement(6, 100, "vented", "float").airflow_m3_per_h == pytest.approx(0.15)
    assert requirement(6, 100, "vrla", "float").airflow_m3_per_h == pytest.approx(0.03)
    assert requirement(6, 100, "vrla", "boost", batteries=5).airflow_m3_per_h == pytest.approx(1.2)
    # A = 28 Q cm2
    assert opening_area_iec62485(0.6) == pytest.approx(16.8)
    assert available_airflow(None, 28.0) == pytest.approx(1.0)
    # mechanical and natural ventilation are alternatives: the larger counts, not the sum
    assert available_airflow(2.0, 28.0) == pytest.approx(2.0)


def test_ventilation_command_json():
    result = runner.invoke(app, ["ventilation", "--cells", "6", "--capacity", "100Ah",
                                 "--type", "vented", "--mode", "boost", "--json",
                                 "--room-airflow", "0.5m3/h"])
    assert result.exit_code == 0
    data = json.loads(result.stdout)
    assert data["airflow_m3_per_h"] == pytest.approx(0.6)
    assert data["opening_area_cm2"] == pytest.approx(16.8)
    assert data["room_enough"] is False
    bad = runner.invoke(app, ["ventilation", "--cells", "6", "--capacity", "100Ah",
                              "--type", "nickel"])
    assert bad.exit_code == 2


CHANNEL = {"max_voltage": "16 V", "max_current": "10 A", "min_current": "0.1 A",
           "temperature_probe": True, "can_disable_high_voltage_stages": True}


def _bench(batteries, channels=None, room=None, budget=None):
    data = {"room": room or {"airflow": "10 m3/h"},
            "channels": channels or [{"name": "A", **CHANNEL}],
            "batteries": batteries, "hours": {"start": "08:00", "end": "18:00"}}
    if budget:
        data["mains_budget"] = budget
    return BenchFile.model_validate(data)


def _battery(i, chemistry="agm", capacity="20 Ah", soc="50 %", **extra):
    size = {"cells_in_series": 3} if chemistry == "nmc" else {"nominal_voltage": "12 V"}
    return {"id": f"b{i}", "chemistry": chemistry, **size, "capacity": capacity,
            "state_of_charge": soc, "temperature": "20 degC", **extra}


def test_lithium_never_on_a_channel_that_cannot_switch_off_high_voltage_stages():
    # common practice: a lead-acid desulfation or equalization stage damages lithium
    channels = [{"name": "old", **CHANNEL, "can_disable_high_voltage_stages": False,
                 "lithium_mode": True},
                {"name": "li", **CHANNEL, "lithium_mode": True}]
    plan = plan_bench(_bench([_battery(1, "lifepo4")], channels))
    assert "cannot switch off" in plan.fit[0][0]
    assert [plan.bench.channels[j.channel].name for j in plan.jobs] == ["li"]


def test_a_battery_that_fits_nowhere_is_reported_and_the_rest_scheduled():
    plan = plan_bench(_bench([_battery(1), _battery(2, "lifepo4")]))
    assert {j.battery for j in plan.jobs} == {0}
    assert "no lithium mode" in plan.unscheduled[1]


def test_ventilation_staggers_gassing_batteries():
    # two 100 Ah flooded batteries; the room gives 1.5 times what one gasses (IEC 62485-2
    # cl. 7), so they must not charge at once
    batteries = [_battery(i, "flooded", "100 Ah") for i in (1, 2)]
    channels = [{"name": "A", **CHANNEL, "unattended": True},
                {"name": "B", **CHANNEL, "unattended": True}]
    wide = plan_bench(_bench(batteries, channels, room={"airflow": "100 m3/h"}))
    one = max(o.airflow_m3_per_h for o in wide.options.values())
    plan = plan_bench(_bench(batteries, channels, room={"airflow": f"{1.5 * one} m3/h"}))
    assert len(plan.jobs) == 2
    first, second = sorted(plan.jobs, key=lambda j: j.start_min)
    assert second.start_min >= first.end_min - 1e-6  # never gassing at the same time
    assert plan.peak_airflow_m3_per_h <= 1.5 * one + 1e-9
    alone = plan_bench(_bench(batteries[:1], room={"airflow": f"{one / 2} m3/h"}))
    # A = 28 Q cm2 (IEC 62485-2 cl. 7)
    assert f"needs {one:.3g} m3/h" in alone.unscheduled[0]
    assert f"{28 * one:.3g} cm2" in alone.unscheduled[0]


@st.composite
def benches(draw):
    chems = ["flooded", "agm", "gel", "lifepo4", "nmc"]
    batteries = [_battery(i, draw(st.sampled_from(chems)),
                          f"{draw(st.integers(5, 120))} Ah", f"{draw(st.integers(0, 90))} %")
                 for i in range(draw(st.integers(1, 8)))]
    channels = [{"name": f"ch{c}", **CHANNEL,
                 "max_current": f"{draw(st.integers(2, 30))} A",
                 "lithium_mode": draw(st.booleans()),
                 "can_disable_high_voltage_stages": draw(st.integers(0, 4)) > 0,
                 "unattended": draw(st.booleans())}
                for c in range(draw(st.integers(1, 4)))]
    room = {"airflow": f"{draw(st.floats(0.2, 5.0)):.2f} m3/h"}
    budget = f"{draw(st.integers(100, 3000))} W"
    return _bench(batteries, channels, room, budget)


@settings(max_examples=150, deadline=None)
@given(bench=benches())
def test_schedule_respects_channels_airflow_and_budget(bench):
    plan = plan_bench(bench)
    room = plan.room_airflow_m3_per_h
    for job in plan.jobs:
        assert plan.fit[job.battery][job.channel] == "fit"
        b = plan.batteries[job.battery]
        channel = bench.channels[job.channel]
        if b.chemistry in ("lifepo4", "nmc"):
            assert channel.lithium_mode and channel.can_disable_high_voltage_stages
        span = plan.calendar.span_at(job.start_min)
        assert span is not None  # someone is there to connect it
        # an attended charge also ends inside that span, and so does every lithium charge
        # (its caution: do not leave the charge unattended; chargeplan.cautions)
        if not channel.unattended or b.chemistry in ("lifepo4", "nmc"):
            assert job.end_min <= plan.calendar.closes[span] + 1e-6
        same = [j for j in plan.jobs if j.channel == job.channel and j is not job]
        assert all(j.end_min <= job.start_min + 1e-6 or j.start_min >= job.end_min - 1e-6
                   for j in same)
    for t in {j.start_min for j in plan.jobs}:
        running = [j for j in plan.jobs if j.start_min <= t < j.end_min]
        assert sum(j.airflow_m3_per_h for j in running) <= room + 1e-6  # IEC 62485-2 cl. 7
        assert sum(j.power_w for j in running) <= bench.mains_budget_w + 1e-6
    assert len(plan.jobs) + len(plan.unscheduled) == len(plan.batteries)


@pytest.mark.parametrize(("text", "fragment"), [
    ("room: {airflow: 5 m3/h}\nchannels: []\n", "channels"),
    ("room: {}\nchannels: [{name: A, max_voltage: 16 V, max_current: 4 A}]\n", "room"),
    ("room: {airflow: 5 m3/h}\nchannels: [{name: A, max_voltage: 16 V, max_current: 4 A},"
     " {name: A, max_voltage: 16 V, max_current: 4 A}]\n", "two channels are named A"),
])
def test_bad_bench_files_exit_2(tmp_path, text, fragment):
    path = tmp_path / "bench.yaml"
    path.write_text(text)
    result = runner.invoke(app, ["bench", str(path)])
    assert result.exit_code == 2 and fragment in result.stderr
    assert "Traceback" not in result.output


def test_bench_command_writes_documents(tmp_path):
    from chargeplan.demo import example_paths

    path = next(p for p in example_paths(include_storage=True) if p.name.startswith("bench"))
    out = tmp_path / "out"
    result = runner.invoke(app, ["bench", str(path), "-o", str(out)])
    assert result.exit_code == 0, result.output
    html = (out / "bench.html").read_text()
    assert "<svg" in html and "Setup cards" in (out / "cards.html").read_text()
    assert "0.5 m" in html
    assert "hydrogen" in html and "thermal runaway" in html and "Ventilation" in html
    assert "licensed practice" in (out / "bench.md").read_text()
    docs = [p for p in out.iterdir() if p.name.startswith("setpoints-")]
    assert docs and all(json.loads(p.read_text())["format"] == "chargeplan-setpoints"
                        for p in docs)


def test_duplicate_battery_ids_are_refused(tmp_path):
    path = tmp_path / "bench.yaml"
    path.write_text("room: {airflow: 5 m3/h}\nchannels: [{name: A, max_voltage: 16 V, "
                    "max_current: 4 A}]\nbatteries:\n"
                    "  - {id: x, chemistry: agm, nominal_voltage: 12 V, capacity: 24 Ah, "
                    "state_of_charge: 50 %, temperature: 20 degC}\n"
                    "  - {id: x, chemistry: flooded, nominal_voltage: 12 V, capacity: 24 Ah, "
                    "state_of_charge: 50 %, temperature: 20 degC}\n")
    result = runner.invoke(app, ["bench", str(path)])
    assert result.exit_code == 2 and "share an id" in result.stderr


def test_work_that_does_not_fit_goes_to_the_next_working_day():
    # one channel, a working span shorter than two charges: the second starts at the next
    # opening, never at night
    batteries = [_battery(i, "agm", "20 Ah", "30 %") for i in (1, 2)]
    bench = _bench(batteries)
    each = max(plan_bench(bench).duration_min.values())
    close = dt.datetime(2026, 12, 7, 8, 0) + dt.timedelta(minutes=1.5 * each)
    bench = bench.model_copy(update={"hours": Hours.model_validate(
        {"start": "08:00", "end": close.strftime("%H:%M")}), "date": dt.date(2026, 12, 7)})
    plan = plan_bench(bench)
    first, second = sorted(plan.jobs, key=lambda j: j.start_min)
    assert plan.moment(first.start_min) == dt.datetime(2026, 12, 7, 8, 0)
    assert plan.moment(second.start_min) == dt.datetime(2026, 12, 8, 8, 0)
