"""Files for firmware: the image (CRC-32), the C header (compiled), and the checker."""

from __future__ import annotations

import copy
import json
import shutil
import subprocess

import pytest
from typer.testing import CliRunner

from chargeplan.api import program_file
from chargeplan.cli import app
from chargeplan.demo import example_paths
from chargeplan.firmware import image
from chargeplan.firmware.c_header import c_comment, render_c_header
from chargeplan.firmware.check import check_document
from chargeplan.firmware.setpoints import compute_digest, encode

from .conftest import battery

runner = CliRunner()


def _crc32_bitwise(data: bytes) -> int:
    """CRC-32/ISO-HDLC written out bit by bit (reflected 0x04C11DB7, init/xorout 0xFFFFFFFF),
    independent of zlib."""
    crc = 0xFFFFFFFF
    for byte in data:
        crc ^= byte
        for _ in range(8):
            crc = (crc >> 1) ^ (0xEDB88320 if crc & 1 else 0)
    return crc ^ 0xFFFFFFFF


def _docs():
    return [(path.name, *(lambda p: (p, encode(p)))(program_file(path)))
            for path in example_paths()]


def test_crc32_check_value():
    # the CRC catalogue's published check value of CRC-32/ISO-HDLC for ASCII "123456789"
    assert _crc32_bitwise(b"123456789") == 0xCBF43926
    import zlib

    assert zlib.crc32(b"123456789") == 0xCBF43926


@pytest.mark.parametrize(("name", "plan", "doc"), _docs(), ids=[p.name for p in example_paths()])
def test_image_round_trip_and_crc(name, plan, doc):
    data = image.encode(doc)
    assert data[:4] == b"CPSI"
    assert int.from_bytes(data[-4:], "little") == _crc32_bitwise(data[:-4])
    back = image.decode(data)
    for key in ("cells_in_series", "planned_temperature_dC", "finish", "interlocks",
                "temperature_compensation", "temperature_table", "digest"):
        assert back[key] == doc[key], key
    for mine, theirs in zip(back["stages"], doc["stages"], strict=True):
        assert mine == {k: theirs[k] for k in mine}


