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
    "QUOTE_MAX",
    "Q_",
    "QuantityError",
    "describe_dimension",
    "option_number",
    "option_quantity",
    "parse_number",
    "parse_quantity",
    "quote",
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
# The examples come from the bundled scenarios: the small-engine workshop's ride-on mower
# (24 Ah) and its bench's mains budget (800 W), the lakeside boat store.
DIMENSIONS: dict[str, tuple[str, str, str]] = {
    "voltage": ("V", "12.6 V", "a voltage"),
    "cell_voltage": ("V/cell", "2.40 V/cell", "a voltage per cell"),
    "current": ("A", "2.5 A", "a current"),
    "c_rate": ("It", "0.1 It", "a C-rate"),
    "capacity": ("Ah", "24 Ah", "a capacity"),
    "energy": ("Wh", "120 Wh", "an energy"),
    "temperature": ("degC", "25 degC", "a temperature"),
    "temperature_difference": ("K", "5 K", "a temperature difference"),
    "duration": ("s", "8 h", "a duration"),
    "fraction": ("percent", "60 %", "a percentage"),
    "coefficient": ("mV/K/cell", "-3 mV/K/cell", "a temperature coefficient per cell"),
    "power": ("W", "800 W", "a power"),
    "resistance": ("ohm", "10 kohm", "a resistance"),
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

#: The longest quantity text read (a quantity is a few characters; longer text is refused).
TEXT_MAX = 100
#: How much of the user's text a message quotes (longer text ends in an ellipsis).
QUOTE_MAX = 80

# The one grammar (ASCII only): one number in plain or scientific notation, then one unit
# made of names joined by '/' or '*', each name with an optional '**n' or '^n' power.
_NUMBER = r"[-+]?(?:[0-9]+(?:\.[0-9]*)?|\.[0-9]+)(?:[eE][-+]?[0-9]+)?"
_TERM = r"[A-Za-z_%\u00b0\u03a9]+(?:(?:\*\*|\^)-?[0-9]+)?"
_QUANTITY = re.compile(
    rf"[ \t]*({_NUMBER})[ \t]*({_TERM}(?:[ \t]*[/*][ \t]*{_TERM})*)[ \t]*", re.ASCII
)
_NUMBER_ONLY = re.compile(rf"[ \t]*({_NUMBER})[ \t]*", re.ASCII)
_NOT_FINITE = re.compile(r"[-+]?\.?(?:nan|inf(?:inity)?)\b", re.IGNORECASE)
_SPACE = re.compile(r"[ \t]+")

# Characters with a meaning, and the ASCII they stand for. Each is named by a standard:
# U+2212 is the minus sign (Unicode Standard, ch. 6, from memory); U+00B5 MICRO SIGN and
# U+03BC GREEK SMALL LETTER MU both write the SI prefix micro; U+2103 and U+2109 are the
# degree Celsius and Fahrenheit signs; U+212A KELVIN SIGN and U+2126 OHM SIGN are canonically
# the letters K and Omega (Unicode NFC).
_MEANINGFUL = str.maketrans({
    "\u2212": "-", "\u00b5": "u", "\u03bc": "u", "\u2103": "degC", "\u2109": "degF",
    "\u212a": "K", "\u2126": "\u03a9",
})
#: Characters that look like a minus sign and are not one (Unicode category Pd, the dashes,
#: and minus lookalikes from other blocks).
_FALSE_MINUS = frozenset("\u058a\u05be\u1400\u1806\u2010\u2011\u2012\u2013\u2014\u2015\u2043"
                         "\u207b\u208b\u2796\u2e17\u2e1a\u2e3a\u2e3b\u2e40\u301c\u3030\u30a0"
                         "\ufe31\ufe32\ufe58\ufe63\uff0d\u02d7\u00ad")


class QuantityError(ValueError):
    """A quantity that cannot be read: ``problem`` says what is wrong, ``fix`` what to
    write. ``about_text`` is true when the characters themselves are wrong (reading the text
    as another kind of quantity would not help)."""

    def __init__(self, problem: str, fix: str, *, about_text: bool = False) -> None:
        self.problem, self.fix, self.about_text = problem, fix, about_text
        super().__init__(f"{problem}; {fix}")


def quote(text: object, limit: int = QUOTE_MAX) -> str:
    """The user's text as a message shows it: at most ``limit`` characters, with '…'.

    >>> quote("x" * 200)[-3:], len(quote("x" * 200))
    ('xx…', 80)
    """
    shown = str(text)
    return shown if len(shown) <= limit else shown[: limit - 1] + "…"


@cache
def _reference(kind: str) -> Any:
    return Q_(1, DIMENSIONS[kind][0]).dimensionality


#: One name of a unit text, with its power: what '/' and '*' join.
_UNIT_NAME = re.compile(r"([^/*^]+?)(?:(?:\*\*|\^)-?[0-9]+)?(?=$|[/*])")


@lru_cache(maxsize=256)
def _unit_text_problem(unit_text: str) -> str | None:
    """Why a unit text (no spaces) could read as another value, or None.

    pint multiplies what it finds glued or repeated: 'mA%' is mA x 0.01, '%%' is 0.0001 and
    'V/mV*V' is 1000 V. So '%' stands alone as a name, and no unit is named twice (with or
    without a prefix: pint's own ``parse_unit_name`` says which unit a name is).
    """
    names = [m.group(1) for m in _UNIT_NAME.finditer(unit_text.replace("**", "^"))]
    for name in names:
        if "%" in name and name != "%":
            if set(name) == {"%"}:
                return "writes '%' twice"
            return f"has '%' next to another unit ('{quote(name, 20)}')"
    seen: dict[str, str] = {}
    for name in names:
        try:
            candidates = ureg.parse_unit_name(name)
        except Exception:
            continue  # an unknown name: the reader says so
        units = {unit for _prefix, unit, _suffix in candidates}
        for unit in units:
            if unit in seen:
                return f"names the unit {unit} twice ('{seen[unit]}' and '{quote(name, 20)}')"
            seen[unit] = quote(name, 20)
    return None


@lru_cache(maxsize=256)
def _conversion(unit_text: str, kind: str) -> tuple[float, float] | None:
    """``value -> value * scale + shift`` into the kind's canonical unit, as pint converts
    (affine, so offset units like degF are exact); None when pint will not say, or when the
    unit text could read as another value (:func:`_unit_text_problem`)."""
    if _unit_text_problem(unit_text) is not None:
        return None
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


def _char_name(ch: str) -> str:
    import unicodedata

    return f"U+{ord(ch):04X} {unicodedata.name(ch, 'unnamed character')}"


def _text_problem(shown: str, *, digits_ok: str = "") -> QuantityError | None:
    """The first character in ``shown`` that no quantity may hold, as an error; else None.

    Checked by class, before any normalising, so that no character can change a value:
    control and invisible characters, dashes that are not the minus sign, digits that are
    not ASCII digits, letters that only look like Latin ones.
    """
    import unicodedata

    for index, ch in enumerate(shown):
        if ch.isascii():
            if (ch < " " and ch != "\t") or ch == "\x7f":
                return QuantityError(f"'{quote(shown)}' holds a control character "
                                     f"({_char_name(ch)})", "retype the value",
                                     about_text=True)
            continue
        if ch in _FALSE_MINUS:
            fixed = "".join("-" if c in _FALSE_MINUS else c for c in shown)
            return QuantityError(f"'{quote(shown)}' uses {_char_name(ch)}, which is not a "
                                 "minus sign", f"write {quote(fixed)}", about_text=True)
        category = unicodedata.category(ch)
        if category in ("Cf", "Cc", "Cs", "Co", "Cn", "Zl", "Zp"):
            return QuantityError(f"'{quote(shown)}' holds an invisible character "
                                 f"({_char_name(ch)}) at position {index + 1}",
                                 "retype the value without it", about_text=True)
        if ch in digits_ok or ch in "\u2212\u00b5\u03bc\u2103\u2109\u212a\u2126\u00b0\u03a9":
            continue
        if unicodedata.digit(ch, None) is not None or unicodedata.numeric(ch, None) is not None:
            return QuantityError(f"'{quote(shown)}' has {_char_name(ch)}, which is not one "
                                 "of the digits 0-9", "write the number with the digits 0-9",
                                 about_text=True)
        if category == "Zs":
            continue  # a space: fine between the number and its unit, refused inside either
        return QuantityError(f"'{quote(shown)}' has {_char_name(ch)}, which is not a Latin "
                             "letter, digit or unit sign", "write the unit in plain letters, "
                             "e.g. 'V', 'degC', 'uA'", about_text=True)
    return None


def _number_problem(text: str, shown: str, example: str, wanted: str, *,
                    unit: bool = True) -> QuantityError:
    """Why ``text`` (ASCII, normalised) is not one number and a unit: the likeliest reason."""
    numbers = re.findall(r"[0-9][0-9,.'_]*[0-9]|[0-9]", text)
    comma = next((n for n in numbers if "," in n), None)
    if comma is not None and re.fullmatch(r"[0-9]+,[0-9]+", comma):
        dotted, plain = comma.replace(",", "."), comma.replace(",", "")
        if re.fullmatch(r"[0-9]{1,3},[0-9]{3}", comma):  # a decimal comma or a separator
            return QuantityError(f"'{quote(shown)}' has a comma in its number (a decimal "
                                 "comma or a thousands separator)",
                                 f"write {dotted} or {plain}, not {comma}", about_text=True)
        return QuantityError(f"'{quote(shown)}' has a decimal comma",
                             f"write {dotted}, not {comma}", about_text=True)
    grouped = next((n for n in numbers if re.search(r"[0-9][_',][0-9]", n)
                    or n.count(".") > 1), None)
    if grouped is not None and not re.search(r"[_',]", grouped):
        # points only ('5.0.0', '1.500.000'): a typo or points grouping digits; either way
        # no one value is meant, so none is suggested
        return QuantityError(f"'{quote(shown)}' has more than one decimal point",
                             f"write one number with one decimal point at most, e.g. "
                             f"'{example}'", about_text=True)
    if grouped is not None:
        return QuantityError(f"'{quote(shown)}' groups digits (thousands separators)",
                             f"write {_ungrouped(grouped)}: one decimal point at most, no "
                             "separators", about_text=True)
    if re.search(r"[0-9.][ \t]+[-+.]?[0-9]", text) or len(re.findall(
            r"(?<![A-Za-z*^0-9.])[-+]?\.?[0-9]", text)) > 1:
        return QuantityError(f"'{quote(shown)}' has two numbers, or a space inside a number",
                             f"write one number{' and its unit' if unit else ''}, e.g. "
                             f"'{example}'", about_text=True)
    return QuantityError(f"cannot read '{quote(shown)}' as a quantity", f"write {wanted}",
                         about_text=True)


def _ungrouped(number: str) -> str:
    """'3_950' -> '3950'; '1.500,5' -> '1500.5' (the last of two kinds of mark as the
    decimal marker: a suggestion in a message, never a value read)."""
    marks = [m for m in ".," if m in number]
    if len(marks) == 2:
        decimal = max(marks, key=number.rfind)
        whole, _, fraction = number.rpartition(decimal)
        return re.sub(r"[_.,']", "", whole) + "." + fraction
    return re.sub(r"[_.,']", "", number)


def _normalise(shown: str, kind: str) -> str:
    """The text in the grammar's ASCII: meaningful signs rewritten, spaces made plain."""
    raw = shown
    if not raw.isascii():
        raw = raw.translate(_MEANINGFUL)
        raw = "".join(" " if not c.isascii() and c.isspace() else c for c in raw)
    # pint reads "°" as the word "degree", so "°C" would become the undefined "degreeC"
    raw = raw.replace("°C", "degC").replace("°F", "degF")
    if kind == "temperature_difference":
        # a difference written in degrees is that many kelvin (or 5/9 K per °F), not a
        # temperature: "+8 °C" warmer is 8 K, never 281.15 K
        raw = _DEGREES_F.sub("delta_degF", _DEGREES_C.sub("delta_degC", raw))
    if kind in _POWERS_WRITTEN_PLAIN:  # "m3", "cm²": a power written after the unit's letters
        lead = _LEADING_NUMBER.match(raw)  # (never inside the number: "3e2 cm2")
        start = lead.end() if lead else 0
        raw = raw[:start] + re.sub(r"(?<=[A-Za-z])([23²³])(?![0-9])",
                                   lambda m: "**" + m.group(1).translate(_SUPERSCRIPTS),
                                   raw[start:])
    return raw


_LEADING_NUMBER = re.compile(rf"[ \t]*{_NUMBER}", re.ASCII)


_SUPERSCRIPTS = str.maketrans("²³", "23")


def _unit_problem(number: float, unit_text: str, shown: str, kind: str) -> QuantityError:
    """Why ``unit_text`` is not a unit of ``kind``: unknown, or another dimension."""
    _unit, _example, label = DIMENSIONS[kind]
    wanted = describe_dimension(kind)
    try:
        quantity = Q_(number, unit_text)
        dimensionality = quantity.dimensionality
    except pint.UndefinedUnitError as error:
        name = str(getattr(error, "unit_names", "") or error).strip("'()[], ")
        hint = ""
        if "degree" in name and "\u00b0" in shown:  # pint reads '°' as 'degree'
            name = name.replace("degree", "\u00b0")
            if name == "\u00b0K":
                hint = " (kelvin takes no degree sign: write K, or degC for degrees Celsius)"
        if name not in shown:  # a name made by a rewrite ('µX' read as 'uX'): not named
            return QuantityError(f"'{quote(shown)}' has a unit chargeplan does not know",
                                 f"write {wanted}")
        if name == "C":
            hint = _C_HINTS.get(kind, " (chargeplan reads no unit 'C': degrees Celsius are "
                                      "'degC', a C-rate is 'It', a capacity 'Ah')")
        return QuantityError(f"unknown unit '{quote(name)}' in '{quote(shown)}'{hint}",
                             f"write {wanted}")
    except Exception:
        return QuantityError(f"cannot read the unit of '{quote(shown)}'", f"write {wanted}")
    if dimensionality != _reference(kind):
        return QuantityError(f"'{quote(shown)}' is not {label} (its unit is "
                             f"{quote(f'{quantity.units:~}')})", f"write {wanted}")
    return QuantityError(f"cannot convert '{quote(shown)}' to {DIMENSIONS[kind][0]}",
                         f"write {wanted}")


_C_HINTS = {
    "temperature": " (write degrees Celsius as 'degC')",
    "temperature_difference": " (write degrees Celsius as 'degC', or kelvin as 'K')",
    "current": " (write a C-rate as '0.1 It')",
    "c_rate": " (write a C-rate as '0.1 It')",
    "capacity": " (C would be coulombs, which chargeplan does not read; a capacity is in "
                "ampere-hours, 3600 C = 1 Ah)",
}


def parse_quantity(text: object, kind: str) -> float:
    """Parse ``text`` as a quantity of ``kind`` and return its magnitude in the
    kind's canonical unit (see :data:`DIMENSIONS`).

    Exactly one number in plain or scientific notation (ASCII digits, one optional sign,
    one decimal point, an optional exponent), then its unit. The minus sign U+2212, micro
    written µ or μ and the signs ℃ and ℉ are read as what they mean; every other character
    that could change a value (other dashes, commas, spaces or invisible characters inside
    a number, digits that are not 0-9) is refused: raises :class:`QuantityError`, a
    ``ValueError`` whose message says what to write instead.

    Examples
    --------
    >>> parse_quantity("12.6 V", "voltage")
    12.6
    >>> parse_quantity("\u22125 degC", "temperature")
    -5.0
    >>> parse_quantity("2 d", "duration")
    172800.0
    >>> parse_quantity("1,5 Ah", "capacity")
    Traceback (most recent call last):
    ...
    chargeplan.units.QuantityError: '1,5 Ah' has a decimal comma; write 1.5, not 1,5
    """
    if isinstance(text, str):
        match = _QUANTITY.fullmatch(text) if len(text) <= TEXT_MAX and text.isascii() else None
        if match is not None and kind not in _REWRITTEN:  # the fast path: plain ASCII
            convert = _conversion(match.group(2).replace(" ", "").replace("\t", ""), kind)
            if convert is not None:
                magnitude = float(match.group(1)) * convert[0] + convert[1]
                if math.isfinite(magnitude):
                    return magnitude
    return _parse_slowly(text, kind)


#: Kinds whose unit text is rewritten before reading (degrees as differences, plain powers).
_REWRITTEN = frozenset({"temperature_difference", *_POWERS_WRITTEN_PLAIN})


def _parse_slowly(text: object, kind: str) -> float:
    wanted = describe_dimension(kind)
    if isinstance(text, bool) or text is None:
        raise QuantityError(f"expected {wanted}", f"write {wanted}")
    if isinstance(text, int | float):
        raise QuantityError(f"{quote(text)} has no unit", f"write {wanted}")
    if not isinstance(text, str):
        raise QuantityError(f"expected {wanted}, got {type(text).__name__}", f"write {wanted}")
    shown = text.strip()  # messages quote ``shown``, the text as the user wrote it
    if not shown:
        raise QuantityError("empty", f"write {wanted}")
    if len(shown) > TEXT_MAX:
        raise QuantityError(f"'{quote(shown)}' is {len(shown)} characters long, more than any "
                            "quantity", f"write {wanted}", about_text=True)
    problem = _text_problem(shown, digits_ok="²³" if kind in _POWERS_WRITTEN_PLAIN else "")
    if problem is not None:
        raise problem
    raw = _normalise(shown, kind)
    if _NOT_FINITE.match(raw.strip()):
        raise QuantityError(f"'{quote(shown)}' is not a finite number", f"write {wanted}")
    if _NUMBER_ONLY.fullmatch(raw):
        raise QuantityError(f"'{quote(shown)}' has no unit", f"write {wanted}")
    match = _QUANTITY.fullmatch(raw)
    if match is None:
        raise _number_problem(raw, shown, DIMENSIONS[kind][1], wanted)
    number = float(match.group(1))
    unit_text = _SPACE.sub("", match.group(2))
    convert = _conversion(unit_text, kind)
    if convert is None:
        glued = _unit_text_problem(unit_text)
        if glued is not None:
            raise QuantityError(f"'{quote(shown)}' {glued}",
                                f"write one unit, each name once, e.g. '{DIMENSIONS[kind][1]}'",
                                about_text=True)
        raise _unit_problem(number, unit_text, shown, kind)
    magnitude = number * convert[0] + convert[1]
    if not math.isfinite(magnitude):
        raise QuantityError(f"'{quote(shown)}' is not a finite number", f"write {wanted}")
    return magnitude


def parse_number(text: str, *, integer: bool = False) -> float:
    """A plain number (no unit) read as strictly as a quantity's: ASCII digits, one sign,
    one decimal point, an optional exponent (the minus sign U+2212 counts as a minus).

    ``nan``, ``inf``, ``3_950``, ``1,5`` and the rest raise :class:`QuantityError`.
    With ``integer``, only a whole number written without a point or exponent is read.

    >>> parse_number("1.009e-3")
    0.001009
    >>> parse_number("−4")
    -4.0
    """
    shown = text.strip()
    example = "12" if integer else "3950"
    wanted = f"write {'a whole number' if integer else 'a number'} such as {example}"
    if not shown:
        raise QuantityError("empty", wanted)
    if len(shown) > TEXT_MAX:
        raise QuantityError(f"'{quote(shown)}' is {len(shown)} characters long, more than any "
                            "number", wanted)
    problem = _text_problem(shown)
    if problem is not None:
        raise problem
    raw = shown.translate(_MEANINGFUL)
    if _NOT_FINITE.fullmatch(raw):
        raise QuantityError(f"'{quote(shown)}' is not a finite number", wanted)
    if not _NUMBER_ONLY.fullmatch(raw):
        based = re.fullmatch(r"[ \t]*([-+]?)0([xXoObB])([0-9A-Fa-f_]+)[ \t]*", raw)
        if based is not None:
            base = {"x": 16, "o": 8, "b": 2}[based.group(2).lower()]
            try:
                decimal = str(int(based.group(1) + based.group(3), base))
            except ValueError:
                decimal = example
            raise QuantityError(f"'{quote(shown)}' is written in base {base}, not in decimal "
                                "digits", f"write it in the digits 0-9, e.g. {decimal}")
        if re.fullmatch(r"[ \t]*[-+]?[0-9.eE]+[ \t]*[A-Za-z%].*", raw):
            raise QuantityError(f"'{quote(shown)}' has a unit", f"write the number alone, "
                                f"e.g. {example}")
        raise _number_problem(raw, shown, example, f"a number such as {example}", unit=False)
    if integer and not re.fullmatch(r"[ \t]*[-+]?[0-9]+[ \t]*", raw, re.ASCII):
        raise QuantityError(f"'{quote(shown)}' is not a whole number", wanted)
    value = int(raw) if integer else float(raw)
    if not math.isfinite(value):
        raise QuantityError(f"'{quote(shown)}' is not a finite number", wanted)
    return value


def option_number(text: str | None, option: str, *, integer: bool = False) -> float | None:
    """A command-line option's plain number (:func:`parse_number`), or None when not given;
    a bad one is an InputError naming the option.

    >>> option_number("12", "--adc-bits", integer=True)
    12
    """
    if text is None:
        return None
    from chargeplan.errors import InputError

    try:
        return parse_number(text, integer=integer)
    except QuantityError as error:
        raise InputError(error.problem, field=option, fix=error.fix) from None


def option_quantity(text: str | None, kind: str, option: str) -> float | None:
    """A command-line option's quantity, or None; a bad one is an InputError naming it."""
    if text is None:
        return None
    from chargeplan.errors import InputError

    try:
        return parse_quantity(text, kind)
    except QuantityError as error:
        raise InputError(error.problem, field=option, fix=error.fix) from None
