"""The flashable binary image: the setpoint document packed little-endian, with a CRC-32.

Layout (all integers little-endian; see DEVELOPERS.md, "The setpoint image")::

    offset  size  field
    0       4     magic b"CPSI"
    4       2     image format version (2; version 1 carried setpoint documents of version 3)
    6       2     setpoint document version (4)
    8       4     payload length N
    12      N     payload (below)
    12+N    4     CRC-32 (ISO-HDLC: poly 0x04C11DB7 reflected, init and xorout 0xFFFFFFFF)
                  over bytes 0 .. 12+N-1

    payload:
      header   <HIhBBB cells_in_series, capacity_mAh, planned_temperature_dC,
                       stage_count, finish (0 stop, 1 hold), chemistry (1 flooded,
                       2 agm, 3 gel, 4 lifepo4, 5 nmc: the hard envelope it is bound by)
      locks    <hhHIIhIhH  charge_temperature_min_dC, charge_temperature_max_dC,
                       cell_voltage_max_mV, battery_voltage_max_mV, current_max_mA,
                       cool_zone below_dC, cool_zone current_max_mA,
                       warm_zone above_dC, warm_zone cell_voltage_max_mV
      comp     <Biihhh present, coefficient_uV_per_K_per_cell, (padding 0),
                       reference_dC, range_min_dC, range_max_dC
      digest   32s     the document's sha256 digest, as bytes
      program  <IIIIBIHHIII  (version 2) precharge below_voltage_mV, current_mA,
                       timer_s; restart voltage_mV, condition (0 rest_below, 1
                       float_below), filter_s; hysteresis temperature_margin_dK,
                       voltage_filter_s; no_battery below_voltage_mV, wrong_cell_count
                       above_voltage_mV; battery nominal_voltage_mV
      faults   <B      (version 2) fault count; then faults <BB code, action (0 latch,
                       1 pause)
      stages   stage_count x <BBIIIIBIBIBIII  kind, compensated, voltage_mV, current_mA,
                       timer_s, exit voltage_mV, then, exit current_mA, then,
                       exit duration_s, then, guard charge_mAh, guard current_mA (rising),
                       guard temperature_rise_dK (version 1: <BBIIIIBIBIB, no guards)
      table    <Bh     row count, step_dC; then rows <hIII temperature_dC,
                       charge_voltage_mV, hold_voltage_mV (0: none), current_max_mA

"None" is 0xFFFFFFFF in unsigned fields (timer, exits, guards), -32768 / 32767 for an
absent cool / warm zone boundary. ``then`` is 0 next, 1 stop; a guard's is always fault.
"""

from __future__ import annotations

import struct
import zlib
from typing import Any

__all__ = [
    "CHEMISTRY_CODES",
    "IMAGE_VERSION",
    "KIND_CODES",
    "MAGIC",
    "ImageError",
    "decode",
    "encode",
]

MAGIC = b"CPSI"
IMAGE_VERSION = 2
#: image format version -> the setpoint document version it carries
DOCUMENT_VERSIONS = {1: 3, 2: 4}
KIND_CODES = {"precharge": 1, "desulfation": 2, "bulk": 3, "absorption": 4,
              "equalization": 5, "float": 6, "storage_hold": 7}
_KINDS = {code: kind for kind, code in KIND_CODES.items()}
CHEMISTRY_CODES = {"flooded": 1, "agm": 2, "gel": 3, "lifepo4": 4, "nmc": 5}
_CHEMISTRIES = {code: name for name, code in CHEMISTRY_CODES.items()}
# A byte outside its values decodes as the raw number, for the checker to refuse.
_THEN, _FINISH, _FLAG = {0: "next", 1: "stop"}, {0: "stop", 1: "hold"}, {0: False, 1: True}
RESTART_CODES = {"rest_below": 0, "float_below": 1}
ACTION_CODES = {"latch": 0, "pause": 1}
NONE_U32 = 0xFFFFFFFF
_COOL_NONE, _WARM_NONE = -32768, 32767

_HEAD = struct.Struct("<4sHHI")
_HEADER = struct.Struct("<HIhBBB")
_LOCKS = struct.Struct("<hhHIIhIhH")
_COMP = struct.Struct("<Biihhh")
_DIGEST = struct.Struct("<32s")
_PROGRAM = struct.Struct("<IIIIBIHHIII")
_COUNT = struct.Struct("<B")
_FAULT = struct.Struct("<BB")
_STAGE_V1 = struct.Struct("<BBIIIIBIBIB")
_STAGE = struct.Struct("<BBIIIIBIBIBIII")
_TABLE = struct.Struct("<Bh")
_ROW = struct.Struct("<hIII")
_CRC = struct.Struct("<I")

