"""The flashable binary image: the setpoint document packed little-endian, with a CRC-32.

Layout (all integers little-endian; see DEVELOPERS.md, "The setpoint image")::

    offset  size  field
    0       4     magic b"CPSI"
    4       2     image format version (1)
    6       2     setpoint document version
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
      stages   stage_count x <BBIIIIBIBIB  kind, compensated, voltage_mV, current_mA,
                       timer_s, exit voltage_mV, then, exit current_mA, then,
                       exit duration_s, then
      table    <Bh     row count, step_dC; then rows <hIII temperature_dC,
                       charge_voltage_mV, hold_voltage_mV (0: none), current_max_mA

"None" is 0xFFFFFFFF in unsigned fields (timer, exits), -32768 / 32767 for an absent
cool / warm zone boundary. ``then`` is 0 next, 1 stop.
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
IMAGE_VERSION = 1
KIND_CODES = {"precharge": 1, "desulfation": 2, "bulk": 3, "absorption": 4,
              "equalization": 5, "float": 6, "storage_hold": 7}
_KINDS = {code: kind for kind, code in KIND_CODES.items()}
CHEMISTRY_CODES = {"flooded": 1, "agm": 2, "gel": 3, "lifepo4": 4, "nmc": 5}
_CHEMISTRIES = {code: name for name, code in CHEMISTRY_CODES.items()}
NONE_U32 = 0xFFFFFFFF
# A byte outside its values decodes as the raw number, for the checker to refuse.
_THEN, _FINISH, _FLAG = {0: "next", 1: "stop"}, {0: "stop", 1: "hold"}, {0: False, 1: True}
_COOL_NONE, _WARM_NONE = -32768, 32767

_HEAD = struct.Struct("<4sHHI")
_HEADER = struct.Struct("<HIhBBB")
_LOCKS = struct.Struct("<hhHIIhIhH")
_COMP = struct.Struct("<Biihhh")
_DIGEST = struct.Struct("<32s")
_STAGE = struct.Struct("<BBIIIIBIBIB")
_TABLE = struct.Struct("<Bh")
_ROW = struct.Struct("<hIII")
_CRC = struct.Struct("<I")


class ImageError(ValueError):
    """The bytes are not a whole, intact image."""


def _u32(value: int | None) -> int:
    return NONE_U32 if value is None else value


def _exit(stage: dict[str, Any], condition: str, key: str) -> tuple[int, int]:
    for e in stage["exits"]:
        if e["condition"] == condition:
            return e[key], 1 if e["then"] == "stop" else 0
    return NONE_U32, 0


#: The exits the fixed stage layout (this image format and the C header) has a place for.
LAYOUT_EXITS = frozenset({"voltage_reached", "current_below", "duration"})


def require_layout_exits(doc: dict[str, Any], what: str) -> None:
    """Refuse a document whose stages carry fault guards the fixed layout cannot hold: a
    firmware file that silently lost a stage's Ah cap or temperature stop is never written."""
    from chargeplan.errors import InputError

    for index, stage in enumerate(doc["stages"], 1):
        extra = sorted({e["condition"] for e in stage["exits"]} - LAYOUT_EXITS)
        if extra:
            raise InputError(
                f"stage {index} ({stage['kind']}) carries fault guards ({', '.join(extra)}) "
                f"that the {what} has no place for", field="--format",
                fix="write the JSON setpoint document (-f json), which carries them")


