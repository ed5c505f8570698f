"""Text a user types that is not a quantity: times of day, date-times, dates, ids and names,
and whole numbers in YAML and CSV. Each is read in one form, or refused; never as another
value.
"""

from __future__ import annotations

import datetime as dt
import sys
import unicodedata

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from typer.testing import CliRunner

from chargeplan.cli import app
from chargeplan.clock import parse_date, parse_datetime, parse_time
from chargeplan.loading import _parse_yaml
from chargeplan.units import QuantityError, parse_number

runner = CliRunner()

# -- times of day ----------------------------------------------------------------------


@settings(max_examples=300, deadline=None)
@given(st.integers(0, 23), st.integers(0, 59), st.one_of(st.none(), st.integers(0, 59)))
def test_a_time_in_the_extended_format_reads_as_written(hour, minute, second):
    # ISO 8601-1:2019 5.3.1.2 (from memory): the extended format is hh:mm and hh:mm:ss,
    # two digits each; the value is the one Python's datetime.time holds for those fields
    text = f"{hour:02d}:{minute:02d}" + ("" if second is None else f":{second:02d}")
    assert parse_time(text) == dt.time(hour, minute, second or 0)


@settings(max_examples=300, deadline=None)
@given(st.integers(0, 23), st.integers(0, 59), st.sampled_from([".", ",", "h", "H"]),
       st.sampled_from(["{h:02d}", "{h}"]))
def test_hours_and_minutes_joined_by_anything_but_a_colon_are_refused(hour, minute, mark,
                                                                      form):
    # "07.30" is the usual way to write half past seven in several countries (common
    # practice); Python's time.fromisoformat reads it as 07:00:00.3 (a fraction of a second)
    text = form.format(h=hour) + f"{mark}{minute:02d}"
    with pytest.raises(QuantityError) as caught:
        parse_time(text)
    assert f"write it with a colon: {hour:02d}:{minute:02d}" in str(caught.value)


def test_python_reads_the_point_as_a_fraction_of_a_second():
    # the reason for the reader: the standard library's own reading of "07.30"
    assert dt.time.fromisoformat("07.30") == dt.time(7, 0, 0, 300_000)


@pytest.mark.parametrize(("text", "fragment"), [
    ("07:30:00.5", "has a fraction of a second"),   # ISO 8601 allows it; the bench does not
    ("07:30:00,5", "has a fraction of a second"),
    ("07:30Z", "has a UTC offset"),
    ("07:30+01:00", "has a UTC offset"),
    ("0730", "is not a time of day"),               # ISO 8601 basic format
    ("07", "is not a time of day"),                 # ISO 8601 reduced precision
    ("7:30", "write the hour with two digits: 07:30"),
    ("24:00", "write midnight as 00:00"),
    ("23:60", "minutes and seconds 00-59"),
    ("T07:30", "is not a time of day"),
    ("\uff10\uff17:30", "U+FF10 FULLWIDTH DIGIT ZERO"),
    ("07:3\u200b0", "U+200B ZERO WIDTH SPACE"),
    ("", "empty"),
])
def test_other_forms_of_a_time_are_refused(text, fragment):
    with pytest.raises(QuantityError) as caught:
        parse_time(text)
    assert fragment in str(caught.value) and "; " in str(caught.value)


@pytest.mark.parametrize(("text", "fragment"), [
    ("2026-12-04T13.30", "write it with a colon: 2026-12-04T13:30"),
    ("2026-12-04", "is a date without a time"),
    ("20261204T1330", "is not a date-time"),        # ISO 8601 basic format
    ("2026-W49-5T13:30", "is not a date-time"),     # ISO 8601 week date
    ("2026-12-04T13", "is not a time of day"),
    ("2026-12-04T13:30:00.5", "has a fraction of a second"),
    ("2026-12-04T13:30+01:00", "has a UTC offset"),
    ("2026-02-30T10:00", "is not a date"),
])
def test_other_forms_of_a_date_time_are_refused(text, fragment):
    with pytest.raises(QuantityError) as caught:
        parse_datetime(text)
    assert fragment in str(caught.value)


