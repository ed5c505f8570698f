"""Quantity text: one number as written, or a refusal; never another value.

The reader (chargeplan.units.parse_quantity, parse_number) accepts one number in plain or
scientific notation with ASCII digits, then its unit. The characters with a meaning are
tested case by case below; every other character that could slip into a copied value
(spaces of every kind, invisible characters, dashes, commas, lookalike digits) must give a
refusal or exactly the clean value, wherever it is inserted.
"""

from __future__ import annotations

import json

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from typer.testing import CliRunner

from chargeplan.cli import app
from chargeplan.errors import InputError
from chargeplan.units import QuantityError, option_number, parse_number, parse_quantity

runner = CliRunner()

# Unicode Standard, ch. 6 (from memory): the space separators (Zs), the zero-width and
# format characters (Cf), the dashes (Pd) and minus lookalikes other than U+2212 MINUS SIGN
SPACES = " \t\u00a0\u1680\u2000\u2001\u2002\u2003\u2004\u2005\u2006\u2007\u2008\u2009\u200a" \
         "\u202f\u205f\u3000"
INVISIBLE = "\u200b\u200c\u200d\u2060\ufeff\u00ad\u180e\u200e\u200f\u2061\u2062\u2063"
DASHES = "\u2010\u2011\u2012\u2013\u2014\u2015\u2043\ufe58\ufe63\uff0d\u02d7\u207b\u208b" \
         "\u2796\u058a\u301c"
# SI Brochure 5.4.4 (from memory): a comma is a decimal marker in some documents, and
# digits are never grouped with a point or a comma; the Arabic separators, underscore and
# apostrophe group or mark digits elsewhere
COMMAS = ",\u066b\u066c\u060c\u201a\uff0c_'\u2019"
# digits that are not 0-9: full-width, Arabic-Indic, extended Arabic-Indic, Devanagari,
# superscript, subscript, mathematical bold, circled
LOOKALIKE_DIGITS = "\uff10\uff11\uff15\uff19\u0660\u0661\u0665\u06f1\u06f5\u0966\u0967" \
                   "\u00b9\u00b2\u00b3\u2074\u2075\u2080\u2081\u2085\U0001d7ce\U0001d7cf" \
                   "\u2460\u2464"
MEANINGLESS = SPACES + INVISIBLE + DASHES + COMMAS + LOOKALIKE_DIGITS

UNITS = {
    "voltage": ["V", "mV", "kV"],
    "current": ["A", "mA", "uA"],
    "capacity": ["Ah", "mAh"],
    "temperature": ["degC", "degF", "K"],
    "temperature_difference": ["K", "degC"],
    "duration": ["h", "min", "d", "s"],
    "fraction": ["%"],
    "c_rate": ["It"],
    "cell_voltage": ["V/cell"],
    "coefficient": ["mV/K/cell"],
    "area": ["cm2"],
    "airflow": ["m3/h"],
}


@st.composite
def clean_quantities(draw) -> tuple[str, str]:
    """A clean ASCII quantity ('-12.5e-1 mV') and its kind."""
    kind = draw(st.sampled_from(sorted(UNITS)))
    sign = draw(st.sampled_from(["", "-", "+"]))
    whole = draw(st.from_regex(r"[0-9]{1,4}", fullmatch=True))
    fraction = draw(st.sampled_from(["", "."]) | st.from_regex(r"\.[0-9]{1,3}",
                                                                fullmatch=True))
    exponent = draw(st.sampled_from(["", "e3", "e-2", "E+1"]))
    space = draw(st.sampled_from(["", " "]))
    unit = draw(st.sampled_from(UNITS[kind]))
    return f"{sign}{whole}{fraction}{exponent}{space}{unit}", kind


@st.composite
def dirtied(draw) -> tuple[str, str, str]:
    clean, kind = draw(clean_quantities())
    text = clean
    for _ in range(draw(st.integers(1, 3))):
        at = draw(st.integers(0, len(text)))
        text = text[:at] + draw(st.sampled_from(MEANINGLESS)) + text[at:]
    return clean, text, kind


