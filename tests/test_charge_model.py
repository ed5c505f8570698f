"""The charge simulation against the trade's facts, conservation, and its own contracts."""

from __future__ import annotations

import numpy as np
import pytest

from chargeplan.estimate import CAUTIOUS_KNEE_PCT, estimate_plans
from chargeplan.physics.discharge import peukert_runtime_h
from chargeplan.simulation import simulate_plan

from .conftest import battery, plan_of


def _plan(chemistry: str, soc: str = "50 %", **battery_fields):
    fields = {"chemistry": chemistry, "capacity": "100 Ah", **battery_fields}
    data = battery(battery=fields, state={"state_of_charge": soc})
    for section in data.values():
        if isinstance(section, dict):
            for key in [k for k, v in section.items() if v is None]:
                del section[key]
    return plan_of(data)


NMC = {"nominal_voltage": None, "cells_in_series": 3}


def test_peukert_worked_example():
    # Peukert's law (W. Peukert, 1897): 100 Ah (20 h), k = 1.2, at 10 A:
    # t = 20 * (100 / (10 * 20)) ** 1.2 h = 8.7055 h
    assert peukert_runtime_h(100, 10, 20, 1.2) == pytest.approx(20 * (100 / 200) ** 1.2)
    assert peukert_runtime_h(100, 10, 20, 1.2) == pytest.approx(8.7055, abs=1e-4)
    # at the rated current the rated time, whatever k (the law's defining point)
    assert peukert_runtime_h(100, 5, 20, 1.4) == pytest.approx(20.0)
    # above the rated current, a larger k means a shorter runtime
    k = np.array([1.0, 1.1, 1.2, 1.3, 1.5])
    assert np.all(np.diff(peukert_runtime_h(100, 10, 20, k)) < 0)


def test_lamp_facts(tmp_path, write_yaml):
    # common practice: a 100 W lamp on a 12 V battery draws about 8.3 A; a quarter hour of
    # it takes about 2.1 Ah, near a quarter of a 9 Ah battery; a 9 Ah lead-acid battery is
    # flat in just over an hour at the very most, and sooner with Peukert's law.
    from chargeplan.api import load_battery_file
    from chargeplan.planners.readings import runtime

    amps = 100 / 12
    assert amps == pytest.approx(8.3, abs=0.05)
    assert amps * 0.25 == pytest.approx(2.1, abs=0.05)
    assert amps * 0.25 / 9 == pytest.approx(0.25, abs=0.02)
    path = write_yaml(battery(battery={"chemistry": "flooded", "capacity": "9 Ah"},
                              state={"state_of_charge": "100 %"}))
    result = runtime(load_battery_file(path), "100 W")
    assert result.current_a == pytest.approx(8.33, abs=0.01)
    assert result.runtime_h < 9 / 8.33 <= 1.1  # less than plain Ah / A, itself just over 1 h
    assert result.runtime_h == pytest.approx(20 * (9 / (8.333 * 20)) ** 1.25, rel=1e-3)


@pytest.mark.parametrize("chemistry", ["flooded", "agm", "gel"])
def test_lead_acid_needs_more_charge_back(chemistry):
    # common practice (general lead-acid references): Ah in per Ah stored, flooded
    # 1.10-1.30, VRLA 1.02-1.15, here on the profile's own bulk current from 50 %
    low, high = {"flooded": (1.10, 1.30)}.get(chemistry, (1.02, 1.15))
    plan = _plan(chemistry)
    result = estimate_plans([plan])
    timed = [i for i, s in enumerate(plan.stages) if not s.estimate.per_day]
    charge_in = sum(plan.stages[i].estimate.charge_ah for i in timed)
    stored = (result.end_soc[0, timed[-1]] - 0.50) * 100
    assert low <= charge_in / stored <= high


