"""safety.verify: the independent envelope check catches every kind of crossing."""

from __future__ import annotations

import dataclasses

import pytest

from chargeplan import safety
from chargeplan.errors import EnvelopeViolation
from chargeplan.plan import Stage, StageKind
from chargeplan.profiles import hard_envelope

from .conftest import battery, plan_of


def _lfp_plan():
    return plan_of(battery(battery={"chemistry": "lifepo4", "capacity": "50 Ah"},
                           state={"rest_voltage": "13.1 V"}))


def test_a_good_plan_passes():
    plan = _lfp_plan()
    assert safety.violations(plan, hard_envelope("lifepo4")) == []


def test_voltage_above_lfp_maximum_is_caught():
    # cell handling guidelines: LFP never above 3.65 V/cell; 4 cells -> 14.6 V
    plan = _lfp_plan()
    plan.stages[-1].voltage_v = 14.61
    with pytest.raises(EnvelopeViolation, match="above the envelope"):
        safety.verify(plan, hard_envelope("lifepo4"))


def test_current_above_envelope_is_caught():
    plan = _lfp_plan()
    plan.stages[0].current_a = 50.1  # 1.0 It x 50 Ah is the envelope's 50 A
    assert any("current" in v for v in safety.violations(plan, hard_envelope("lifepo4")))


@pytest.mark.parametrize("kind", [StageKind.EQUALIZATION, StageKind.DESULFATION])
def test_lithium_never_gets_high_voltage_stages(kind):
    # common practice: a lead-acid desulfation or equalization stage damages lithium batteries
    plan = _lfp_plan()
    plan.stages.append(Stage(kind=kind, voltage_v=14.0, current_a=1.0))
    found = safety.violations(plan, hard_envelope("lifepo4"))
    assert any("never allowed for lithium" in v for v in found)


def test_lithium_interlock_below_zero_is_caught():
    # BU-410 Table 1: no lithium charging below 0 degC
    plan = _lfp_plan()
    plan.interlocks.charge_temperature_min_c = -0.5
    found = safety.violations(plan, hard_envelope("lifepo4"))
    assert any("below 0 °C" in v for v in found)


def test_lithium_that_holds_is_caught():
    plan = _lfp_plan()
    plan.finish = "hold"
    assert safety.violations(plan, hard_envelope("lifepo4"))


def test_lithium_held_at_its_voltage_without_bound_is_caught():
    # BU-409: no float for lithium; its constant-voltage stage ends within 4 h (common
    # practice, from memory: charger ICs time it out after a few hours)
    plan = _lfp_plan()
    absorption = plan.stage(StageKind.ABSORPTION)
    assert absorption is not None and safety.violations(plan, hard_envelope("lifepo4")) == []
    absorption.exits = [dataclasses.replace(e, value=6 * 3600.0) if e.kind.value == "duration"
                        else e for e in absorption.exits]
    absorption.timer_s = 6 * 3600.0
    found = safety.violations(plan, hard_envelope("lifepo4"))
    assert any("may hold lithium" in v and "more than 4 h" in v for v in found), found


def test_a_makers_long_lithium_absorption_is_held_to_3_5_h():
    # the engine never plans what safety.verify and the checker (CK316: a constant-voltage
    # timer within 4 h, the program's backstop 10 % beyond the stage's limit) refuse
    from chargeplan.plan import ExitKind

    plan = plan_of(battery(battery={"chemistry": "lifepo4", "capacity": "50 Ah",
                                    "overrides": {"absorption_time": "6 h"}},
                           state={"rest_voltage": "13.1 V"}))
    absorption = plan.stage(StageKind.ABSORPTION)
    assert [e.value for e in absorption.exits if e.kind == ExitKind.DURATION] == [3.5 * 3600]
    assert absorption.timer_s == 3.5 * 3600
    assert any(f.rule_id == "CP201" and "held to 3 h 30 min" in f.message
               for f in plan.findings), [f.message for f in plan.findings]
    short = plan_of(battery(battery={"chemistry": "lifepo4", "capacity": "50 Ah",
                                     "overrides": {"absorption_time": "90 min"}},
                            state={"rest_voltage": "13.1 V"}))
    assert short.stage(StageKind.ABSORPTION).timer_s == 5400.0
    assert not any("held to" in f.message for f in short.findings)