@settings(max_examples=1500, deadline=None)
@given(dirtied())
def test_a_meaningless_character_gives_a_refusal_or_exactly_the_clean_value(case):
    clean, text, kind = case
    expected = parse_quantity(clean, kind)
    try:
        value = parse_quantity(text, kind)
    except ValueError as error:
        assert isinstance(error, QuantityError)
        assert "; " in str(error)  # a problem and a fix, in one line
        return
    assert value == expected, (clean, text)


@settings(max_examples=800, deadline=None)
@given(st.from_regex(r"[-+]?[0-9]{1,4}(\.[0-9]{0,3})?([eE][-+]?[0-9])?", fullmatch=True),
       st.lists(st.tuples(st.integers(0, 12), st.sampled_from(MEANINGLESS)), min_size=1,
                max_size=3))
def test_a_plain_number_is_as_strict(clean, insertions):
    text = clean
    for at, ch in insertions:
        at = min(at, len(text))
        text = text[:at] + ch + text[at:]
    try:
        value = parse_number(text)
    except QuantityError:
        return
    assert value == float(clean), (clean, text)


@pytest.mark.parametrize(
    ("text", "kind", "expected"),
    [
        # U+2212 MINUS SIGN is the minus sign (Unicode Standard, ch. 6, from memory)
        ("\u22125 degC", "temperature", -5.0),
        ("\u22123 mV/K/cell", "coefficient", -3.0),
        ("1.5e\u22123 A", "current", 1.5e-3),
        # U+00B5 MICRO SIGN and U+03BC GREEK SMALL LETTER MU both write the prefix micro,
        # 1e-6 (SI Brochure, table 7, from memory)
        ("500 \u00b5A", "current", 500e-6),
        ("500 \u03bcA", "current", 500e-6),
        ("20 \u03bcohm*Ah", "resistance_capacity", 20e-6),
        # U+2103 DEGREE CELSIUS and U+2109 DEGREE FAHRENHEIT; 41 degF = 5 degC
        # (NIST SP 811, Appendix B, from memory)
        ("25 \u2103", "temperature", 25.0),
        ("\u22125\u2103", "temperature", -5.0),
        ("41 \u2109", "temperature", 5.0),
        ("8 \u2103", "temperature_difference", 8.0),
        # U+212A KELVIN SIGN and U+2126 OHM SIGN are canonically K and U+03A9 (Unicode NFC)
        ("300 \u212a", "temperature", 300 - 273.15),
        ("10 k\u2126", "resistance", 10_000.0),
        # a no-break or thin space between a number and its unit (SI Brochure 5.4.3,
        # from memory: a space separates them)
        ("12.6\u00a0V", "voltage", 12.6),
        ("12.6\u2009V", "voltage", 12.6),
        ("300 cm\u00b2", "area", 300.0),
        # scientific notation, as Steinhart-Hart coefficients are written
        ("1.009e-3 V", "voltage", 1.009e-3),
    ],
)
def test_characters_with_a_meaning_read_as_meant(text, kind, expected):
    assert parse_quantity(text, kind) == pytest.approx(expected, rel=1e-12, abs=1e-15)


