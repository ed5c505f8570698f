"""The planner: run the rules in order on one battery, then the independent safety check."""

from __future__ import annotations

from chargeplan.engine.context import Context
from chargeplan.engine.registry import RULES, RuleSet
from chargeplan.errors import ChargeplanError, InputError, InternalError
from chargeplan.model.battery import BatteryFile
from chargeplan.plan import ChargePlan, PlannedBattery
from chargeplan.profiles import ProfileSet, hard_envelope

__all__ = ["derive_state", "plan_charge"]

#: The rules that read what a battery is and how charged it is (no plan is made).
STATE_RULES = ("CP101", "CP102", "CP103")

_DEFAULT_PROFILES: ProfileSet | None = None


def _default_profiles() -> ProfileSet:
    global _DEFAULT_PROFILES
    if _DEFAULT_PROFILES is None:
        _DEFAULT_PROFILES = ProfileSet(use_environment=False)
    return _DEFAULT_PROFILES


def _registered_rules() -> RuleSet:
    from chargeplan.engine import rules as _registered  # noqa: F401  (registers the rules)

    return RULES


def _run(
    battery_file: BatteryFile, profiles: ProfileSet | None, file: str | None, rules
) -> Context:
    """Run ``rules`` in order on a fresh context; errors name ``file``."""
    profile_set = profiles or _default_profiles()
    ctx: Context | None = None
    try:
        profile = profile_set.get(battery_file.battery.chemistry)
        ctx = Context(battery_file=battery_file, profile=profile, file=file)
        for each in rules:
            ctx.rule_id = each.id
            each.apply(ctx)
    except InputError as error:
        raise (error.in_file(file) if file and error.file is None else error) from None
    except ChargeplanError:
        raise
    except Exception as error:
        rule_id = ctx.rule_id if ctx is not None else "-"
        raise InternalError(f"rule {rule_id} failed: {error!r}") from error
    return ctx


def derive_state(
    battery_file: BatteryFile, *, profiles: ProfileSet | None = None, file: str | None = None
) -> Context:
    """Cells, capacity and state of charge, by the rules that read them (CP101-CP103).

    Refusals about the reading itself (reversed leads, a dead cell) still apply; the
    temperature rules do not, as nothing is charged.
    """
    chosen = [r for r in _registered_rules() if r.id in STATE_RULES]
    return _run(battery_file, profiles, file, chosen)


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

    ctx = _run(battery_file, profiles, file, rules or _registered_rules())
    if ctx.interlocks is None or ctx.settings is None or not ctx.stages:
        raise InternalError("the rules finished without stages or interlocks")
    b = battery_file.battery
    profile = ctx.profile
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
        quantisation=ctx.quantisation,
    )
    safety.verify(plan, hard_envelope(profile.chemistry), battery_file)
    return plan