def test_a_date_time_reads_with_a_t_or_a_space():
    # ISO 8601-1:2019 5.4.2 (from memory) joins date and time with T; RFC 3339 5.6 allows a
    # space instead
    assert parse_datetime("2026-12-04T13:30") == dt.datetime(2026, 12, 4, 13, 30)
    assert parse_datetime("2026-12-04 13:30:15") == dt.datetime(2026, 12, 4, 13, 30, 15)


@pytest.mark.parametrize("text", ["20261207", "1767225600", "2026-12-7", "2026-W50-1",
                                  "10000-01-01", "2026-02-30"])
def test_a_date_is_yyyy_mm_dd_only(text):
    # pydantic reads '1767225600' as a count of seconds since 1970 (2026-01-01), and
    # date.fromisoformat reads '20261207' and '2026-W50-1' (ISO 8601 basic and week forms)
    with pytest.raises(QuantityError):
        parse_date(text)
    assert parse_date("2026-12-07") == dt.date(2026, 12, 7)


BENCH = """room: {{volume: 30 m3, airflow: 40 m3/h, opening_area: 300 cm2}}
date: 2026-12-07
hours: {{start: "{start}", end: "17:00"}}
channels:
  - {{name: A, max_voltage: 16 V, max_current: 10 A, min_current: 0.2 A,
     temperature_probe: true, can_disable_high_voltage_stages: true, lithium_mode: true}}
batteries:
  - {{id: bike-118, chemistry: agm, nominal_voltage: 12 V, capacity: 12 Ah,
     state_of_charge: 40 %, temperature: 18 degC, due: "{due}"}}
"""


def test_a_bench_starts_at_half_past_seven_only_when_written_07_30(tmp_path):
    good = tmp_path / "good.yaml"
    good.write_text(BENCH.format(start="07:30", due="12:00"))
    result = runner.invoke(app, ["bench", str(good)])
    assert result.exit_code == 0, result.output
    assert "07:30" in result.stdout and "07:00" not in result.stdout
    for start, due, field in [("07.30", "12:00", "hours.start"),
                              ("07:30", "11.45", "batteries[0].due")]:
        bad = tmp_path / "bad.yaml"
        bad.write_text(BENCH.format(start=start, due=due))
        out = tmp_path / "out"
        result = runner.invoke(app, ["bench", str(bad), "-o", str(out)])
        assert result.exit_code == 2, result.output
        assert result.stderr.startswith(f"error: {bad}: {field}: ")
        assert "write it with a colon" in result.stderr
        assert len(result.stderr.splitlines()) == 1 and not out.exists()


def test_now_and_progress_times_are_read_strictly(tmp_path):
    bench = tmp_path / "bench.yaml"
    bench.write_text(BENCH.format(start="08:00", due="12:00"))
    result = runner.invoke(app, ["bench", str(bench), "--now", "2026-12-07T13.30"])
    assert result.exit_code == 2, result.output
    assert result.stderr.startswith("error: --now: '2026-12-07T13.30' is not a time of day")
    assert "2026-12-07T13:30" in result.stderr and len(result.stderr.splitlines()) == 1
    progress = tmp_path / "progress.csv"
    for started in ["2026-12-07T08.30", "2026-12-07T08:30:00.5", "1765096200"]:
        progress.write_text(f"battery,channel,started,finished\nbike-118,A,{started},\n")
        result = runner.invoke(app, ["bench", str(bench), "--now", "2026-12-07T10:00",
                                     "--progress", str(progress)])
        assert result.exit_code == 2, result.output
        assert f"{progress}: line 2: started: '{started}'" in result.stderr, result.stderr
    progress.write_text("battery,channel,started,finished\nbike-118,A,2026-12-07T08:30,\n")
    result = runner.invoke(app, ["bench", str(bench), "--now", "2026-12-07T10:00",
                                 "--progress", str(progress)])
    assert result.exit_code == 0, result.output