#: the exits in a stage's slots: (condition, key); the last three are the fault guards
_EXITS = (("voltage_reached", "voltage_mV"), ("current_below", "current_mA"),
          ("duration", "duration_s"))
_GUARDS = (("charge_above", "charge_mAh"), ("current_rising", "current_mA"),
           ("temperature_rise", "temperature_rise_dK"))


class ImageError(ValueError):
    """The bytes are not a whole, intact image."""


def _u32(value: int | None) -> int:
    return NONE_U32 if value is None else value


def _exit(stage: dict[str, Any], condition: str, key: str) -> tuple[int, int]:
    for e in stage["exits"]:
        if e["condition"] == condition:
            return e[key], 1 if e["then"] == "stop" else 0
    return NONE_U32, 0


def _fault_threshold(doc: dict[str, Any], name: str, key: str) -> int:
    return next(f[key] for f in doc["faults"] if f["name"] == name)


def _program_block(doc: dict[str, Any]) -> bytes:
    pre, restart, hyst = doc["precharge"], doc["restart"], doc["hysteresis"]
    block = _PROGRAM.pack(
        pre["below_voltage_mV"], pre["current_mA"], pre["timer_s"], restart["voltage_mV"],
        RESTART_CODES[restart["condition"]], restart["filter_s"],
        hyst["temperature_margin_dK"], hyst["voltage_filter_s"],
        _fault_threshold(doc, "no_battery", "below_voltage_mV"),
        _fault_threshold(doc, "wrong_cell_count", "above_voltage_mV"),
        doc["battery"]["nominal_voltage_mV"])
    block += _COUNT.pack(len(doc["faults"]))
    for fault in doc["faults"]:
        block += _FAULT.pack(fault["code"], ACTION_CODES[fault["action"]])
    return block


def _stage_block(stage: dict[str, Any]) -> bytes:
    slots = [value for condition, key in _EXITS for value in _exit(stage, condition, key)]
    guards = [_exit(stage, condition, key)[0] for condition, key in _GUARDS]
    return _STAGE.pack(KIND_CODES[stage["kind"]], 1 if stage["compensated"] else 0,
                       stage["voltage_mV"], stage["current_mA"], _u32(stage["timer_s"]),
                       *slots, *guards)


#: Every exit a stage's fixed layout (the image and the C header) has a place for.
LAYOUT_EXITS = frozenset(condition for condition, _ in (*_EXITS, *_GUARDS))
#: The fault guards' (condition, key) pairs, in slot order.
GUARDS = _GUARDS


def require_known_exits(doc: dict[str, Any], what: str) -> None:
    """Refuse a document whose stage carries an exit the fixed layout has no place for, or
    one exit twice: a firmware file never silently loses an Ah cap or a temperature stop."""
    from chargeplan.errors import InputError

    for index, stage in enumerate(doc["stages"], 1):
        conditions = [e["condition"] for e in stage["exits"]]
        extra = sorted(set(conditions) - LAYOUT_EXITS)
        twice = sorted({c for c in conditions if conditions.count(c) > 1})
        if extra or twice:
            problem = (f"exits the {what} has no place for ({', '.join(extra)})" if extra
                       else f"the exit {', '.join(twice)} twice")
            raise InputError(
                f"stage {index} ({stage['kind']}) carries {problem}",
                field=f"stages[{index - 1}].exits",
                fix="give each stage at most one exit of each kind (voltage_reached, "
                    "current_below, duration, charge_above, current_rising, "
                    "temperature_rise)")


