"""The planner: run the rules in order on one battery, then the independent safety check."""

from __future__ import annotations

from chargeplan.engine.context import Context
from chargeplan.engine.registry import RULES, RuleSet
from chargeplan.errors import ChargeplanError, InputError, InternalError
from chargeplan.model.battery import BatteryFile
from chargeplan.plan import ChargePlan, PlannedBattery
from chargeplan.profiles import ProfileSet, hard_envelope

__all__ = ["plan_charge"]

_DEFAULT_PROFILES: ProfileSet | None = None


def _default_profiles() -> ProfileSet:
    global _DEFAULT_PROFILES
    if _DEFAULT_PROFILES is None:
        _DEFAULT_PROFILES = ProfileSet(use_environment=False)
    return _DEFAULT_PROFILES


def plan_charge(
    battery_file: BatteryFile,
    *,
    profiles: ProfileSet | None = None,
    file: str | None = None,
    rules: RuleSet | None = None,
) -> ChargePlan:
    """Plan the charge of one battery.

    Raises :class:`~chargeplan.errors.PlanRefused` when the battery must not be
    charged as asked, :class:`~chargeplan.errors.InputError` for input the rules
    find inconsistent (naming ``file``), and
    :class:`~chargeplan.errors.EnvelopeViolation` if the finished plan fails
    :func:`chargeplan.safety.verify` (it is then never returned).
    """
    from chargeplan import safety
    from chargeplan.engine import rules as _registered  # noqa: F401  (registers the rules)

    profile_set = profiles or _default_profiles()
    try:
        profile = profile_set.get(battery_file.battery.chemistry)
        ctx = Context(battery_file=battery_file, profile=profile, file=file)
        for each in rules or RULES:
            ctx.rule_id = each.id
            each.apply(ctx)
    except InputError as error:
        raise (error.in_file(file) if file and error.file is None else error) from None
    except ChargeplanError:
        raise
    except Exception as error:
        raise InternalError(f"rule {ctx.rule_id} failed: {error!r}") from error
    if ctx.interlocks is None or ctx.settings is None or not ctx.stages:
        raise InternalError("the rules finished without stages or interlocks")
    b = battery_file.battery
    plan = ChargePlan(
        battery=PlannedBattery(
            name=b.name,
            profile_id=profile.id,
            chemistry=profile.chemistry,
            family=profile.family,
            profile_name=profile.name,
            cells_in_series=ctx.cells,
            capacity_ah=ctx.capacity_ah,
            nominal_voltage_v=ctx.nominal_voltage_v,
            temperature_c=ctx.temperature_c,
            state_of_charge_pct=ctx.soc_pct,
            storage_s=ctx.storage_s,
        ),
        stages=ctx.stages,
        interlocks=ctx.interlocks,
        compensation=ctx.compensation,
        findings=ctx.findings,
        trace=ctx.trace,
        cautions=ctx.cautions,
        finish=ctx.finish,
    )
    safety.verify(plan, hard_envelope(profile.chemistry), battery_file)
    return plan
