"""The rules engine: registered rules run in a fixed order and write a traced plan."""

from chargeplan.engine.planner import plan_charge
from chargeplan.engine.registry import RULES, Phase, Rule, RuleSet, rule

__all__ = ["RULES", "Phase", "Rule", "RuleSet", "plan_charge", "rule"]