def encode(doc: dict[str, Any]) -> bytes:
    """Pack a setpoint document (as :func:`chargeplan.firmware.setpoints.encode` gives it).

    A value its field cannot hold is an InputError naming the field, never a wrapped number.
    """
    from chargeplan.firmware.fieldtypes import PLAN_FIX, require_fit

    require_known_exits(doc, "image")
    require_fit(doc, fix=PLAN_FIX)
    lock = doc["interlocks"]
    cool, warm = lock["cool_zone"], lock["warm_zone"]
    comp = doc["temperature_compensation"]
    payload = bytearray()
    payload += _HEADER.pack(doc["cells_in_series"], doc["battery"]["capacity_mAh"],
                            doc["planned_temperature_dC"], len(doc["stages"]),
                            1 if doc["finish"] == "hold" else 0,
                            CHEMISTRY_CODES[doc["battery"]["chemistry"]])
    payload += _LOCKS.pack(
        lock["charge_temperature_min_dC"], lock["charge_temperature_max_dC"],
        lock["cell_voltage_max_mV"], lock["battery_voltage_max_mV"], lock["current_max_mA"],
        cool["below_dC"] if cool else _COOL_NONE, cool["current_max_mA"] if cool else 0,
        warm["above_dC"] if warm else _WARM_NONE, warm["cell_voltage_max_mV"] if warm else 0,
    )
    if comp:
        payload += _COMP.pack(1, comp["coefficient_uV_per_K_per_cell"], 0, comp["reference_dC"],
                              comp["range_min_dC"], comp["range_max_dC"])
    else:
        payload += _COMP.pack(0, 0, 0, 0, 0, 0)
    payload += _DIGEST.pack(bytes.fromhex(doc["digest"].removeprefix("sha256:")))
    payload += _program_block(doc)
    for stage in doc["stages"]:
        payload += _stage_block(stage)
    table = doc.get("temperature_table")
    rows = table["rows"] if table else []
    payload += _TABLE.pack(len(rows), table["step_dC"] if table else 0)
    for row in rows:
        payload += _ROW.pack(row["temperature_dC"], row["charge_voltage_mV"],
                             row["hold_voltage_mV"] or 0, row["current_max_mA"])
    head = _HEAD.pack(MAGIC, IMAGE_VERSION, doc["version"], len(payload))
    body = head + bytes(payload)
    return body + _CRC.pack(zlib.crc32(body))


class _Reader:
    """Takes fixed-layout blocks from the payload, never past its end."""

    def __init__(self, data: bytes, offset: int, end: int) -> None:
        self.data, self.offset, self.end = data, offset, end

    def take(self, layout: struct.Struct) -> tuple[Any, ...]:
        if self.offset + layout.size > self.end:
            raise ImageError("its payload is shorter than its contents")
        values = layout.unpack_from(self.data, self.offset)
        self.offset += layout.size
        return values


def _checked_frame(data: bytes) -> tuple[int, int, int]:
    """(image version, document version, payload end) of an intact image."""
    if len(data) < _HEAD.size + _CRC.size:
        raise ImageError(f"is {len(data)} bytes, shorter than any image")
    magic, version, doc_version, length = _HEAD.unpack_from(data, 0)
    if magic != MAGIC:
        raise ImageError("does not start with the image magic 'CPSI'")
    if version not in DOCUMENT_VERSIONS:
        raise ImageError(f"is image version {version}; this chargeplan reads "
                         f"{', '.join(str(v) for v in DOCUMENT_VERSIONS)}")
    end = _HEAD.size + length
    if len(data) < end + _CRC.size:
        raise ImageError(f"is truncated: {len(data)} bytes, the header promises "
                         f"{end + _CRC.size}")
    if len(data) > end + _CRC.size:
        raise ImageError(f"has {len(data) - end - _CRC.size} bytes after its CRC")
    (crc,) = _CRC.unpack_from(data, end)
    if zlib.crc32(data[:end]) != crc:
        raise ImageError("fails its CRC-32: the image was changed or damaged")
    # an unknown document version decodes, for the checker to refuse (CK101, exit 1); a known
    # one in the other image format is a foreign image
    if doc_version != DOCUMENT_VERSIONS[version] and doc_version in DOCUMENT_VERSIONS.values():
        raise ImageError(f"is image version {version} but says it carries setpoint document "
                         f"version {doc_version}, not {DOCUMENT_VERSIONS[version]}")
    return version, doc_version, end