# -- text fields -----------------------------------------------------------------------

#: Every format character (general category Cf) in the Unicode Character Database of this
#: Python (unicodedata.category): the zero-width characters and the bidirectional controls.
FORMAT_CHARACTERS = [chr(c) for c in range(sys.maxunicode + 1)
                     if unicodedata.category(chr(c)) == "Cf"]
# Unicode Standard Annex #9, 2 (from memory): the explicit directional embeddings,
# overrides and isolates, and the implicit marks
BIDI_CONTROLS = "\u061c\u200e\u200f\u202a\u202b\u202c\u202d\u202e\u2066\u2067\u2068\u2069"


def test_the_bidi_controls_are_format_characters():
    assert set(BIDI_CONTROLS) <= set(FORMAT_CHARACTERS)
    assert "\u200b" in FORMAT_CHARACTERS and "\ufeff" in FORMAT_CHARACTERS


ROW = {"chemistry": "agm", "nominal_voltage": "12 V", "capacity": "60 Ah",
       "state_of_charge": "80 %", "bay": "shed", "owner": "day boat", "notes": "berth 4"}


@settings(max_examples=400, deadline=None)
@given(st.sampled_from(FORMAT_CHARACTERS), st.sampled_from(["id", "bay", "owner", "notes"]),
       st.integers(0, 7))
def test_no_text_field_holds_an_invisible_character(ch, field, at):
    from pydantic import ValidationError

    from chargeplan.model.storage import InventoryRow

    row = {**ROW, "id": "LS-0042"}
    text = row[field]
    row[field] = text[:at] + ch + text[at:] if at < len(text) - 1 else text + "x" + ch + "y"
    with pytest.raises(ValidationError) as caught:
        InventoryRow.model_validate(row)
    message = str(caught.value)
    assert f"U+{ord(ch):04X}" in message and "retype it without it" in message
    assert ch not in message  # shown as <U+XXXX>: it cannot reorder or hide in the message


@pytest.mark.parametrize(("text", "fragment"), [
    ("m\u043ewer-3", "U+043E CYRILLIC SMALL LETTER O"),     # looks like 'o'
    ("\u041c-1", None),                                        # all Cyrillic, with digits: fine
    ("\uff2d-1", "U+FF2D FULLWIDTH LATIN CAPITAL LETTER M"),  # NFKC folds it into 'M'
    ("K\u20131", "U+2013 EN DASH, which looks like '-'"),
    ("K-\u0661", "U+0661 ARABIC-INDIC DIGIT ONE"),
    ("K\u00a01", "U+00A0 NO-BREAK SPACE"),                    # NFKC folds it into ' '
    ("K-\u212a", "U+212A KELVIN SIGN"),                       # NFKC folds it into 'K'
])
def test_an_id_refuses_lookalikes_a_name_keeps_them(text, fragment):
    # lookalikes: Unicode TR39 (confusables, mixed scripts, from memory) and NFKC
    # compatibility folding (unicodedata.normalize)
    from pydantic import ValidationError

    from chargeplan.model.storage import InventoryRow

    named = InventoryRow.model_validate({**ROW, "id": "K-1", "owner": text})
    assert named.owner == text
    if fragment is None:
        assert InventoryRow.model_validate({**ROW, "id": text}).id == text
        return
    with pytest.raises(ValidationError) as caught:
        InventoryRow.model_validate({**ROW, "id": text})
    assert fragment in str(caught.value)


def test_two_batteries_that_look_the_same_are_refused(tmp_path):
    bench = tmp_path / "bench.yaml"
    for twin in ["mower-3\\u200b", "\\u202e3-rewom", "m\\u043ewer-3"]:
        bench.write_text(BENCH.format(start="08:00", due="12:00") +
                         f'  - {{id: "{twin}", chemistry: lifepo4, nominal_voltage: 12 V, '
                         'capacity: 100 Ah, state_of_charge: 20 %, temperature: 18 degC}\n')
        out = tmp_path / "out"
        result = runner.invoke(app, ["bench", str(bench), "-o", str(out)])
        assert result.exit_code == 2, result.output
        assert result.stderr.startswith(f"error: {bench}: batteries[1].id: ")
        assert not out.exists()


