"""The one pint registry of chargeplan, and the parsing of quantity strings.

The registry is built from ``units.txt`` beside this file: volts, amperes,
ampere-hours, watt-hours, degrees Celsius, kelvin, seconds to days, percent,
cells and C-rates. A C-rate is written with IEC 61434's reference test current
``It`` ("0.1 It" is the trade's 0.1C); plain "C" is deliberately undefined so a
C-rate cannot be mistaken for coulombs.

Quantities cross the package boundary; inside the numeric core values are plain
floats in the units named by their suffix (``_v``, ``_a``, ``_ah``, ``_s``, ``_c``).
"""

from __future__ import annotations

import math
import re
from functools import cache, lru_cache
from importlib.resources import files
from typing import Any

import pint

from chargeplan.errors import InternalError

try:  # pint's statement classes: not its documented API, so a pint that moves them is met
    from pint.delegates.base_defparser import ParserConfig
    from pint.delegates.txt_defparser.plain import PrefixDefinition, UnitDefinition
except ImportError:  # pragma: no cover - depends on the installed pint
    ParserConfig = None

__all__ = [
    "DAY_S",
    "DIMENSIONS",
    "Q_",
    "describe_dimension",
    "option_quantity",
    "parse_quantity",
    "ureg",
]

#: Seconds in a day (durations are held in seconds inside the library).
DAY_S = 86_400.0



def _registry(*, statements: bool = True) -> pint.UnitRegistry:
    """The registry, defined line by line from ``units.txt``.

    Each line is read by pint's own statement classes (prefix, then unit) and handed to
    ``define``: that skips pint's file tokenizer, which costs 4x as much for the same
    definitions (start-up matters: tests/benchmarks/bench_startup.py). Where the installed
    pint lacks those classes (or ``statements`` is false), each line goes to ``define`` as
    text, pint's documented way. tests/test_units.py checks that both give the units pint's
    own file parser gives.
    """
    registry = pint.UnitRegistry(None, cache_folder=None, autoconvert_offset_to_baseunit=True)
    config = ParserConfig(registry.non_int_type) if statements and ParserConfig else None
    text = (files("chargeplan") / "units.txt").read_text(encoding="utf-8")
    in_block = False
    for number, raw in enumerate(text.splitlines(), start=1):
        line = raw.split("#", 1)[0].strip()
        if line.startswith("@"):  # directive blocks (@defaults ... @end) are for pint's parser
            in_block = not line.startswith("@end")
            continue
        if not line or in_block:
            continue
        if config is None:
            registry.define(line)
            continue
        definition = (PrefixDefinition.from_string_and_config(line, config)
                      or UnitDefinition.from_string_and_config(line, config))
        if definition is None or isinstance(definition, Exception):
            raise InternalError(f"units.txt line {number} is not a unit definition: {line}")
        registry.define(definition)
    return registry


ureg = _registry()
Q_ = ureg.Quantity

# Each named dimension: the unit we convert to, an example a user can copy, its name.
DIMENSIONS: dict[str, tuple[str, str, str]] = {
    "voltage": ("V", "12.6 V", "a voltage"),
    "cell_voltage": ("V/cell", "2.40 V/cell", "a voltage per cell"),
    "current": ("A", "2.5 A", "a current"),
    "c_rate": ("It", "0.1 It", "a C-rate"),
    "capacity": ("Ah", "9 Ah", "a capacity"),
    "energy": ("Wh", "120 Wh", "an energy"),
    "temperature": ("degC", "25 degC", "a temperature"),
    "temperature_difference": ("K", "5 K", "a temperature difference"),
    "duration": ("s", "8 h", "a duration"),
    "fraction": ("percent", "60 %", "a percentage"),
    "coefficient": ("mV/K/cell", "-3 mV/K/cell", "a temperature coefficient per cell"),
    "power": ("W", "100 W", "a power"),
    "resistance": ("ohm", "10 mohm", "a resistance"),
    "resistance_capacity": ("ohm*Ah", "0.08 ohm*Ah", "a resistance times capacity"),
    "current_per_capacity": ("mA/Ah", "1 mA/Ah", "a current per ampere-hour"),
    "rate": ("percent/day", "4 %/month", "a rate of charge loss such as '4 %/month'"),
    "airflow": ("m**3/h", "60 m3/h", "an airflow"),
    "area": ("cm**2", "300 cm2", "an area"),
    "volume": ("m**3", "40 m3", "a volume"),
}

#: Kinds whose units users write with a plain exponent: "60 m3/h", "300 cm2".
_POWERS_WRITTEN_PLAIN = frozenset({"airflow", "area", "volume"})

_DEGREES_C = re.compile(r"(?<![A-Za-z_])(degC|celsius|degree_Celsius)(?![A-Za-z_])")
_DEGREES_F = re.compile(r"(?<![A-Za-z_])(degF|degree_Fahrenheit)(?![A-Za-z_])")
_NUMBER_ONLY = re.compile(r"^\s*[-+]?(\d+\.?\d*|\.\d+)([eE][-+]?\d+)?\s*$")


