"""Field types for input models: quantity strings checked for their dimension.

A quantity field reads a string with its unit ("12.6 V", "5 degC", "0.1 It") through
the one pint registry and stores a plain float in the kind's canonical unit (see
:data:`chargeplan.units.DIMENSIONS`); the attribute name carries that unit
(``capacity_ah``, ``battery_temperature_c``), the file key does not (``capacity``).
"""

from __future__ import annotations

import math
import re
from collections.abc import Callable
from dataclasses import dataclass
from typing import Annotated, Any

from pydantic import BaseModel as _BaseModel
from pydantic import ConfigDict
from pydantic_core import core_schema

from chargeplan.units import (
    DIMENSIONS,
    QuantityError,
    describe_dimension,
    parse_number,
    parse_quantity,
    quote,
)

__all__ = [
    "CellOrPackVoltage",
    "CurrentOrRate",
    "CurrentSpec",
    "FreeText",
    "Ident",
    "InputModel",
    "Parsed",
    "Text",
    "VoltageSpec",
    "free_text",
    "local_date",
    "number",
    "quantity",
    "shown_text",
]

# one number (ASCII digits; the minus sign U+2212 too), then a unit (chargeplan.units)
_NUMBER_WITH_UNIT = r"^\s*[-+\u2212]?([0-9]+(\.[0-9]*)?|\.[0-9]+)([eE][-+]?[0-9]+)?\s*[^\s0-9.,].*$"


class InputModel(_BaseModel):
    """Base of input models: unknown keys are errors, keys are the file's keys."""

    model_config = ConfigDict(
        extra="forbid",
        populate_by_name=True,
        frozen=True,
        str_strip_whitespace=True,
        allow_inf_nan=False,
    )


@dataclass(frozen=True, slots=True, eq=False)
class Parsed:
    """Field metadata: ``parse`` alone reads the raw value from the file and returns the
    attribute's value, or raises ValueError saying what to write; ``json_schema`` is the
    field's entry in the published JSON Schemas.

    Pydantic builds one plain validator for the field and no schema for the type
    ``parse`` returns. (A BeforeValidator would build the inner type's validator too, a
    whole dataclass schema for CurrentSpec: twice the start-up cost per field, see
    tests/benchmarks/bench_startup.py.)
    """

    parse: Callable[[Any], Any]
    json_schema: dict[str, Any]
    #: ``parse`` of each of many texts at once, where the field has a quicker way to read a
    #: column (chargeplan.csvcolumns): the same values, or the first one's error.
    parse_many: Callable[[list[str]], list[Any]] | None = None

    def __get_pydantic_core_schema__(self, source: Any, handler: Any) -> Any:
        return core_schema.no_info_plain_validator_function(self.parse)

    def __get_pydantic_json_schema__(self, schema: Any, handler: Any) -> dict[str, Any]:
        return dict(self.json_schema)


#: How many distinct texts each field remembers reading: a column's values repeat ("120 Ah",
#: "57 %", "agm"), so a file's few distinct texts are each parsed once, not once a row.
REMEMBERED_TEXTS = 1024


def _remembered(read: Callable[[object], Any]) -> Callable[[object], Any]:
    """``read``, remembering the value each text gives (up to REMEMBERED_TEXTS texts; when
    that many are remembered, it starts over).

    Only a value read is remembered: a text that raised is read, and raises, again each
    time, so each bad cell is reported on its own row. Only ``str`` is remembered (``True``,
    ``1`` and ``1.0`` are equal keys; a list is no key). ``read`` is a function of the raw
    value alone, and what it returns is immutable (a float, a str, a frozen spec), so rows
    may share it. (A dict, not ``functools.lru_cache``: a quarter less time a row.)
    """
    known: dict[str, Any] = {}

    def parse(raw: object) -> Any:
        if type(raw) is not str:
            return read(raw)
        try:
            return known[raw]
        except KeyError:
            pass
        value = read(raw)
        if len(known) >= REMEMBERED_TEXTS:
            known.clear()
        known[raw] = value
        return value

    return parse


def _schema(kind: str, description: str | None = None) -> dict[str, Any]:
    return {
        "type": "string",
        "pattern": _NUMBER_WITH_UNIT,
        "description": description or f"{describe_dimension(kind)} (unit required)",
        "examples": [DIMENSIONS[kind][1]],
    }


def _shown(value: float, unit: str) -> str:
    """A bound or value as a person wrote it: durations in days or hours, not seconds."""
    if unit == "s" and value == 0:
        return "0 d"
    if unit == "s" and abs(value) >= 3600:
        return f"{value / 86400:g} d" if abs(value) >= 86400 else f"{value / 3600:g} h"
    return f"{value:g} {unit}"