def test_a_lead_acid_dwell_above_48_h_is_caught():
    # BU-403 Charging Lead Acid: not more than 48 h at the topping voltage
    plan = plan_of(battery(battery={"chemistry": "flooded"}))
    absorption = plan.stage(StageKind.ABSORPTION)
    assert safety.violations(plan, hard_envelope("flooded")) == []
    absorption.exits = [dataclasses.replace(e, value=50 * 3600.0) if e.kind.value == "duration"
                        else e for e in absorption.exits]
    absorption.timer_s = None
    found = safety.violations(plan, hard_envelope("flooded"))
    assert any("may hold a lead-acid battery" in v and "48 h" in v for v in found), found


def test_a_makers_week_long_lead_acid_absorption_is_held_to_the_cold_ceiling():
    # the profile's absorption_time_cold_max (24 h) is the longest the rules let absorption
    # run; a program's timer 10 % beyond stays inside the checker's 48 h (CK309, BU-403)
    from chargeplan.plan import ExitKind

    plan = plan_of(battery(battery={"chemistry": "flooded", "overrides": {
        "absorption_time": "7 d"}}))
    absorption = plan.stage(StageKind.ABSORPTION)
    assert max(e.value for e in absorption.exits if e.kind == ExitKind.DURATION) == 24 * 3600
    assert any(f.rule_id == "CP201" and "held to 1 d" in f.message for f in plan.findings)


def test_gel_equalization_is_caught():
    plan = plan_of(battery(battery={"chemistry": "gel"}))
    plan.stages.append(Stage(kind=StageKind.EQUALIZATION, voltage_v=14.4, current_a=0.5))
    assert any("forbidden" in v for v in safety.violations(plan, hard_envelope("gel")))


def test_nan_and_wrong_envelope_are_caught():
    plan = _lfp_plan()
    plan.stages[0].current_a = float("nan")
    found = safety.violations(plan, hard_envelope("nmc"))
    assert any("not a positive number" in v for v in found)
    assert any("checked against nmc" in v for v in found)


def test_battery_outside_its_own_interlocks_is_caught():
    plan = _lfp_plan()
    plan.battery = dataclasses.replace(plan.battery, temperature_c=-3.0)
    assert any("outside the interlocks" in v
               for v in safety.violations(plan, hard_envelope("lifepo4")))


def test_planner_never_returns_a_plan_that_fails():
    """If a rule produced an unsafe value, the planner raises instead of returning it."""
    from chargeplan.engine.rules import stages as stage_rules

    original = stage_rules.stages_bulk_absorption.apply

    def unsafe(ctx):
        original(ctx)
        ctx.stages[-1].voltage_v = 20.0

    from chargeplan.engine.registry import RULES, RuleSet

    patched = RuleSet()
    for each in RULES:
        patched.register(dataclasses.replace(each, apply=unsafe)
                         if each.id == "CP204" else each)
    from chargeplan.engine.planner import plan_charge
    from chargeplan.model.battery import BatteryFile

    data = battery(battery={"chemistry": "lifepo4", "capacity": "50 Ah"},
                   state={"rest_voltage": "13.1 V"})
    with pytest.raises(EnvelopeViolation):
        plan_charge(BatteryFile.model_validate(data), rules=patched)


def test_cool_zone_current_is_checked():
    # cell handling guidelines (common practice): LFP at most 0.2 C below 10 degC
    plan = plan_of(battery(battery={"chemistry": "lifepo4", "capacity": "50 Ah"},
                           state={"rest_voltage": "13.1 V"},
                           conditions={"battery_temperature": "5 degC"}))
    assert safety.violations(plan, hard_envelope("lifepo4")) == []
    plan.stages[0].current_a = 10.5  # 0.2 It x 50 Ah = 10 A
    plan.interlocks.current_max_a = 10.5
    found = safety.violations(plan, hard_envelope("lifepo4"))
    assert any("allowed below 10.0 °C" in v for v in found)


def test_warm_zone_voltage_is_checked():
    # JEITA guideline (2007): warm-zone voltage cut to about 4.10 V/cell
    plan = plan_of(battery(battery={"chemistry": "nmc", "nominal_voltage": None,
                                    "cells_in_series": 3, "capacity": "5 Ah"},
                           state={"rest_voltage": "11.1 V"},
                           conditions={"battery_temperature": "42 degC"}))
    plan.stages[-1].voltage_v = 12.6
    found = safety.violations(plan, hard_envelope("nmc"))
    assert any("allowed above 40.0 °C" in v for v in found)