@pytest.mark.parametrize(
    ("text", "kind", "fragment"),
    [
        ("\u20105 degC", "temperature", "U+2010 HYPHEN, which is not a minus sign; "
                                        "write -5 degC"),
        ("\u20135 degC", "temperature", "write -5 degC"),
        ("\uff0d5 degC", "temperature", "write -5 degC"),
        ("1,5 Ah", "capacity", "write 1.5, not 1,5"),
        ("12,6 V", "voltage", "write 12.6, not 12,6"),
        ("1,500 mAh", "capacity", "write 1.500 or 1500, not 1,500"),
        ("1,500,000 mAh", "capacity", "groups digits"),
        ("1.500,5 mAh", "capacity", "groups digits"),
        ("3_950 V", "voltage", "write 3950"),
        ("1 500 mAh", "capacity", "two numbers, or a space inside a number"),
        ("1\u00a0500 mAh", "capacity", "two numbers, or a space inside a number"),
        ("1\u2009500 mAh", "capacity", "two numbers, or a space inside a number"),
        ("0.1 5 It", "c_rate", "two numbers"),
        ("1\u200b2 V", "voltage", "U+200B ZERO WIDTH SPACE"),
        ("12 V\u200b", "voltage", "invisible character"),
        ("12 m\u00adA", "current", "U+00AD SOFT HYPHEN"),
        ("\ufeff12 V", "voltage", "invisible character"),
        ("\uff11\uff12 V", "voltage", "FULLWIDTH DIGIT ONE, which is not one of the digits"),
        ("\u0661\u0662 V", "voltage", "ARABIC-INDIC DIGIT ONE"),
        ("\u00b25 V", "voltage", "SUPERSCRIPT TWO, which is not one of the digits"),
        ("12 \u0474", "voltage", "CYRILLIC CAPITAL LETTER IZHITSA"),  # looks like V
        ("2 \u0410h", "capacity", "CYRILLIC CAPITAL LETTER A"),
        ("2 \u0391h", "capacity", "GREEK CAPITAL LETTER ALPHA"),
        ("12 \uff36", "voltage", "FULLWIDTH LATIN CAPITAL LETTER V"),
        ("12 V V", "voltage", "cannot read '12 V V'"),
        ("nan V", "voltage", "is not a finite number"),
        ("1e400 V", "voltage", "is not a finite number"),
        ("25 )", "temperature", "cannot read"),
        # "C" is not a unit here: a capacity in coulombs is told what C would be
        ("43200 C", "capacity", "C would be coulombs"),
        ("0.2 C", "c_rate", "write a C-rate as '0.1 It'"),
    ],
)
def test_characters_that_could_change_a_value_are_refused(text, kind, fragment):
    with pytest.raises(QuantityError) as caught:
        parse_quantity(text, kind)
    assert fragment in str(caught.value), str(caught.value)
    assert "\n" not in str(caught.value)


def test_the_capacity_in_coulombs_is_not_told_to_write_a_c_rate():
    with pytest.raises(QuantityError) as caught:
        parse_quantity("43200 C", "capacity")
    assert "It" not in str(caught.value) and "Ah" in str(caught.value)


def test_messages_quote_at_most_80_characters():
    for text in ["1" * 1_000_000 + " V", "12 " + "x" * 1_000_000, "1,5" * 300_000 + " V",
                 "\u2010" + "5" * 1_000_000 + " degC"]:
        with pytest.raises(QuantityError) as caught:
            parse_quantity(text, "voltage")
        assert len(str(caught.value)) < 400, str(caught.value)[:500]
        assert "…" in str(caught.value)


@pytest.mark.parametrize(
    ("text", "fragment"),
    [("nan", "not a finite number"), ("inf", "not a finite number"),
     ("-Infinity", "not a finite number"), ("3_950", "write 3950"),
     ("1,5", "write 1.5, not 1,5"), ("\uff13950", "FULLWIDTH DIGIT THREE"),
     ("3950 K", "has a unit"), ("39 50", "two numbers"), ("", "empty")],
)
def test_an_options_number_is_refused_naming_the_option(text, fragment):
    with pytest.raises(InputError) as caught:
        option_number(text, "--beta")
    assert str(caught.value).startswith("--beta: ") and fragment in str(caught.value)


def test_a_whole_number_option_takes_no_point():
    assert option_number("12", "--adc-bits", integer=True) == 12
    with pytest.raises(InputError, match="is not a whole number"):
        option_number("12.0", "--adc-bits", integer=True)


# -- through the command line: every input path reads the same way ---------------------

LITHIUM_COLD = {
    "battery": {"name": "Launch house pack, berth 7", "chemistry": "lifepo4",
                "nominal_voltage": "12 V", "capacity": "100 Ah"},
    "conditions": {"battery_temperature": "\u22125 degC"},
}


def _write(path, data) -> str:
    path.write_text(json.dumps(data, ensure_ascii=False), encoding="utf-8")
    return str(path)