@pytest.mark.parametrize(("chemistry", "extra"), [("lifepo4", {}), ("nmc", NMC)])
def test_lithium_returns_about_what_it_stores(chemistry, extra):
    # from memory: lithium coulombic efficiency about 99 %
    plan = _plan(chemistry, **extra)
    result = estimate_plans([plan])
    last = len(plan.stages) - 1
    charge_in = sum(s.estimate.charge_ah for s in plan.stages)
    stored = (result.end_soc[0, last] - 0.50) * 100
    assert 1.0 <= charge_in / stored <= 1.03


@pytest.mark.parametrize(("chemistry", "extra"),
                         [("flooded", {}), ("agm", {}), ("lifepo4", {}), ("nmc", NMC)])
def test_time_series_conserves_charge_and_keeps_limits(chemistry, extra):
    plan = _plan(chemistry, soc="20 %", **extra)
    run = simulate_plan(plan)
    s = run.series
    t = s["time_s"]
    dt = np.diff(np.append(t, t[-1] + (t[-1] - t[-2])))
    # Ah in the series (current x step) equals the reported Ah of every stage
    total = sum(stage.estimate.charge_ah for stage in plan.stages)
    assert np.sum(s["current_a"] * dt) / 3600 == pytest.approx(total, rel=0.02)
    assert np.all(s["soc"] <= 1.0 + 1e-12)
    for index, stage in enumerate(plan.stages):
        in_stage = s["stage"] == index
        assert np.all(s["voltage_v"][in_stage] <= stage.voltage_v + 1e-6)
        assert np.all(s["current_a"][in_stage] <= stage.current_a + 1e-9)


def test_many_batteries_together_equal_each_alone():
    plans = [_plan("agm"), _plan("lifepo4", soc="10 %"), _plan("nmc", soc="30 %", **NMC)]
    together = estimate_plans(plans)
    for row, alone_plan in enumerate([_plan("agm"), _plan("lifepo4", soc="10 %"),
                                      _plan("nmc", soc="30 %", **NMC)]):
        alone = estimate_plans([alone_plan])
        width = len(alone_plan.stages)
        assert np.allclose(together.duration_s[row, :width], alone.duration_s[0, :width])
        assert np.allclose(together.charge_ah[row, :width], alone.charge_ah[0, :width])


def test_timers_follow_the_estimate_with_margin_and_never_lengthen():
    # common practice: timers at the profile's 1.5 x the expected time, never below the time
    # to charge to a cautious 90 %; pre-charge timers are never tightened
    plan = _plan("nmc", soc="10 %", **NMC)
    rule_timer = plan.stage("bulk").timer_s
    estimate_plans([plan])
    bulk = plan.stage("bulk")
    cautious = (CAUTIOUS_KNEE_PCT - 10) / 100 * 100 * 1.02 / bulk.current_a * 3600
    assert bulk.timer_s <= rule_timer
    assert bulk.timer_s == pytest.approx(max(1.5 * bulk.estimate.duration_s, 1800, cautious))
    assert any("estimated" in t.text for t in plan.trace if t.target == "bulk.timer")


def test_precharge_timer_is_never_tightened():
    plan = _plan("lifepo4", soc="0 %")
    data = battery(battery={"chemistry": "lifepo4", "capacity": "100 Ah"},
                   state={"rest_voltage": "8.8 V", "cells_verified": True})
    plan = plan_of(data)
    before = plan.stage("precharge").timer_s
    estimate_plans([plan])
    assert plan.stage("precharge").timer_s == before


def test_a_stage_that_cannot_finish_is_reported_not_run_for_years():
    # a hot flooded battery at C/10: the gas current (IEC 62485-2 Igas) takes the current
    data = battery(battery={"chemistry": "flooded", "capacity": "100 Ah",
                            "overrides": {"bulk_current": "10 A"}},
                   state={"state_of_charge": "50 %"},
                   conditions={"battery_temperature": "49 degC"})
    plan = plan_of(data)
    result = estimate_plans([plan])
    assert result.converged[0]
    for stage in plan.stages:
        assert stage.estimate is None or stage.estimate.charge_ah < 1000
    if any("would stop with a fault" in f.message for f in plan.findings):
        bulk = plan.stage("bulk")
        assert bulk.estimate.duration_s == pytest.approx(bulk.timer_s)