def encode(doc: dict[str, Any]) -> bytes:
    """Pack a setpoint document (as :func:`chargeplan.firmware.setpoints.encode` gives it).

    A document with fault guards is refused (:func:`require_layout_exits`); a value its
    field cannot hold is an InputError naming the field, never a wrapped number.
    """
    from chargeplan.firmware.fieldtypes import PLAN_FIX, require_fit

    require_layout_exits(doc, "setpoint image")
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
    for stage in doc["stages"]:
        v, v_then = _exit(stage, "voltage_reached", "voltage_mV")
        i, i_then = _exit(stage, "current_below", "current_mA")
        t, t_then = _exit(stage, "duration", "duration_s")
        payload += _STAGE.pack(KIND_CODES[stage["kind"]], 1 if stage["compensated"] else 0,
                               stage["voltage_mV"], stage["current_mA"], _u32(stage["timer_s"]),
                               v, v_then, i, i_then, t, t_then)
    table = doc.get("temperature_table")
    rows = table["rows"] if table else []
    payload += _TABLE.pack(len(rows), table["step_dC"] if table else 0)
    for row in rows:
        payload += _ROW.pack(row["temperature_dC"], row["charge_voltage_mV"],
                             row["hold_voltage_mV"] or 0, row["current_max_mA"])
    head = _HEAD.pack(MAGIC, IMAGE_VERSION, doc["version"], len(payload))
    body = head + bytes(payload)
    return body + _CRC.pack(zlib.crc32(body))


def decode(data: bytes) -> dict[str, Any]:
    """Unpack and check an image; the numbers come back keyed as in the JSON document.

    Raises :class:`ImageError` for a short, foreign or corrupted image (with the reason).
    """
    if len(data) < _HEAD.size + _CRC.size:
        raise ImageError(f"is {len(data)} bytes, shorter than any image")
    magic, version, doc_version, length = _HEAD.unpack_from(data, 0)
    if magic != MAGIC:
        raise ImageError("does not start with the image magic 'CPSI'")
    if version != IMAGE_VERSION:
        raise ImageError(f"is image version {version}; this chargeplan reads {IMAGE_VERSION}")
    end = _HEAD.size + length
    if len(data) < end + _CRC.size:
        raise ImageError(f"is truncated: {len(data)} bytes, the header promises "
                         f"{end + _CRC.size}")
    if len(data) > end + _CRC.size:
        raise ImageError(f"has {len(data) - end - _CRC.size} bytes after its CRC")
    (crc,) = _CRC.unpack_from(data, end)
    if zlib.crc32(data[:end]) != crc:
        raise ImageError("fails its CRC-32: the image was changed or damaged")
    offset = _HEAD.size

    def take(layout: struct.Struct) -> tuple[Any, ...]:
        nonlocal offset
        if offset + layout.size > end:
            raise ImageError("its payload is shorter than its contents")
        values = layout.unpack_from(data, offset)
        offset += layout.size
        return values

    cells, capacity, planned, count, finish, chemistry = take(_HEADER)
    if chemistry not in _CHEMISTRIES:
        raise ImageError(f"has an unknown chemistry code {chemistry}")
    t_min, t_max, cell_max, batt_max, i_max, cool_t, cool_i, warm_t, warm_v = take(_LOCKS)
    present, coeff, _pad, ref, r_min, r_max = take(_COMP)
    (digest,) = take(_DIGEST)
    stages = []
    for _ in range(count):
        kind, comp_flag, volt, amp, timer, ev, ev_then, ei, ei_then, et, et_then = take(_STAGE)
        if kind not in _KINDS:
            raise ImageError(f"has an unknown stage kind code {kind}")
        exits = []
        for value, then, condition, key in ((ev, ev_then, "voltage_reached", "voltage_mV"),
                                            (ei, ei_then, "current_below", "current_mA"),
                                            (et, et_then, "duration", "duration_s")):
            if value != NONE_U32:
                exits.append({"condition": condition, key: value,
                              "then": _THEN.get(then, then)})
        stages.append({"kind": _KINDS[kind], "voltage_mV": volt, "current_mA": amp,
                       "timer_s": None if timer == NONE_U32 else timer,
                       "compensated": _FLAG.get(comp_flag, comp_flag), "exits": exits})
    row_count, step = take(_TABLE)
    rows = []
    for _ in range(row_count):
        t, charge, hold, current = take(_ROW)
        rows.append({"temperature_dC": t, "charge_voltage_mV": charge,
                     "hold_voltage_mV": hold or None, "current_max_mA": current})
    if offset != end:
        raise ImageError(f"has {end - offset} unexplained payload bytes")
    return {
        "version": doc_version,
        "cells_in_series": cells,
        "battery": {"capacity_mAh": capacity, "chemistry": _CHEMISTRIES[chemistry]},
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
        "digest": "sha256:" + digest.hex(),
    }