def test_a_lithium_battery_at_minus_sign_5_is_planned_at_minus_5(tmp_path):
    # LiFePO4 must not be charged below 0 degC (common practice; BU-410, from memory): the
    # typographic minus must give the same refusal as the ASCII one, never a plan at +5
    typographic = runner.invoke(app, ["plan", _write(tmp_path / "a.json", LITHIUM_COLD)])
    ascii_data = json.loads(json.dumps(LITHIUM_COLD))
    ascii_data["conditions"]["battery_temperature"] = "-5 degC"
    plain = runner.invoke(app, ["plan", _write(tmp_path / "b.json", ascii_data)])
    assert plain.exit_code == 1, plain.output
    assert typographic.exit_code == plain.exit_code
    assert typographic.stderr == plain.stderr


@pytest.mark.parametrize("dash", ["\u2010", "\u2013", "\u2014", "\uff0d", "\ufe63"])
def test_a_dash_in_a_battery_file_is_refused(tmp_path, dash):
    data = json.loads(json.dumps(LITHIUM_COLD))
    data["conditions"]["battery_temperature"] = f"{dash}5 degC"
    path = _write(tmp_path / "battery.json", data)
    result = runner.invoke(app, ["plan", path])
    assert result.exit_code == 2
    assert result.stderr.startswith(f"error: {path}: conditions.battery_temperature: ")
    assert "write -5 degC" in result.stderr and len(result.stderr.splitlines()) == 1


BENCH = """room: {volume: 30 m3, airflow: 40 m3/h, opening_area: 300 cm2}
hours: {start: "08:00", end: "17:00"}
channels:
  - {name: A, max_voltage: 16 V, max_current: 10 A, min_current: 0.2 A,
     temperature_probe: true, can_disable_high_voltage_stages: true, lithium_mode: true}
"""
BENCH_CSV = ("id,chemistry,nominal_voltage,capacity,state_of_charge,temperature\n"
             "drone-2,lifepo4,12 V,20 Ah,40 %,{t}\nmower-3,flooded,12 V,24 Ah,50 %,15 degC\n")


def test_a_bench_csv_reads_the_minus_sign_and_refuses_other_dashes(tmp_path):
    bench = tmp_path / "bench.yaml"
    bench.write_text(BENCH)
    outputs = {}
    for name, temperature in [("ascii", "-5 degC"), ("minus", "\u22125 degC")]:
        csv = tmp_path / f"{name}.csv"
        csv.write_text(BENCH_CSV.format(t=temperature), encoding="utf-8")
        result = runner.invoke(app, ["bench", str(bench), "--batteries", str(csv)])
        assert result.exit_code == 0, result.output
        outputs[name] = result.stdout
    assert outputs["minus"] == outputs["ascii"]
    assert "drone-2" in outputs["ascii"]
    bad = tmp_path / "dash.csv"
    bad.write_text(BENCH_CSV.format(t="\u20105 degC"), encoding="utf-8")
    result = runner.invoke(app, ["bench", str(bench), "--batteries", str(bad)])
    assert result.exit_code == 2, result.output
    assert str(bad) in result.stderr and "write -5 degC" in result.stderr


SITE = """site: {{name: Lakeside shed, start: 2026-11-01, end: 2026-12-31, round_interval: 14 d,
        policy: top-up}}
monthly:
  - {{month: 11, mean: {mean}, min: {low}}}
  - {{month: 12, mean: {mean}, min: {low}}}
bays:
  - {{name: shed, mains: true}}
"""
INVENTORY = ("id,owner,chemistry,nominal_voltage,capacity,rest_voltage,bay\n"
             "LS-007,berth 7,lifepo4,12 V,100 Ah,{v},shed\n"
             "LS-005,jet ski 3,agm,12 V,18 Ah,12.5 V,shed\n")


def test_a_storage_site_reads_the_minus_sign(tmp_path):
    # a lithium battery is never charged in a bay below 0 degC: the typographic minus must
    # plan exactly as the ASCII one does
    outputs = {}
    inventory = tmp_path / "inventory.csv"
    inventory.write_text(INVENTORY.format(v="13.1 V"), encoding="utf-8")
    for name, minus in [("ascii", "-"), ("minus", "\u2212")]:
        site = tmp_path / f"{name}.yaml"
        site.write_text(SITE.format(mean=f"{minus}2 degC", low=f"{minus}12 degC"),
                        encoding="utf-8")
        result = runner.invoke(app, ["storage", str(site), "--inventory", str(inventory)])
        assert result.exit_code == 0, result.output
        outputs[name] = result.stdout
    assert outputs["minus"] == outputs["ascii"]