@cache
def _reference(kind: str) -> Any:
    return Q_(1, DIMENSIONS[kind][0]).dimensionality


_SIMPLE = re.compile(
    r"^\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*([A-Za-z°%][A-Za-z_°%/*]*)\s*$"
)


@lru_cache(maxsize=256)
def _conversion(unit_text: str, kind: str) -> tuple[float, float] | None:
    """``value -> value * scale + shift`` into the kind's canonical unit, as pint converts
    (affine, so offset units like degF are exact); None when pint will not say."""
    try:
        zero, one = Q_(0.0, unit_text), Q_(1.0, unit_text)
        if zero.dimensionality != _reference(kind):
            return None
        canonical = DIMENSIONS[kind][0]
        at_zero = float(zero.to(canonical).magnitude)
        at_one = float(one.to(canonical).magnitude)
    except Exception:
        return None
    return at_one - at_zero, at_zero


def describe_dimension(kind: str) -> str:
    """'a voltage such as 12.6 V' for error messages."""
    _unit, example, label = DIMENSIONS[kind]
    return f"{label} such as '{example}'"


def parse_quantity(text: object, kind: str) -> float:
    """Parse ``text`` as a quantity of ``kind`` and return its magnitude in the
    kind's canonical unit (see :data:`DIMENSIONS`).

    Raises ``ValueError`` with a message that says what to write instead.

    Examples
    --------
    >>> parse_quantity("12.6 V", "voltage")
    12.6
    >>> parse_quantity("5 degC", "temperature")
    5.0
    >>> parse_quantity("2 d", "duration")
    172800.0
    """
    unit, _example, label = DIMENSIONS[kind]
    wanted = describe_dimension(kind)
    if isinstance(text, bool) or text is None:
        raise ValueError(f"expected {wanted}")
    if isinstance(text, int | float):
        raise ValueError(f"{text} has no unit; write {wanted}")
    if not isinstance(text, str):
        raise ValueError(f"expected {wanted}, got {type(text).__name__}")
    shown = raw = text.strip()  # messages quote ``shown``, the text as the user wrote it
    if not raw:
        raise ValueError(f"empty; write {wanted}")
    # pint reads "°" as the word "degree", so "°C" would become the undefined "degreeC"
    raw = raw.replace("°C", "degC").replace("°F", "degF")
    if kind == "temperature_difference":
        # a difference written in degrees is that many kelvin (or 5/9 K per °F), not a
        # temperature: "+8 °C" warmer is 8 K, never 281.15 K
        raw = _DEGREES_C.sub("delta_degC", raw)
        raw = _DEGREES_F.sub("delta_degF", raw)
    if kind in _POWERS_WRITTEN_PLAIN:
        raw = re.sub(r"(?<=[a-z])([23])(?![0-9])", r"**\1", raw.replace("³", "3").replace("²", "2"))
    if _NUMBER_ONLY.match(raw):
        raise ValueError(f"'{shown}' has no unit; write {wanted}")
    simple = _SIMPLE.match(raw)
    if simple:  # "<number> <unit>": convert with the unit's cached affine map
        number, unit_text = float(simple.group(1)), simple.group(2)
        convert = _conversion(unit_text, kind)
        if convert is not None:
            scale, shift = convert
            magnitude = number * scale + shift
            if not math.isfinite(magnitude):
                raise ValueError(f"'{shown}' is not a finite number; write {wanted}")
            return magnitude
    try:
        quantity = Q_(raw)
    except pint.UndefinedUnitError as error:
        name = str(getattr(error, "unit_names", "") or error).strip("'()[], ")
        hint = ""
        if name == "C":
            hint = (" (write degrees Celsius as 'degC')" if kind.startswith("temperature")
                    else " (write a C-rate as '0.1 It')")
        raise ValueError(f"unknown unit '{name}' in '{shown}'{hint}; write {wanted}") from None
    except Exception:
        raise ValueError(f"cannot read '{shown}' as a quantity; write {wanted}") from None
    if not isinstance(quantity, pint.Quantity):
        raise ValueError(f"'{shown}' has no unit; write {wanted}")
    if quantity.dimensionality != _reference(kind):
        raise ValueError(
            f"'{shown}' is not {label} "
            f"(its unit is {quantity.units:~}); write {wanted}"
        )
    try:
        magnitude = float(quantity.to(unit).magnitude)
    except Exception:
        raise ValueError(f"cannot convert '{shown}' to {unit}; write {wanted}") from None
    if not math.isfinite(magnitude):
        raise ValueError(f"'{shown}' is not a finite number; write {wanted}")
    return magnitude


def option_quantity(text: str | None, kind: str, option: str) -> float | None:
    """A command-line option's quantity, or None; a bad one is an InputError naming it."""
    if text is None:
        return None
    from chargeplan.errors import InputError

    try:
        return parse_quantity(text, kind)
    except ValueError as error:
        problem, _, fix = str(error).partition("; ")
        raise InputError(problem, field=option, fix=fix or None) from None
