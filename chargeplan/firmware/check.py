"""Checking a setpoint file before it is flashed: schema, digest or CRC, the chemistry's hard
envelope, and the order of its values. What a firmware team runs in its own CI.

This is a third, independent look at the numbers: it reads only the file (and, if given, a
battery file and a charger channel), never the rules that made it.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from chargeplan.errors import InputError
from chargeplan.model.battery import BatteryFile
from chargeplan.model.charger import ChargerChannel

__all__ = [
    "CheckReport",
    "check_document",
    "check_file",
    "load_channel_file",
    "read_setpoint_file",
]

_NEVER_FOR_LITHIUM = {"equalization", "desulfation"}


@dataclass
class CheckReport:
    file: str
    kind: str  # "json" or "image"
    violations: list[str] = field(default_factory=list)

    @property
    def ok(self) -> bool:
        return not self.violations


def read_setpoint_file(path: str | Path) -> tuple[dict[str, Any], str, list[str]]:
    """The document in a JSON file or an image, its kind, and integrity violations found
    while reading (digest or CRC). A file that is neither is an InputError."""
    from chargeplan.firmware import image
    from chargeplan.loading import MAX_INPUT_BYTES, parse_json

    shown = str(path)
    try:
        raw = Path(path).read_bytes()
    except FileNotFoundError:
        raise InputError("no such file", file=shown, fix="check the path") from None
    except OSError as error:
        raise InputError(f"cannot read it ({error.strerror})", file=shown,
                         fix="check the path and its permissions") from None
    if len(raw) > MAX_INPUT_BYTES:
        raise InputError("is larger than any setpoint file", file=shown,
                         fix="give the setpoint JSON or image")
    if raw.startswith(image.MAGIC):
        try:
            return image.decode(raw), "image", []
        except image.ImageError as error:
            if "CRC" in str(error):
                return {}, "image", [f"the image {error}"]
            raise InputError(str(error), file=shown,
                             fix="write the image again with 'chargeplan plan -f image'") from None
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError:
        text = ""
    if not text.lstrip().startswith(("{", "[")):
        raise InputError("is neither a setpoint JSON document nor a setpoint image",
                         file=shown, fix="give the file 'chargeplan plan -f json' or "
                                         "'-f image' wrote")
    # strict JSON: a duplicate key (the last would silently win) or NaN is refused
    doc = parse_json(text, shown)
    if not isinstance(doc, dict) or doc.get("format") != "chargeplan-setpoints":
        raise InputError("is JSON but not a chargeplan setpoint document", file=shown,
                         field="format", fix="give the file 'chargeplan plan -f json' wrote")
    from chargeplan.firmware.setpoints import compute_digest

    found = []
    if doc.get("digest") != compute_digest(doc):
        found.append("the digest does not match the contents: the file was edited by hand "
                     "or damaged")
    return doc, "json", found


def load_channel_file(path: str | Path) -> ChargerChannel:
    """A charger channel file: the channel's keys at the top, or under ``charger:``."""
    from chargeplan.loading import read_mapping, validate

    data = read_mapping(path, what="channel")
    if set(data) == {"charger"} and isinstance(data["charger"], dict):
        data = data["charger"]
    return validate(ChargerChannel, data, file=str(path))


def _schema_violations(doc: dict[str, Any]) -> list[str]:
    from pydantic import ValidationError

    from chargeplan.firmware.document import SetpointDocument, SetpointDocumentV3

    models = {3: SetpointDocumentV3, 4: SetpointDocument}
    if doc.get("version") not in models:
        return [f"version: {doc.get('version')!r} is not the setpoint format version this "
                "chargeplan reads (3 or 4); write the document again with "
                "'chargeplan plan -f json'"]
    try:
        models[doc["version"]].model_validate(doc)
    except ValidationError as error:
        return [
            f"schema: {'.'.join(str(p) for p in e['loc'])}: {e['msg']}"
            for e in error.errors(include_url=False)
        ]
    return []