def _reader(kind: str, low: float | None, high: float | None) -> Callable[[object], float]:
    """Parse a quantity string of ``kind`` and check it against the sensible bounds."""
    unit = DIMENSIONS[kind][0]

    def read(raw: object) -> float:
        value = parse_quantity(raw, kind)
        if not math.isfinite(value):  # parse_quantity refuses these too; a NaN passes < and >
            raise ValueError(f"'{quote(raw)}' is not a finite number")
        if low is not None and value < low:
            raise ValueError(f"{_shown(value, unit)} is below the least sensible "
                             f"{_shown(low, unit)}")
        if high is not None and value > high:
            raise ValueError(f"{_shown(value, unit)} is above the largest sensible "
                             f"{_shown(high, unit)}")
        return value

    return read


def quantity(
    kind: str,
    *,
    ge: float | None = None,
    le: float | None = None,
    description: str | None = None,
) -> Any:
    """An annotated float read from a quantity string of dimension ``kind``.

    ``ge``/``le`` bound the value in the kind's canonical unit.
    """
    return Annotated[float,
                     Parsed(_remembered(_reader(kind, ge, le)), _schema(kind, description))]


def _number_reader(whole: bool, low: float | None, high: float | None) -> Callable[[object], float]:
    """A plain number: a YAML or JSON number, or text read by the one reader (a CSV cell)."""

    def read(raw: object) -> float:
        if isinstance(raw, bool):
            raise QuantityError(f"{raw} is not a number", "write a number such as 6")
        if isinstance(raw, int | float) and not isinstance(raw, bool):
            value = raw
            if whole and not isinstance(raw, int):  # 6.0 too: as '6.0' in a CSV cell is
                raise QuantityError(f"{raw!r} is not a whole number",
                                    "write a whole number such as 6, without a point")
            if not math.isfinite(value):
                raise QuantityError(f"{raw} is not a finite number", "write a finite number")
        elif isinstance(raw, str):
            value = parse_number(raw, integer=whole)
        else:
            raise QuantityError(f"expected a number, got {type(raw).__name__}",
                                "write a number such as 6")
        if low is not None and value < low:
            raise QuantityError(f"{value:g} is below the least sensible {low:g}",
                                f"use a value of at least {low:g}")
        if high is not None and value > high:
            raise QuantityError(f"{value:g} is above the largest sensible {high:g}",
                                f"use a value of at most {high:g}")
        return int(value) if whole else float(value)

    return read


def number(*, ge: float | None = None, le: float | None = None, whole: bool = False,
           description: str | None = None) -> Any:
    """An annotated plain number (no unit): a YAML or JSON number, or text as strict as a
    quantity's (a CSV cell): no '3_950', '1,5', 'nan' or lookalike digits."""
    schema: dict[str, Any] = {"type": "integer" if whole else "number"}
    if ge is not None:
        schema["minimum"] = ge
    if le is not None:
        schema["maximum"] = le
    if description:
        schema["description"] = description
    return Annotated[int if whole else float,
                     Parsed(_remembered(_number_reader(whole, ge, le)), schema)]


def local_date(raw: object) -> object:
    """A date field's value, for a ``mode="before"`` validator: text read as YYYY-MM-DD only
    (chargeplan.clock: no '20261207', no number of seconds since 1970, which pydantic would
    read as a date); a date object, or None, as it is (pydantic checks the type)."""
    import datetime as dt

    from chargeplan.clock import parse_date

    if raw is None or isinstance(raw, dt.date):
        return raw
    if isinstance(raw, str):
        return parse_date(raw)
    raise QuantityError(f"{quote(raw)} is not a date", "write it as YYYY-MM-DD, e.g. 2026-12-07")


TEXT_MAX = 200
#: Free text (notes) may be longer.
FREE_TEXT_MAX = 20_000
#: The control characters text may not hold: all below U+0020 but the tab, and DEL.
_CONTROL = re.compile("[\x00-\x08\x0a-\x1f\x7f]")
#: Invisible characters by Unicode general category (the Unicode Character Database, read
#: through unicodedata): format characters, among them the zero-width ones and every
#: bidirectional control (U+061C, U+200E-U+200F, U+202A-U+202E, U+2066-U+2069, all Cf),
#: controls, surrogates, private use, unassigned, and the line and paragraph separators.
_INVISIBLE = frozenset({"Cf", "Cc", "Cs", "Co", "Cn", "Zl", "Zp"})
#: Scripts whose letters include lookalikes of Latin ones (Unicode TR39's confusables, from
#: memory: Cyrillic 'о' and 'а', Greek 'Α', Armenian 'օ', Cherokee 'Ꭺ'...).
_LOOKALIKE_SCRIPTS = ("CYRILLIC", "GREEK", "ARMENIAN", "CHEROKEE", "COPTIC")