def _read_program(read: _Reader) -> dict[str, Any]:
    from chargeplan.firmware.faults import FAULTS

    names = {fault.code: fault.name for fault in FAULTS}
    actions = {code: name for name, code in ACTION_CODES.items()}
    restarts = {code: name for name, code in RESTART_CODES.items()}
    (below, current, timer, restart_v, condition, filter_s, margin, v_filter, no_battery,
     cells_above, nominal) = read.take(_PROGRAM)
    if condition not in restarts:
        raise ImageError(f"has an unknown restart condition code {condition}")
    (count,) = read.take(_COUNT)
    faults = []
    for _ in range(count):
        code, action = read.take(_FAULT)
        if code not in names or action not in actions:
            raise ImageError(f"has an unknown fault code {code} or action {action}")
        entry: dict[str, Any] = {"code": code, "name": names[code], "action": actions[action]}
        if names[code] == "no_battery":
            entry["below_voltage_mV"] = no_battery
        elif names[code] == "wrong_cell_count":
            entry["above_voltage_mV"] = cells_above
        faults.append(entry)
    return {
        "nominal_voltage_mV": nominal,
        "precharge": {"below_voltage_mV": below, "current_mA": current, "timer_s": timer},
        "restart": {"voltage_mV": restart_v, "condition": restarts[condition],
                    "filter_s": filter_s},
        "faults": faults,
        "hysteresis": {"temperature_margin_dK": margin, "voltage_filter_s": v_filter},
    }


def _read_stage(read: _Reader, version: int) -> dict[str, Any]:
    values = read.take(_STAGE if version >= 2 else _STAGE_V1)
    kind, comp_flag, volt, amp, timer = values[:5]
    if kind not in _KINDS:
        raise ImageError(f"has an unknown stage kind code {kind}")
    exits = []
    for (condition, key), value, then in zip(_EXITS, values[5:11:2], values[6:11:2],
                                             strict=True):
        if value != NONE_U32:
            exits.append({"condition": condition, key: value,
                          "then": _THEN.get(then, then)})
    for (condition, key), value in zip(_GUARDS, values[11:], strict=False):
        if value != NONE_U32:
            exits.append({"condition": condition, key: value, "then": "fault"})
    return {"kind": _KINDS[kind], "voltage_mV": volt, "current_mA": amp,
            "timer_s": None if timer == NONE_U32 else timer,
            "compensated": _FLAG.get(comp_flag, comp_flag), "exits": exits}


def decode(data: bytes) -> dict[str, Any]:
    """Unpack and check an image; the numbers come back keyed as in the JSON document.

    Reads image versions 1 (document version 3) and 2 (document version 4). Raises
    :class:`ImageError` for a short, foreign or corrupted image (with the reason).
    """
    version, doc_version, end = _checked_frame(data)
    read = _Reader(data, _HEAD.size, end)
    cells, capacity, planned, count, finish, chemistry = read.take(_HEADER)
    if chemistry not in _CHEMISTRIES:
        raise ImageError(f"has an unknown chemistry code {chemistry}")
    t_min, t_max, cell_max, batt_max, i_max, cool_t, cool_i, warm_t, warm_v = read.take(_LOCKS)
    present, coeff, _pad, ref, r_min, r_max = read.take(_COMP)
    (digest,) = read.take(_DIGEST)
    program = _read_program(read) if version >= 2 else {}
    battery = {"capacity_mAh": capacity, "chemistry": _CHEMISTRIES[chemistry]}
    if "nominal_voltage_mV" in program:
        battery["nominal_voltage_mV"] = program.pop("nominal_voltage_mV")
    stages = [_read_stage(read, version) for _ in range(count)]
    row_count, step = read.take(_TABLE)
    rows = []
    for _ in range(row_count):
        t, charge, hold, current = read.take(_ROW)
        rows.append({"temperature_dC": t, "charge_voltage_mV": charge,
                     "hold_voltage_mV": hold or None, "current_max_mA": current})
    if read.offset != end:
        raise ImageError(f"has {end - read.offset} unexplained payload bytes")
    return {
        "version": doc_version,
        "cells_in_series": cells,
        "battery": battery,
        "planned_temperature_dC": planned,
        "finish": _FINISH.get(finish, finish),
        "stages": stages,
        "interlocks": {
            "charge_temperature_min_dC": t_min, "charge_temperature_max_dC": t_max,
            "cell_voltage_max_mV": cell_max, "battery_voltage_max_mV": batt_max,
            "current_max_mA": i_max,
            "cool_zone": None if cool_t == _COOL_NONE else {"below_dC": cool_t,
                                                            "current_max_mA": cool_i},
            "warm_zone": None if warm_t == _WARM_NONE else {"above_dC": warm_t,
                                                            "cell_voltage_max_mV": warm_v},
        },
        "temperature_compensation": None if not present else {
            "coefficient_uV_per_K_per_cell": coeff, "reference_dC": ref,
            "range_min_dC": r_min, "range_max_dC": r_max},
        "temperature_table": None if not row_count and not step else {"step_dC": step,
                                                                       "rows": rows},
        **program,
        "digest": "sha256:" + digest.hex(),
    }
