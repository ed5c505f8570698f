"""chargeplan: staged, safety-checked battery charge plans and charger setpoint files.

Plan one battery::

    >>> import chargeplan
    >>> plan = chargeplan.plan_file(chargeplan.example_paths()[1])
    >>> plan.stage("absorption").voltage_v
    14.94...

The public names below are imported on first use, so ``import chargeplan`` is
cheap and a command pays only for what it uses.
"""

from __future__ import annotations

from importlib import import_module
from typing import Any

__version__ = "0.1.0"

# public name -> module that defines it
_EXPORTS = {
    "plan_file": "chargeplan.api",
    "load_battery_file": "chargeplan.api",
    "plan_charge": "chargeplan.engine.planner",
    "RULES": "chargeplan.engine.registry",
    "Rule": "chargeplan.engine.registry",
    "RuleSet": "chargeplan.engine.registry",
    "rule": "chargeplan.engine.registry",
    "BatteryFile": "chargeplan.model.battery",
    "Battery": "chargeplan.model.battery",
    "State": "chargeplan.model.battery",
    "Conditions": "chargeplan.model.battery",
    "Storage": "chargeplan.model.battery",
    "Overrides": "chargeplan.model.battery",
    "ChargerChannel": "chargeplan.model.charger",
    "Profile": "chargeplan.model.profile",
    "ProfileSet": "chargeplan.profiles",
    "load_builtin": "chargeplan.profiles",
    "hard_envelope": "chargeplan.profiles",
    "ChargePlan": "chargeplan.plan",
    "Stage": "chargeplan.plan",
    "StageKind": "chargeplan.plan",
    "Exit": "chargeplan.plan",
    "ExitKind": "chargeplan.plan",
    "Interlocks": "chargeplan.plan",
    "Finding": "chargeplan.plan",
    "Severity": "chargeplan.plan",
    "verify": "chargeplan.safety",
    "encode_setpoints": "chargeplan.firmware.setpoints",
    "render_text": "chargeplan.render.text",
    "example_paths": "chargeplan.demo",
    "ChargeplanError": "chargeplan.errors",
    "InputError": "chargeplan.errors",
    "PlanRefused": "chargeplan.errors",
    "InternalError": "chargeplan.errors",
    "EnvelopeViolation": "chargeplan.errors",
    "ureg": "chargeplan.units",
}
_RENAMED = {"encode_setpoints": "encode"}

__all__ = ["__version__", *sorted(_EXPORTS)]


def __getattr__(name: str) -> Any:
    module = _EXPORTS.get(name)
    if module is None:
        raise AttributeError(f"module 'chargeplan' has no attribute {name!r}")
    value = getattr(import_module(module), _RENAMED.get(name, name))
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return __all__