@pytest.mark.parametrize(("cell", "fragment"), [
    ("\u201013.1 V", "write -13.1 V"), ("13,1 V", "write 13.1, not 13,1"),
    ("1\u200b3.1 V", "invisible character"), ("\uff11\uff13.1 V", "not one of the digits"),
])
def test_a_storage_inventory_csv_refuses_them(tmp_path, cell, fragment):
    site = tmp_path / "site.yaml"
    site.write_text(SITE.format(mean="2 degC", low="-6 degC"), encoding="utf-8")
    inventory = tmp_path / "inventory.csv"
    value = f'"{cell}"' if "," in cell else cell
    inventory.write_text(INVENTORY.format(v=value), encoding="utf-8")
    result = runner.invoke(app, ["storage", str(site), "--inventory", str(inventory)])
    assert result.exit_code == 2, result.output
    assert str(inventory) in result.stderr and fragment in result.stderr
    assert len(result.stderr.splitlines()) == 1


@pytest.mark.parametrize("args", [
    ["--beta", "3_950"], ["--beta", "nan"], ["--beta", "inf"], ["--beta", "3,950"],
    ["--adc-bits", "1,5"], ["--adc-bits", "12.5"], ["--adc-bits", "1_2"],
    ["--a", "nan", "--b", "2.378e-4", "--c", "2.019e-7"],
])
def test_thermistor_options_are_read_strictly(args):
    base = {"--r25": "10kohm", "--beta": "3950", "--bias": "10kohm"}
    given = dict(zip(args[::2], args[1::2], strict=True))
    options = [item for key, value in {**base, **given}.items() for item in (key, value)]
    result = runner.invoke(app, ["thermistor", *options])
    assert result.exit_code == 2, result.output
    assert result.stderr.startswith(f"error: {args[0]}: "), result.stderr
    assert len(result.stderr.splitlines()) == 1


@pytest.mark.parametrize(("command", "option"), [
    (["ventilation", "--capacity", "100Ah", "--cells"], "--cells"),
    (["ventilation", "--cells", "6", "--capacity", "100Ah", "--batteries"], "--batteries"),
    (["state", "--chemistry", "flooded", "--specific-gravity"], "--specific-gravity"),
    (["state", "--chemistry", "flooded", "--rest-voltage", "12.2 V", "--cells"], "--cells"),
])
@pytest.mark.parametrize("value", ["nan", "6_0", "1,2", "\u0666"])
def test_every_numeric_option_is_read_strictly(command, option, value):
    result = runner.invoke(app, [*command, value])
    assert result.exit_code == 2, result.output
    assert result.stderr.startswith(f"error: {option}: "), result.stderr


# -- a unit written once: pint multiplies whatever it finds --------------------------------


def test_pint_would_scale_a_glued_percent():
    # the reason for the check: pint's own reading of 'mA%' (milliampere x percent)
    from chargeplan.units import Q_

    assert Q_(15, "mA%").to("A").magnitude == pytest.approx(15e-5)
    assert Q_(85, "%%").to("").magnitude == pytest.approx(85e-4)


@pytest.mark.parametrize(("text", "kind", "fragment"), [
    ("15 mA%", "current", "has '%' next to another unit ('mA%')"),
    ("2 A%", "current", "has '%' next to another unit"),
    ("12.6V%", "voltage", "has '%' next to another unit"),
    ("-3 mV/K/cell%", "coefficient", "has '%' next to another unit ('cell%')"),
    ("85 %%", "fraction", "writes '%' twice"),
    ("85 %*%", "fraction", "names the unit percent twice"),
    ("12 V/mV*V", "voltage", "names the unit volt twice ('V' and 'mV')"),
    ("12 V*V/V", "voltage", "names the unit volt twice"),
    ("2.4 V/cell/cell*cell", "cell_voltage", "names the unit cell twice"),
    ("4 %/month/month*month", "rate", "names the unit month twice"),
])
def test_a_unit_glued_to_percent_or_written_twice_is_refused(text, kind, fragment):
    with pytest.raises(QuantityError) as caught:
        parse_quantity(text, kind)
    assert fragment in str(caught.value), str(caught.value)
    assert "write one unit, each name once" in str(caught.value)