def check_document(
    doc: dict[str, Any],
    *,
    battery_file: BatteryFile | None = None,
    channel: ChargerChannel | None = None,
) -> list[str]:
    """Every way ``doc`` is unsafe or out of order (empty when it may be flashed)."""
    from chargeplan.profiles import BUILTIN_IDS, hard_envelope

    found: list[str] = []
    chemistry = doc["battery"]["chemistry"]
    if chemistry not in BUILTIN_IDS:
        return [f"unknown chemistry {chemistry!r}: no hard envelope to check against"]
    env = hard_envelope(chemistry)
    lithium = env.family == "lithium"
    cells = doc["cells_in_series"]
    cap_mah = doc["battery"]["capacity_mAh"]
    v_max = env.cell_voltage_max_v * 1000 * cells
    i_max = env.max_current_it * cap_mah
    lock = doc["interlocks"]
    stages = doc["stages"]
    for n, stage in enumerate(stages, 1):
        kind = stage["kind"]
        name = f"stage {n} ({kind})"
        if kind in env.forbidden_stages or (lithium and kind in _NEVER_FOR_LITHIUM):
            found.append(f"{name} is forbidden for {chemistry}")
        if stage["voltage_mV"] > v_max:
            found.append(f"{name} voltage {stage['voltage_mV']} mV is above the {chemistry} "
                         f"limit {v_max:.0f} mV ({env.cell_voltage_max_v} V/cell x {cells})")
        if stage["voltage_mV"] / cells < 1000:
            found.append(f"{name} voltage {stage['voltage_mV']} mV is "
                         f"{stage['voltage_mV'] / cells:.0f} mV per cell: a per-cell value "
                         "written for the whole battery?")
        if stage["current_mA"] > i_max:
            found.append(f"{name} current {stage['current_mA']} mA is above the {chemistry} "
                         f"limit {i_max:.0f} mA ({env.max_current_it} It)")
        if stage["current_mA"] > lock["current_max_mA"]:
            found.append(f"{name} current is above the current interlock")
        if stage["voltage_mV"] > lock["battery_voltage_max_mV"]:
            found.append(f"{name} voltage is above the battery voltage interlock")
        estimate = stage.get("estimated_duration_s")
        if stage["timer_s"] is not None and estimate is not None and stage["timer_s"] < estimate:
            found.append(f"{name} timer {stage['timer_s']} s is shorter than the "
                         f"{estimate} s the stage is expected to take")
        for e in stage["exits"]:
            if e["condition"] == "voltage_reached" and e["voltage_mV"] > stage["voltage_mV"]:
                found.append(f"{name} exits at {e['voltage_mV']} mV, above its own limit")
            if e["condition"] == "current_below" and e["current_mA"] >= stage["current_mA"]:
                found.append(f"{name} tail current is not below its current limit")
    by_kind = {s["kind"]: s for s in stages}
    pre, bulk = by_kind.get("precharge"), by_kind.get("bulk")
    if pre and bulk and pre["current_mA"] > bulk["current_mA"]:
        found.append("pre-charge current is above the bulk current")
    top = max((s["voltage_mV"] for s in stages if s["kind"] in ("bulk", "absorption")),
              default=None)
    for kind in ("float", "storage_hold"):
        held = by_kind.get(kind)
        if held and top is not None and not lithium and held["voltage_mV"] >= top:
            found.append(f"{kind} voltage is at or above the absorption voltage")
    if lithium and doc.get("finish") != "stop":
        found.append("a lithium document must stop at the end, not hold")
    t_min, t_max = lock["charge_temperature_min_dC"], lock["charge_temperature_max_dC"]
    if t_min >= t_max:
        found.append("the minimum charge temperature is not below the maximum")
    if t_min < env.charge_temperature_min_c * 10:
        found.append(f"minimum charge temperature {t_min} dC is below the {chemistry} limit")
    if t_max > env.charge_temperature_max_c * 10:
        found.append(f"maximum charge temperature {t_max} dC is above the {chemistry} limit")
    if lithium and t_min < 0:
        found.append(f"minimum charge temperature {t_min} dC would let lithium charge below "
                     "0 degC")
    if lock["cell_voltage_max_mV"] > env.cell_voltage_max_v * 1000:
        found.append("the cell voltage interlock is above the chemistry's limit")
    if abs(lock["battery_voltage_max_mV"] - lock["cell_voltage_max_mV"] * cells) > cells:
        found.append("the battery voltage interlock does not match cells x the cell limit")
    table = doc.get("temperature_table") or {"rows": []}
    for row in table["rows"]:
        t = row["temperature_dC"]
        if not t_min <= t <= t_max:
            found.append(f"table row at {t} dC lies outside the charge-temperature interlocks")
        if row["charge_voltage_mV"] > v_max or (row["hold_voltage_mV"] or 0) > v_max:
            found.append(f"table row at {t} dC is above the {chemistry} voltage limit")
        if row["current_max_mA"] > i_max:
            found.append(f"table row at {t} dC is above the {chemistry} current limit")
    if battery_file is not None:
        b = battery_file.battery
        if b.chemistry not in (chemistry, doc["battery"].get("profile")):
            found.append(f"the battery file is {b.chemistry}, the document {chemistry}")
        if b.cells_in_series is not None and b.cells_in_series != cells:
            found.append(f"the battery file has {b.cells_in_series} cells, the document "
                         f"{cells}")
        maker = b.overrides.max_charge_current
        if maker is not None:
            limit = maker.amps(cap_mah / 1000) * 1000
            for n, stage in enumerate(stages, 1):
                if stage["current_mA"] > limit + 1e-6:
                    found.append(f"stage {n} current is above the maker's {limit:.0f} mA")
    if channel is not None:
        for n, stage in enumerate(stages, 1):
            if stage["voltage_mV"] > channel.max_voltage_v * 1000:
                found.append(f"stage {n} voltage is above the channel's {channel.max_voltage_v} V")
            if stage["current_mA"] > channel.max_current_a * 1000:
                found.append(f"stage {n} current is above the channel's {channel.max_current_a} A")
    return found


def check_file(
    path: str | Path,
    *,
    battery_file: BatteryFile | None = None,
    channel: ChargerChannel | None = None,
) -> CheckReport:
    doc, kind, found = read_setpoint_file(path)
    report = CheckReport(str(path), kind, list(found))
    if not doc:
        return report
    if kind == "json":
        schema = _schema_violations(doc)
        report.violations += schema
        if schema:
            return report
    report.violations += check_document(doc, battery_file=battery_file, channel=channel)
    if doc.get("version") == 4:
        from chargeplan.firmware.check_program import program_violations

        report.violations += program_violations(doc)
    return report
