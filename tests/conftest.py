"""Shared test helpers: build battery files, plan them, run the CLI."""

from __future__ import annotations

import copy
from pathlib import Path
from typing import Any

import pytest

from chargeplan.engine.planner import plan_charge
from chargeplan.model.battery import BatteryFile
from chargeplan.plan import ChargePlan

REPO = Path(__file__).resolve().parent.parent

BASE: dict[str, Any] = {
    "battery": {"name": "Test bench battery", "chemistry": "agm", "nominal_voltage": "12 V",
                "capacity": "10 Ah"},
    "conditions": {"battery_temperature": "25 degC"},
}


def battery(**sections: Any) -> dict[str, Any]:
    """A battery-file dict: the base, with sections merged in (``battery={...}`` updates)."""
    data = copy.deepcopy(BASE)
    for key, value in sections.items():
        if isinstance(value, dict) and isinstance(data.get(key), dict):
            data[key].update(value)
        else:
            data[key] = value
    return data


def plan_of(data: dict[str, Any]) -> ChargePlan:
    return plan_charge(BatteryFile.model_validate(data))


@pytest.fixture
def write_yaml(tmp_path: Path):
    """Write a dict as a YAML file and return its path."""
    from ruamel.yaml import YAML

    def write(data: dict[str, Any], name: str = "battery.yaml") -> Path:
        path = tmp_path / name
        yaml = YAML(typ="safe")
        yaml.default_flow_style = False
        with path.open("w", encoding="utf-8") as stream:
            yaml.dump(data, stream)
        return path

    return write