@settings(max_examples=500, deadline=None)
@given(clean_quantities(), st.sampled_from(["%", "%%", "*{u}/{u}", "/{u}*{u}", "*%/%"]))
def test_a_unit_repeated_or_glued_is_never_read(case, tail):
    clean, kind = case
    unit = clean.rsplit(" ", 1)[-1].lstrip("-+.0123456789eE")
    last = unit.split("/")[-1]
    with pytest.raises(QuantityError):
        parse_quantity(clean + tail.format(u=last), kind)


@pytest.mark.parametrize(("text", "kind", "expected"), [
    ("4 %/month", "rate", 4 * 12 / 365.25),   # a month is a twelfth of 365.25 d (pint)
    ("60 %", "fraction", 60.0),
    ("1 mA/Ah", "current_per_capacity", 1.0),
    ("0.08 ohm*Ah", "resistance_capacity", 0.08),
    ("2 A*h", "capacity", 2.0),
])
def test_units_each_named_once_still_read(text, kind, expected):
    assert parse_quantity(text, kind) == pytest.approx(expected)


@pytest.mark.parametrize("text", ["5.0.0 V", "12.6.0 V", "1.500.000 V"])
def test_repeated_points_suggest_no_value(text):
    # '5.0.0' is a typo or points grouping digits: no one value is meant (common practice)
    with pytest.raises(QuantityError) as caught:
        parse_quantity(text, "voltage")
    message = str(caught.value)
    assert "more than one decimal point" in message
    assert "500" not in message.split("; ", 1)[1] and "1260" not in message


def test_a_degree_kelvin_is_named_as_typed():
    # SI Brochure 2.3.1 (from memory): the kelvin has no degree sign since 1967
    with pytest.raises(QuantityError) as caught:
        parse_quantity("-5 \u00b0K", "temperature")
    assert "'\u00b0K'" in str(caught.value) and "degreeK" not in str(caught.value)
    assert "write K" in str(caught.value)


def test_a_load_with_a_decimal_comma_keeps_the_hint(tmp_path):
    battery = tmp_path / "battery.yaml"
    battery.write_text("battery: {name: Trail bike, chemistry: agm, nominal_voltage: 12 V, "
                       "capacity: 12 Ah}\nstate: {state_of_charge: 60 %}\n"
                       "conditions: {battery_temperature: 20 degC}\n")
    result = runner.invoke(app, ["runtime", str(battery), "--load", "5,5 A"])
    assert result.exit_code == 2
    assert result.stderr.startswith("error: --load: '5,5 A' has a decimal comma; write 5.5")
    result = runner.invoke(app, ["runtime", str(battery), "--load", "5 A%"])
    assert result.exit_code == 2 and "next to another unit" in result.stderr


@pytest.mark.parametrize(("text", "fragment"), [
    # YAML 1.2.2 10.3.2 (from memory) writes integers in these bases; the reader takes
    # decimal digits only and names the decimal value
    ("0x6", "base 16, not in decimal digits; write it in the digits 0-9, e.g. 6"),
    ("-0x1F", "e.g. -31"), ("0o17", "base 8"), ("0b110", "base 2"),
])
def test_a_whole_number_in_another_base_is_refused(text, fragment):
    with pytest.raises(QuantityError) as caught:
        parse_number(text, integer=True)
    assert fragment in str(caught.value)


@pytest.mark.parametrize(("text", "kind", "typed", "made"), [
    ("-5 \u00b0K", "temperature", "'\u00b0K'", "degreeK"),
    ("12 V\u00b0", "voltage", "'V\u00b0'", "Vdegree"),
    ("5 \u00b5X", "current", "'5 \u00b5X'", "uX"),   # µ is read as the prefix u
])
def test_an_unknown_unit_is_never_named_as_rewritten(text, kind, typed, made):
    with pytest.raises(QuantityError) as caught:
        parse_quantity(text, kind)
    assert typed in str(caught.value) and made not in str(caught.value), str(caught.value)
