"""JSON Schemas (draft 2020-12) generated from the models; committed under ``schemas/``."""

from __future__ import annotations

import json
from pathlib import Path
from typing import Any

__all__ = ["SCHEMAS", "compare_shipped", "generate", "schema_texts", "write_schemas"]

#: file name -> (module, model, title)
SCHEMAS = {
    "battery.schema.json": ("chargeplan.model.battery", "BatteryFile", "chargeplan battery file"),
    "profile.schema.json": ("chargeplan.model.profile", "Profile", "chargeplan chemistry profile"),
    "channel.schema.json": (
        "chargeplan.model.charger",
        "ChargerChannel",
        "chargeplan charger channel file (also the battery file's charger section)",
    ),
    "storage.schema.json": (
        "chargeplan.model.storage",
        "SiteFile",
        "chargeplan storage site file",
    ),
    "bench.schema.json": ("chargeplan.model.bench", "BenchFile", "chargeplan bench file"),
    "inventory.schema.json": (
        "chargeplan.model.storage",
        "InventoryRow",
        "chargeplan inventory row (one battery; also the CSV's columns)",
    ),
    "setpoints.schema.json": (
        "chargeplan.firmware.document",
        "SetpointDocument",
        "chargeplan setpoint document, version 4 (a charge program)",
    ),
}


def generate(file_name: str) -> dict[str, Any]:
    from importlib import import_module

    module, model_name, title = SCHEMAS[file_name]
    model = getattr(import_module(module), model_name)
    schema = model.model_json_schema(by_alias=True, mode="validation")
    return {
        "$schema": "https://json-schema.org/draft/2020-12/schema",
        "$id": f"chargeplan/{file_name}",
        **schema,
        "title": title,
    }


def schema_texts() -> dict[str, str]:
    """Every schema as the exact text committed under ``schemas/``."""
    return {
        name: json.dumps(generate(name), indent=2, ensure_ascii=False, sort_keys=False) + "\n"
        for name in SCHEMAS
    }


def compare_shipped() -> dict[str, bool]:
    """For each schema, whether the copy shipped with chargeplan matches the models."""
    from chargeplan.profiles import data_dir

    shipped = data_dir("schemas")
    return {
        name: (shipped / name).is_file()
        and (shipped / name).read_text(encoding="utf-8") == text
        for name, text in schema_texts().items()
    }


def write_schemas(folder: str | Path, *, force: bool = False) -> list[Path]:
    from chargeplan.render.write import write_atomic

    out = Path(folder)
    return [write_atomic(out / name, text, force=force) for name, text in schema_texts().items()]