def shown_text(value: str) -> str:
    """The text as a message shows it: every invisible character written as <U+XXXX>, so that
    none hides in, or reorders, the message line."""
    import unicodedata

    return quote("".join(f"<U+{ord(c):04X}>" if not c.isascii()
                         and unicodedata.category(c) in _INVISIBLE else c for c in value))


def _character_problem(value: str, *, identifier: bool) -> str | None:
    """Why ``value`` (not ASCII) may not be text a person reads, or None.

    Every text refuses invisible characters (:data:`_INVISIBLE`); an identifier (an id, a
    bay, a channel) also refuses what only looks like other text: characters that NFKC
    compatibility folds into others (full-width letters, a no-break space, the Kelvin
    sign), dashes that are not '-', digits that are not 0-9, and Latin letters mixed with
    a script of lookalikes (a Cyrillic 'о' in 'mоwer-3'): two such ids look the same.
    """
    import unicodedata

    from chargeplan.units import _FALSE_MINUS, _char_name

    for index, ch in enumerate(value):
        if ch.isascii():
            continue
        if unicodedata.category(ch) in _INVISIBLE:
            return (f"'{shown_text(value)}' holds an invisible or direction-changing "
                    f"character ({_char_name(ch)}) at position {index + 1}; retype it "
                    "without it")
    if not identifier:
        return None
    for ch in value:
        if ch.isascii():
            continue
        if ch in _FALSE_MINUS:
            return (f"'{quote(value)}' has {_char_name(ch)}, which looks like '-'; write "
                    f"'{quote(''.join('-' if c in _FALSE_MINUS else c for c in value))}'")
        if unicodedata.normalize("NFKC", ch) != ch:
            folded = unicodedata.normalize("NFKC", value)
            return (f"'{quote(value)}' has {_char_name(ch)}, which looks like "
                    f"'{unicodedata.normalize('NFKC', ch)}'; write '{quote(folded)}'")
        if unicodedata.category(ch) == "Nd":
            return (f"'{quote(value)}' has {_char_name(ch)}, which is not one of the digits "
                    "0-9; write the id with the digits 0-9")
    if any(c.isascii() and c.isalpha() for c in value):
        for ch in value:
            if not ch.isascii() and ch.isalpha() and unicodedata.name(ch, "").startswith(
                    _LOOKALIKE_SCRIPTS):
                return (f"'{quote(value)}' mixes Latin letters with {_char_name(ch)}, which "
                        "may look like a Latin letter; write it in one script")
    return None


#: Free text may hold line breaks (notes: a block in YAML); the other controls never.
_CONTROL_BUT_LINES = re.compile("[\x00-\x08\x0b\x0c\x0e-\x1f\x7f]")


def _text_reader(*, identifier: bool, empty: bool, limit: int) -> Callable[[object], str]:
    """A text field's reader; its ``many`` attribute reads a list of texts at once (the
    same values, or the first bad text's error)."""
    control = _CONTROL_BUT_LINES if empty else _CONTROL

    def read(raw: object) -> str:
        if not isinstance(raw, str):
            raise ValueError("expected text; write it as text (in quotes if it looks like a "
                             "number)")
        value = raw.strip()
        if not value:
            if empty:
                return value
            raise ValueError("is empty; write some text")
        if control.search(value):
            raise ValueError("contains control characters; write plain text")
        if len(value) > limit:
            raise ValueError(f"is {len(value)} characters long; shorten it to {limit} or fewer")
        if not value.isascii():
            problem = _character_problem(value, identifier=identifier)
            if problem is not None:
                raise ValueError(problem)
        return value

    def many(raws: list[str]) -> list[str]:
        # the checks of read, on all the texts joined by a tab (no control character, and
        # not one either text reader refuses); any doubt: each text read on its own
        if set(map(type, raws)) <= {str}:
            values = list(map(str.strip, raws))
            joined = "\t".join(values)
            if (joined.isascii() and control.search(joined) is None
                    and max(map(len, values), default=0) <= limit and (empty or all(values))):
                return values
        return [read(raw) for raw in raws]

    read.many = many  # type: ignore[attr-defined]
    return read


_text = _text_reader(identifier=False, empty=False, limit=TEXT_MAX)
#: Free text's reader, for a field with its own type (a profile's sources).
free_text = _text_reader(identifier=False, empty=True, limit=FREE_TEXT_MAX)

#: A name or other text a person reads: no control or invisible characters.
Text = Annotated[str, Parsed(_remembered(_text),
                             {"type": "string", "minLength": 1, "maxLength": TEXT_MAX},
                             _text.many)]  # type: ignore[attr-defined]