def test_maker_and_channel_limits_are_checked_from_the_input():
    from chargeplan.model.battery import BatteryFile

    data = battery(battery={"overrides": {"max_charge_current": "1 A"}},
                   charger={"max_voltage": "15 V", "max_current": "4 A",
                            "can_disable_high_voltage_stages": True})
    battery_file = BatteryFile.model_validate(data)
    plan = plan_of(data)
    assert safety.violations(plan, hard_envelope("agm"), battery_file) == []
    plan.stages[0].current_a = 1.5
    plan.interlocks.current_max_a = 1.5
    found = safety.violations(plan, hard_envelope("agm"), battery_file)
    assert any("maker's maximum" in v for v in found)
    plan.stages[0].voltage_v = 15.2
    assert any("channel's 15.0 V" in v
               for v in safety.violations(plan, hard_envelope("agm"), battery_file))


# Published ceilings written here from the sources, independent of profiles/ and of safety.py:
# Battery University, equalizing charge: 2.45-2.67 V/cell across sources (flooded); BU-403:
# 0.10-0.30 C; from memory: VRLA maker limits 2.50-2.55 V/cell with 0.3-0.5 C (AGM), gel below
# about 2.5 V/cell and 0.3 C; cell handling guidelines (common practice): LFP 3.65 V/cell, 1 C;
# BU-808: NMC 4.20 V/cell; BU-409: at most 1 C; BU-410 Table 1: lead-acid -20 to 50 degC,
# lithium-ion 0 to 45 degC.
PUBLISHED = {
    "flooded": (2.67, 0.30, -20.0, 50.0),
    "agm": (2.55, 0.50, -20.0, 50.0),
    "gel": (2.50, 0.30, -20.0, 50.0),
    "lifepo4": (3.65, 1.0, 0.0, 45.0),
    "nmc": (4.20, 1.0, 0.0, 45.0),
}


@pytest.mark.parametrize("chemistry", sorted(PUBLISHED))
def test_safety_ceilings_and_bundled_envelopes_stay_inside_the_published_values(chemistry):
    volts, rate, low, high = PUBLISHED[chemistry]
    ceiling = safety.CEILINGS[chemistry]
    assert ceiling.source
    assert ceiling.cell_voltage_max_v <= volts and ceiling.max_current_it <= rate
    assert low <= ceiling.charge_temperature_min_c < ceiling.charge_temperature_max_c <= high
    envelope = hard_envelope(chemistry)
    assert safety.envelope_problems(envelope) == []
    assert envelope.cell_voltage_max_v <= volts and envelope.max_current_it <= rate


def test_an_envelope_above_the_published_ceiling_is_caught():
    loose = dataclasses.replace(hard_envelope("flooded"), cell_voltage_max_v=2.80,
                                max_current_it=0.5, forbidden_stages=frozenset())
    problems = safety.envelope_problems(loose)
    assert any("2.67 V/cell" in p for p in problems) and any("0.3 It" in p for p in problems)
    gel = dataclasses.replace(hard_envelope("gel"), forbidden_stages=frozenset())
    assert any("equalization" in p for p in safety.envelope_problems(gel))


def test_a_plan_checked_against_a_loose_envelope_still_meets_the_published_ceiling():
    """An envelope is not trusted alone: the published ceiling catches what it lets through."""
    plan = plan_of(battery(battery={"chemistry": "flooded"}))
    loose = dataclasses.replace(hard_envelope("flooded"), cell_voltage_max_v=3.0)
    plan.stages[0].voltage_v = 2.70 * 6
    found = safety.violations(plan, loose)
    assert any("published 2.67 V/cell" in v for v in found)


def test_each_named_check_finds_only_its_own_crossing():
    plan = _lfp_plan()
    env = hard_envelope("lifepo4")
    assert all(list(check(plan, env)) == [] for check in safety.CHECKS)
    plan.finish = "hold"
    hits = [check.__name__ for check in safety.CHECKS if list(check(plan, env))]
    assert hits == ["_lithium_stops"]


def test_an_overcharge_stage_without_its_guards_or_before_absorption_is_caught():
    # BU-804b (from memory): a controlled overcharge of an already fully charged battery,
    # temperature watched; common practice: an Ah cap
    data = battery(battery={"chemistry": "flooded"}, state={"capacity_test": "failed"})
    plan = plan_of(data)
    env = hard_envelope("flooded")
    assert safety.violations(plan, env) == []
    stage = plan.stage("desulfation")
    stage.exits = [e for e in stage.exits if e.kind.value != "temperature_rise"]
    assert any("lacks its temperature_rise exit" in v for v in safety.violations(plan, env))
    plan = plan_of(data)
    plan.stages.insert(0, plan.stages.pop(2))  # desulfation first
    assert any("does not follow absorption" in v for v in safety.violations(plan, env))