# -- whole numbers from YAML and CSV ---------------------------------------------------


@pytest.mark.parametrize(("scalar", "value"), [
    ("12", 12), ("-3", -3), ("0", 0), ("1.5", 1.5), ("1e3", 1000.0),
    # YAML 1.2.2 10.3.2 (the core schema) resolves these as integers; ruamel.yaml also 1_2
    ("0x6", "0x6"), ("0o6", "0o6"), ("1_2", "1_2"), ("0b110", "0b110"),
    ("012", "012"), ("1_0.5", "1_0.5"),
])
def test_yaml_builds_a_number_only_from_decimal_digits(scalar, value):
    data = _parse_yaml(f"a: {scalar}\n", "x.yaml")
    assert data["a"] == value and type(data["a"]) is type(value)


def test_yaml_1_1_octal_and_sexagesimal_stay_text():
    # YAML 1.1 int type (yaml.org/type/int.html, from memory): 010 is octal 8 and 1:30 is
    # base 60, 90; read as text, the strict reader reads 010 as ten and refuses 1:30
    data = _parse_yaml("%YAML 1.1\n---\na: 010\nb: 1:30\nc: 12\n", "x.yaml")
    assert data == {"a": "010", "b": "1:30", "c": 12}
    assert parse_number(data["a"], integer=True) == 10
    with pytest.raises(QuantityError):
        parse_number(data["b"], integer=True)


@pytest.mark.parametrize(("text", "fragment"), [
    ("0x6", "base 16"), ("0o6", "base 8"), ("0b110", "base 2"), ("1_2", "write 12"),
    ("\uff11\uff12", "U+FF11 FULLWIDTH DIGIT ONE"), ("\u0664", "U+0664 ARABIC-INDIC DIGIT FOUR"),
    ("6.0", "is not a whole number"),
])
def test_cells_in_series_is_read_strictly_in_every_file(tmp_path, text, fragment):
    battery = tmp_path / "battery.yaml"
    scalar = text if text.isascii() else f'"{text}"'
    battery.write_text("battery: {name: Corpus, chemistry: agm, capacity: 12 Ah, "
                       f"cells_in_series: {scalar}}}\n", encoding="utf-8")
    result = runner.invoke(app, ["plan", str(battery)])
    assert result.exit_code == 2, result.output
    assert result.stderr.startswith(f"error: {battery}: battery.cells_in_series: ")
    assert fragment in result.stderr
    site = tmp_path / "site.yaml"
    site.write_text("site: {name: Shed, start: 2026-11-01, end: 2026-12-31}\n"
                    "monthly:\n  - {month: 11, mean: 4 degC, min: -5 degC}\n"
                    "  - {month: 12, mean: 0 degC, min: -12 degC}\n"
                    "bays:\n  - {name: shed, mains: true}\n")
    inventory = tmp_path / "inventory.csv"
    inventory.write_text("id,chemistry,cells_in_series,capacity,state_of_charge,bay\n"
                         f"K-1,agm,{text},60 Ah,80 %,shed\n", encoding="utf-8")
    result = runner.invoke(app, ["storage", str(site), "--inventory", str(inventory)])
    assert result.exit_code == 2, result.output
    assert f"{inventory}: line 2: cells_in_series: " in result.stderr
    assert fragment in result.stderr


def test_a_profile_number_is_read_strictly(tmp_path):
    # a profile's plain numbers (Peukert exponent) from YAML: 1_2 is no longer 12
    from pydantic import ValidationError

    from chargeplan.model.profile import Exponent

    assert Exponent.model_validate({"value": 1.25, "source": "from memory"}).value == 1.25
    with pytest.raises(ValidationError):
        Exponent.model_validate({"value": "1_2", "source": "from memory"})