_ident = _text_reader(identifier=True, empty=False, limit=TEXT_MAX)
#: An id, a bay or a channel: Text that also refuses lookalikes of other text.
Ident = Annotated[str, Parsed(_remembered(_ident),
                              {"type": "string", "minLength": 1, "maxLength": TEXT_MAX},
                              _ident.many)]  # type: ignore[attr-defined]
#: Free text that may be empty (an owner, notes): no control or invisible characters.
FreeText = Annotated[str, Parsed(_remembered(free_text),
                                 {"type": "string", "maxLength": FREE_TEXT_MAX},
                                 free_text.many)]  # type: ignore[attr-defined]


@dataclass(frozen=True, slots=True)
class CurrentSpec:
    """A current given in amperes or as a C-rate (It) of the battery's capacity."""

    amperes: float | None = None
    c_rate: float | None = None

    def amps(self, capacity_ah: float) -> float:
        if self.amperes is not None:
            return self.amperes
        assert self.c_rate is not None
        return self.c_rate * capacity_ah

    def __str__(self) -> str:
        return f"{self.amperes:g} A" if self.amperes is not None else f"{self.c_rate:g} It"


def _current_or_rate(raw: object) -> CurrentSpec:
    if isinstance(raw, CurrentSpec):
        return raw
    try:
        value = parse_quantity(raw, "current")
        result = CurrentSpec(amperes=value)
    except QuantityError as as_current:
        if as_current.about_text:  # the characters are wrong: a C-rate would not read either
            raise
        try:
            result = CurrentSpec(c_rate=parse_quantity(raw, "c_rate"))
        except QuantityError:
            raise QuantityError(as_current.problem, "write a current such as '2.5 A' or a "
                                "C-rate such as '0.1 It'") from None
    magnitude = result.amperes if result.amperes is not None else result.c_rate
    assert magnitude is not None
    if not magnitude > 0:
        raise ValueError(f"'{quote(raw)}' must be above zero")
    if result.amperes is not None and result.amperes < 0.001:
        raise ValueError(f"'{quote(raw)}' is below 1 mA, the smallest current a setpoint "
                         "file carries")
    if result.amperes is not None and result.amperes > 10_000:
        raise ValueError(f"'{quote(raw)}' is above the largest sensible 10000 A")
    if result.c_rate is not None and result.c_rate > 20:
        raise ValueError(f"'{quote(raw)}' is above the largest sensible 20 It")
    return result


CurrentOrRate = Annotated[
    CurrentSpec,
    Parsed(
        _remembered(_current_or_rate),
        {
            "type": "string",
            "pattern": _NUMBER_WITH_UNIT,
            "description": "a current such as '2.5 A', or a C-rate such as '0.1 It' "
            "(It = capacity / 1 h, IEC 61434)",
            "examples": ["2.5 A", "0.1 It"],
        }
    ),
]


@dataclass(frozen=True, slots=True)
class VoltageSpec:
    """A voltage for the whole battery ('14.7 V') or per cell ('2.45 V/cell')."""

    volts: float
    per_cell: bool

    def cell_volts(self, cells_in_series: int) -> float:
        return self.volts if self.per_cell else self.volts / cells_in_series

    def __str__(self) -> str:
        return f"{self.volts:g} V/cell" if self.per_cell else f"{self.volts:g} V"


def _pack_or_cell(raw: object) -> VoltageSpec:
    if isinstance(raw, VoltageSpec):
        return raw
    try:
        result = VoltageSpec(parse_quantity(raw, "voltage"), per_cell=False)
    except QuantityError as as_pack:
        if as_pack.about_text:  # the characters are wrong: a per-cell value would not read
            raise
        try:
            result = VoltageSpec(parse_quantity(raw, "cell_voltage"), per_cell=True)
        except QuantityError:
            raise QuantityError(as_pack.problem, "write a battery voltage such as '14.7 V' "
                                "or a voltage per cell such as '2.45 V/cell'") from None
    if not (result.volts > 0 and math.isfinite(result.volts)):
        raise ValueError(f"'{quote(raw)}' must be above zero")
    if result.volts > 1000:
        raise ValueError(f"'{quote(raw)}' is above the largest sensible 1000 V")
    return result


CellOrPackVoltage = Annotated[
    VoltageSpec,
    Parsed(
        _remembered(_pack_or_cell),
        {
            "type": "string",
            "pattern": _NUMBER_WITH_UNIT,
            "description": "a battery voltage such as '14.7 V' or a voltage per cell "
            "such as '2.45 V/cell'",
            "examples": ["14.7 V", "2.45 V/cell"],
        }
    ),
]
