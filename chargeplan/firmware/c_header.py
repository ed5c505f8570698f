"""The setpoint document as a C99 header: fixed-width integers, units in the names.

Every number comes from the setpoint document (the same integers the JSON and the image
carry); a comment beside each stage value gives the plan's requested value. Text from
user files appears only inside comments, with comment delimiters broken up.
"""

from __future__ import annotations

import re
from functools import lru_cache
from typing import Any

from chargeplan.plan import ChargePlan

__all__ = ["c_comment", "render_c_header"]

_KIND_MACROS = {"precharge": 1, "desulfation": 2, "bulk": 3, "absorption": 4,
                "equalization": 5, "float": 6, "storage_hold": 7}


def c_comment(text: str) -> str:
    """Text that is safe inside a C block comment: ASCII only (anything else becomes '?'), no
    control characters or backslashes, no ``*/`` or ``/*``, and no ``??`` (a trigraph such
    as ``??/`` is a backslash in C99 and breaks -Werror builds)."""
    clean = "".join(ch if 32 <= ord(ch) < 127 and ch != "\\" else "?" for ch in text)
    while "*/" in clean or "/*" in clean or "??" in clean:
        clean = clean.replace("*/", "* /").replace("/*", "/ *").replace("??", "? ?")
    return clean


def _ident(text: str) -> str:
    return re.sub(r"[^A-Z0-9_]", "_", text.upper())


@lru_cache(maxsize=1)
def _template() -> Any:
    from jinja2 import Environment, PackageLoader, StrictUndefined

    env = Environment(loader=PackageLoader("chargeplan", "firmware/templates"),
                      autoescape=False, trim_blocks=True, lstrip_blocks=True,
                      keep_trailing_newline=True, undefined=StrictUndefined)
    env.filters.update(comment=c_comment, ident=_ident, format=_format)
    return env.get_template("setpoints.h.j2")


def _exit(stage: dict[str, Any], condition: str, key: str) -> tuple[int, int]:
    for e in stage["exits"]:
        if e["condition"] == condition:
            return e[key], 1 if e["then"] == "stop" else 0
    return 0xFFFFFFFF, 0


def _format(pattern: str, *values: Any) -> str:
    """jinja2's ``format`` filter, its result made safe for a comment."""
    return c_comment(pattern % values)


def render_c_header(plan: ChargePlan, doc: dict[str, Any]) -> str:
    """The header for ``doc`` (the encoded ``plan``). A value its C type cannot hold is an
    InputError naming the field (exit 2), never an overflowed constant."""
    from chargeplan.firmware.faults import FAULTS, VOLTAGE_TRIP_FILTER_MS
    from chargeplan.firmware.fieldtypes import PLAN_FIX, require_fit
    from chargeplan.firmware.image import (
        CHEMISTRY_CODES,
        GUARDS,
        IMAGE_VERSION,
        require_known_exits,
    )

    require_known_exits(doc, "C header")
    require_fit(doc, fix=PLAN_FIX)
    stages = []
    # the document's stages are the plan's after its pre-charge (a block of its own)
    planned = [stage for stage in plan.stages if stage.kind.value != "precharge"]
    for stage, encoded in zip(planned, doc["stages"], strict=True):
        stages.append({
            "doc": encoded,
            "plan": stage,
            "code": _KIND_MACROS[encoded["kind"]],
            "voltage_exit": _exit(encoded, "voltage_reached", "voltage_mV"),
            "current_exit": _exit(encoded, "current_below", "current_mA"),
            "duration_exit": _exit(encoded, "duration", "duration_s"),
            "guards": [_exit(encoded, condition, key)[0] for condition, key in GUARDS],
        })
    # the chemistry's cautions as the plan carries them (deferral apart), in ASCII words
    cautions = [c.replace("°C", "degC") for c in plan.cautions[:-1]]
    return str(_template().render(doc=doc, plan=plan, stages=stages, kinds=_KIND_MACROS,
                                  cautions=cautions,
                                  chemistries=CHEMISTRY_CODES, faults=FAULTS,
                                  trip_filter_ms=VOLTAGE_TRIP_FILTER_MS,
                                  image_version=IMAGE_VERSION))