def test_every_single_bit_flip_is_detected():
    doc = encode(program_file(example_paths()[4]))
    data = image.encode(doc)
    for bit in range(len(data) * 8):
        flipped = bytearray(data)
        flipped[bit // 8] ^= 1 << (bit % 8)
        with pytest.raises(image.ImageError):
            image.decode(bytes(flipped))


def test_truncated_and_foreign_images_are_refused():
    data = image.encode(encode(program_file(example_paths()[0])))
    for cut in (0, 3, 12, 40, len(data) - 1):
        with pytest.raises(image.ImageError):
            image.decode(data[:cut])
    with pytest.raises(image.ImageError, match="magic"):
        image.decode(b"XXXX" + data[4:])


@pytest.mark.skipif(shutil.which("cc") is None, reason="no C compiler (cc) on this machine")
def test_c_header_compiles_and_carries_the_json_numbers(tmp_path):
    plan = program_file(example_paths()[0])
    doc = encode(plan)
    (tmp_path / "setpoints.h").write_text(render_c_header(plan, doc))
    (tmp_path / "main.c").write_text(r'''
#include <stdio.h>
#include "setpoints.h"
int main(void) {
    unsigned i;
    printf("%u %u %d %d %u %u\n", CP_FORMAT_VERSION, CP_CELLS_IN_SERIES,
           CP_CHARGE_TEMPERATURE_MIN_DC, CP_CHARGE_TEMPERATURE_MAX_DC,
           CP_BATTERY_VOLTAGE_MAX_MV, CP_CURRENT_MAX_MA);
    for (i = 0; i < CP_STAGE_COUNT; i++)
        printf("%u %u %u %u\n", CP_STAGES[i].kind, CP_STAGES[i].voltage_mV,
               CP_STAGES[i].current_mA, CP_STAGES[i].timer_s);
    for (i = 0; i < CP_TABLE_ROWS; i++)
        printf("%d %u %u\n", CP_TEMPERATURE_TABLE[i].temperature_dC,
               CP_TEMPERATURE_TABLE[i].charge_voltage_mV, CP_TEMPERATURE_TABLE[i].current_max_mA);
    printf("%s\n", CP_DIGEST);
    return 0;
}
''')
    subprocess.run(["cc", "-std=c99", "-Wall", "-Wextra", "-pedantic", "-Werror", "-o",
                    str(tmp_path / "main"), str(tmp_path / "main.c")], check=True)
    out = subprocess.run([str(tmp_path / "main")], check=True, capture_output=True,
                         text=True).stdout.splitlines()
    lock = doc["interlocks"]
    assert out[0].split() == [str(v) for v in (
        doc["version"], doc["cells_in_series"], lock["charge_temperature_min_dC"],
        lock["charge_temperature_max_dC"], lock["battery_voltage_max_mV"],
        lock["current_max_mA"])]
    for line, stage in zip(out[1:], doc["stages"], strict=False):
        kind, volts, amps, timer = (int(v) for v in line.split())
        assert kind == image.KIND_CODES[stage["kind"]]
        assert (volts, amps) == (stage["voltage_mV"], stage["current_mA"])
        assert timer == (0xFFFFFFFF if stage["timer_s"] is None else stage["timer_s"])
    rows = out[1 + len(doc["stages"]):-1]
    assert [[int(v) for v in r.split()] for r in rows] == [
        [r["temperature_dC"], r["charge_voltage_mV"], r["current_max_mA"]]
        for r in doc["temperature_table"]["rows"]]
    assert out[-1] == doc["digest"]


@pytest.mark.skipif(shutil.which("cc") is None, reason="no C compiler (cc) on this machine")
def test_hostile_battery_name_cannot_break_the_header(tmp_path, write_yaml):
    name = "*/ #include <stdlib.h> /* x */ int evil; /*"
    path = write_yaml(battery(battery={"name": name}))
    plan = program_file(path)
    header = render_c_header(plan, encode(plan))
    assert "*/ #include" not in header
    (tmp_path / "setpoints.h").write_text(header)
    (tmp_path / "main.c").write_text('#include "setpoints.h"\nint main(void){return 0;}\n')
    subprocess.run(["cc", "-std=c99", "-Wall", "-Werror", "-fsyntax-only",
                    str(tmp_path / "main.c")], check=True)
    assert c_comment("a */ b /* c") == "a * / b / * c"


def _good():
    return encode(program_file(example_paths()[0]))


@pytest.mark.parametrize(
    ("change", "fragment"),
    [
        (lambda d: d["stages"][1].__setitem__("voltage_mV", 17000), "above the flooded limit"),
        (lambda d: d["stages"][1].__setitem__("voltage_mV", 2450), "per-cell value"),
        (lambda d: d["stages"][0].__setitem__("current_mA", 99999), "above the flooded limit"),
        (lambda d: d["interlocks"].__setitem__("charge_temperature_min_dC", 600),
         "not below the maximum"),
        (lambda d: d["stages"][-1].__setitem__("voltage_mV", 16000), "at or above"),
        (lambda d: d["stages"][1].__setitem__("timer_s", 10), "shorter than"),
        (lambda d: d["stages"].insert(0, {**d["stages"][1], "kind": "precharge",
                                          "current_mA": 9000}), "pre-charge current"),
    ],
)
def test_checker_refuses_unsafe_or_disordered_documents(change, fragment):
    doc = copy.deepcopy(_good())
    assert check_document(doc) == []
    change(doc)
    assert any(fragment in v for v in check_document(doc)), check_document(doc)


def test_checker_lithium_rules():
    # BU-410 Table 1: no lithium charging below 0 degC; never equalization for lithium
    doc = encode(program_file(example_paths()[3]))
    assert check_document(doc) == []
    cold = copy.deepcopy(doc)
    cold["interlocks"]["charge_temperature_min_dC"] = -50
    assert any("below 0 degC" in v for v in check_document(cold))
    eq = copy.deepcopy(doc)
    eq["stages"].append({**doc["stages"][-1], "kind": "equalization"})
    assert any("forbidden" in v for v in check_document(eq))


def test_check_command_exit_codes(tmp_path):
    path = example_paths()[0]
    good = tmp_path / "good.json"
    assert runner.invoke(app, ["plan", str(path), "-f", "json", "-o", str(good)]).exit_code == 0
    assert runner.invoke(app, ["check", str(good)]).exit_code == 0
    edited = json.loads(good.read_text())
    edited["stages"][1]["voltage_mV"] += 1
    bad = tmp_path / "bad.json"
    bad.write_text(json.dumps(edited))
    result = runner.invoke(app, ["check", str(bad)])
    assert result.exit_code == 1 and "digest does not match" in result.stderr
    fixed = dict(edited, digest=compute_digest(edited))
    bad.write_text(json.dumps(fixed))
    assert runner.invoke(app, ["check", str(bad)]).exit_code == 0  # a re-signed edit in range
    img = tmp_path / "good.bin"
    assert runner.invoke(app, ["plan", str(path), "-f", "image", "-o", str(img)]).exit_code == 0
    assert runner.invoke(app, ["check", str(img)]).exit_code == 0
    raw = bytearray(img.read_bytes())
    raw[30] ^= 0x10
    img.write_bytes(bytes(raw))
    result = runner.invoke(app, ["check", str(img)])
    assert result.exit_code == 1 and "CRC-32" in result.stderr
    img.write_bytes(bytes(raw[:50]))
    assert runner.invoke(app, ["check", str(img)]).exit_code == 2
    other = tmp_path / "other.json"
    other.write_text('{"hello": 1}')
    result = runner.invoke(app, ["check", str(other)])
    assert result.exit_code == 2 and "not a chargeplan setpoint document" in result.stderr


def test_check_against_the_channel(tmp_path):
    path = example_paths()[0]
    doc = tmp_path / "d.json"
    runner.invoke(app, ["plan", str(path), "-f", "json", "-o", str(doc)])
    channel = tmp_path / "channel.yaml"
    channel.write_text("max_voltage: 14 V\nmax_current: 2 A\n")
    result = runner.invoke(app, ["check", str(doc), "--charger", str(channel)])
    assert result.exit_code == 1 and "channel's 14.0 V" in result.stderr


def test_image_needs_an_output_file():
    result = runner.invoke(app, ["plan", str(example_paths()[0]), "-f", "image"])
    assert result.exit_code == 2 and "-o" in result.stderr


def _quantised(voltage_step, current_step, **channel):
    data = battery(battery={"capacity": "12 Ah"}, state={"rest_voltage": "12.31 V"},
                   conditions={"battery_temperature": "7 degC"},
                   charger={"max_voltage": "16 V", "max_current": "4 A", "min_current": "0.1 A",
                            "voltage_step": voltage_step, "current_step": current_step,
                            "can_disable_high_voltage_stages": True, **channel})
    from .conftest import plan_of

    return plan_of(data)


def test_quantisation_rounds_toward_safety_onto_the_steps():
    # common practice: limits round down, a tail current up (the stage ends earlier)
    plan = _quantised("50 mV", "0.1 A")
    assert plan.quantisation
    for q in plan.quantisation:
        if q.what.endswith("exit_current"):
            assert q.encoded >= q.requested
        else:
            assert q.encoded <= q.requested
    for stage in plan.stages:
        assert abs(stage.voltage_v / 0.05 - round(stage.voltage_v / 0.05)) < 1e-6
        assert abs(stage.current_a / 0.1 - round(stage.current_a / 0.1)) < 1e-6
    # BU-410 arithmetic: 2.43 x 6 + 0.018 x 18 = 14.904 V, on a 50 mV step 14.90 V
    assert plan.stage("absorption").voltage_v == pytest.approx(14.90)


def test_quantisation_that_leaves_the_range_is_refused():
    from chargeplan.errors import PlanRefused

    with pytest.raises(PlanRefused) as caught:
        _quantised("1 V", "0.1 A", min_voltage="13.9 V")  # float 13.944 V -> 13 V < 13.9 V
    assert caught.value.rule_id == "CP405"
    with pytest.raises(PlanRefused):
        _quantised("50 mV", "5 A")  # 2.4 A on a 5 A step is 0 A
    # absorption 13.65 V + 0.018 V/K x 18 K = 13.974 V and float 13.944 V (BU-410 arithmetic)
    # both land on 13.9 V on a 100 mV step: held at charge voltage for ever, so refused
    from .conftest import plan_of

    data = battery(battery={"capacity": "12 Ah", "overrides": {"absorption_voltage": "13.65 V"}},
                   state={"rest_voltage": "12.31 V"},
                   conditions={"battery_temperature": "7 degC"},
                   charger={"max_voltage": "16 V", "max_current": "4 A", "voltage_step": "100 mV",
                            "can_disable_high_voltage_stages": True})
    with pytest.raises(PlanRefused, match="no lower than the charge voltage") as caught:
        plan_of(data)
    assert caught.value.rule_id == "CP405"
    data["charger"]["voltage_step"] = "10 mV"
    assert plan_of(data).stage("float").voltage_v < plan_of(data).stage("absorption").voltage_v


def test_quantisation_report_on_the_command_line(write_yaml):
    path = write_yaml(battery(charger={"max_voltage": "16 V", "max_current": "4 A",
                                       "voltage_step": "50 mV", "current_step": "0.1 A",
                                       "can_disable_high_voltage_stages": True}))
    result = runner.invoke(app, ["plan", str(path), "-f", "json", "--quantisation-report"])
    assert result.exit_code == 0
    assert "absorption.voltage" in result.stderr and "requested" in result.stderr
    json.loads(result.stdout)
