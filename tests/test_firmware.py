"""Files for firmware: the image (CRC-32), the C header (compiled), and the checker."""

from __future__ import annotations

import copy
import json
import math
import re
import shutil
import struct
import subprocess

import pytest
from typer.testing import CliRunner

from chargeplan.api import program_file
from chargeplan.cli import app
from chargeplan.demo import example_paths
from chargeplan.firmware import image
from chargeplan.firmware.c_header import c_comment, render_c_header
from chargeplan.firmware.check import check_document
from chargeplan.firmware.faults import FAULT_CODES
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


def _compiler(name: str) -> str:
    """The compiler's path; missing, the test is skipped on a workstation and fails in CI
    (CI=true), where a skipped compiler test would hide a broken header."""
    import os

    found = shutil.which(name)
    if found is None:
        if os.environ.get("CI", "").lower() == "true":
            pytest.fail(f"{name} is not installed; .ci/run installs gcc, g++ and make")
        pytest.skip(f"no {name} on this machine")
    return found


def test_a_missing_compiler_fails_in_ci_and_skips_elsewhere(monkeypatch):
    monkeypatch.setattr(shutil, "which", lambda name: None)
    monkeypatch.setenv("CI", "true")
    with pytest.raises(pytest.fail.Exception):
        _compiler("gcc")
    monkeypatch.setenv("CI", "")
    with pytest.raises(pytest.skip.Exception):
        _compiler("gcc")


C_FLAGS = ["-std=c99", "-Wall", "-Wextra", "-Wpedantic", "-Werror"]
CXX_FLAGS = ["-std=c++17", "-Wall", "-Wextra", "-Wpedantic", "-Werror", "-x", "c++"]

_MAIN = r"""
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
    /* every symbol is defined whatever the document holds */
    printf("%u %d %u %u %d %u %u %d %u %d %d %d %d\n", CP_COOL_ZONE_PRESENT,
           (int)CP_COOL_ZONE_BELOW_DC, CP_COOL_ZONE_CURRENT_MAX_MA, CP_WARM_ZONE_PRESENT,
           (int)CP_WARM_ZONE_ABOVE_DC, CP_WARM_ZONE_CELL_VOLTAGE_MAX_MV,
           CP_COMPENSATION_PRESENT, (int)CP_COMPENSATION_UV_PER_K_PER_CELL, CP_CHEMISTRY,
           (int)CP_COMPENSATION_DELTA_MV(-200), (int)CP_COMPENSATION_DELTA_MV(0),
           (int)CP_COMPENSATION_DELTA_MV(333), (int)CP_COMPENSATION_DELTA_MV(600));
    printf("%s %s %u %u\n", CP_DIGEST, CP_CHEMISTRY_NAME, CP_FAULT_PROBE_OPEN,
           CP_VOLTAGE_TRIP_FILTER_MS);
    return 0;
}
"""


def _compile_and_run(tmp_path, header: str, compiler: str, flags: list[str]) -> list[str]:
    (tmp_path / "setpoints.h").write_text(header)
    (tmp_path / "main.c").write_text(_MAIN)
    exe = tmp_path / f"main-{compiler}"
    subprocess.run([_compiler(compiler), *flags, "-o", str(exe), str(tmp_path / "main.c")],
                   check=True, capture_output=True, text=True)
    return subprocess.run([str(exe)], check=True, capture_output=True,
                          text=True).stdout.splitlines()


def _delta_mv(comp, cells, planned_dc, t_dc) -> int:
    """The compensation in whole mV rounded down, from the document's definition, written here:
    coefficient (uV/K/cell) x cells x (clamp(T) - clamp(planned)) (K), in mV."""
    if comp is None:
        return 0
    low, high = comp["range_min_dC"], comp["range_max_dC"]
    clamp = lambda t: min(max(t, low), high)  # noqa: E731
    micro_volts_x10 = comp["coefficient_uV_per_K_per_cell"] * cells * (clamp(t_dc)
                                                                       - clamp(planned_dc))
    return math.floor(micro_volts_x10 / 10 / 1000)


@pytest.mark.parametrize("index", range(5))
@pytest.mark.parametrize(("compiler", "flags"), [("gcc", C_FLAGS), ("g++", CXX_FLAGS)])
def test_c_header_compiles_and_carries_the_json_numbers(tmp_path, index, compiler, flags):
    plan = program_file(example_paths()[index])
    doc = encode(plan)
    out = _compile_and_run(tmp_path, render_c_header(plan, doc), compiler, flags)
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
    n = 1 + len(doc["stages"])
    rows = out[n:-2]
    assert [[int(v) for v in r.split()] for r in rows] == [
        [r["temperature_dC"], r["charge_voltage_mV"], r["current_max_mA"]]
        for r in doc["temperature_table"]["rows"]]
    cool, warm, comp = lock["cool_zone"], lock["warm_zone"], doc["temperature_compensation"]
    symbols = [int(v) for v in out[-2].split()]
    assert symbols[:9] == [
        int(cool is not None), cool["below_dC"] if cool else -32768,
        cool["current_max_mA"] if cool else 0, int(warm is not None),
        warm["above_dC"] if warm else 32767, warm["cell_voltage_max_mV"] if warm else 0,
        int(comp is not None), comp["coefficient_uV_per_K_per_cell"] if comp else 0,
        image.CHEMISTRY_CODES[doc["battery"]["chemistry"]]]
    # the compensation macro in whole mV against the document's formula (flooded, planned at
    # 8 degC, -3 mV/K/cell x 6 cells: at -20 degC, inside BU-410's -20 to 50 degC window,
    # +28 K x 18 mV/K = 504 mV)
    assert symbols[9:] == [_delta_mv(comp, doc["cells_in_series"], doc["planned_temperature_dC"],
                                     t) for t in (-200, 0, 333, 600)]
    if index == FLOODED:
        assert symbols[9] == 504
    digest, chemistry, probe_open, trip_ms = out[-1].split()
    assert digest == doc["digest"] and chemistry == doc["battery"]["chemistry"]
    assert int(probe_open) == FAULT_CODES["probe_open"] and int(trip_ms) > 0


@pytest.mark.parametrize("name", [
    "*/ #include <stdlib.h> /* x */ int evil; /*",
    "Hut 4 pack ??/",  # ??/ is a trigraph for a backslash: it would splice the next line
    "what?? ??= ??( ??) ??' ??< ??! ??> ??- end",
    "back\\slash at the end \\",
    "Hütte äö ?ü?/",  # non-ASCII becomes '?', which must not form a trigraph
])
@pytest.mark.parametrize(("compiler", "flags"), [("gcc", [*C_FLAGS, "-Wtrigraphs"]),
                                                 ("g++", CXX_FLAGS)])
def test_hostile_battery_name_cannot_break_the_header(tmp_path, write_yaml, name, compiler,
                                                       flags):
    path = write_yaml(battery(battery={"name": name}))
    plan = program_file(path)
    header = render_c_header(plan, encode(plan))
    assert "*/ #include" not in header and "??" not in header
    assert "\\" not in c_comment(name)
    out = _compile_and_run(tmp_path, header, compiler, flags)
    assert out[0].split()[1] == str(plan.battery.cells_in_series)
    assert c_comment("a */ b /* c") == "a * / b / * c"
    assert "??" not in c_comment("??/") and "??" not in c_comment("???????")


def test_header_and_image_refuse_a_timer_their_field_cannot_hold(tmp_path, write_yaml):
    # 100,000 Ah on a 10 mA channel: a bulk timer of about 3.6e10 s, above uint32_t
    path = write_yaml(battery(battery={"capacity": "100000 Ah"},
                              charger={"max_voltage": "16 V", "max_current": "0.01 A",
                                       "can_disable_high_voltage_stages": True}))
    for fmt in ("c-header", "image"):
        result = runner.invoke(app, ["plan", str(path), "-f", fmt, "-o", str(tmp_path / fmt)])
        assert result.exit_code == 2, result.stderr
        assert "stages[" in result.stderr and "timer_s" in result.stderr
        assert "uint32_t" in result.stderr and not (tmp_path / fmt).exists()
        assert result.stderr.startswith(f"error: {path}: stages[")


def _good(index: int = 0):
    return encode(program_file(example_paths()[index]))


def _codes(doc, **given):
    return {v.code for v in check_document(doc, **given)}


def _battery_file(index: int):
    from chargeplan.api import load_battery_file

    return load_battery_file(example_paths()[index])


FLOODED, AGM, GEL, LFP, NMC = range(5)


@pytest.mark.parametrize("index", range(5))
def test_every_example_passes_the_checker_as_json_and_as_image(index):
    doc = _good(index)
    given = {"battery_file": _battery_file(index)}
    assert check_document(doc, **given) == []
    assert check_document(image.decode(image.encode(doc)), kind="image", **given) == []


def _relabel_lfp_as_nmc(d):
    d["battery"]["chemistry"] = d["battery"]["profile"] = "nmc"
    for stage in d["stages"]:
        stage["voltage_mV"] = 4200 * 4
    d["interlocks"].update(cell_voltage_max_mV=4200, battery_voltage_max_mV=16800)


def _times_ten(d):
    for stage in d["stages"]:
        stage["current_mA"] *= 10
    d["interlocks"]["current_max_mA"] *= 10
    if d["interlocks"]["cool_zone"]:
        d["interlocks"]["cool_zone"]["current_max_mA"] *= 10


def _no_timers(d):
    for stage in d["stages"]:
        stage["timer_s"], stage["exits"] = None, []


def _five_cells(d):
    d["cells_in_series"] = d["battery"]["cells_in_series"] = 5
    d["interlocks"]["battery_voltage_max_mV"] = 5 * d["interlocks"]["cell_voltage_max_mV"]


def _with_precharge_above_bulk(d):
    bulk = d["stages"][0]
    d["stages"].insert(0, {**bulk, "kind": "precharge", "voltage_mV": bulk["voltage_mV"] + 100,
                           "current_mA": bulk["current_mA"] // 10})


def _set(path, value):
    def change(d):
        *head, last = path
        node = d
        for key in head:
            node = node[key]
        node[last] = value
    return change


# Each hand edit must be refused with its check's code; the sources of the limits are in
# chargeplan/firmware/limits.py (BU-410, BU-808, BU-409, JEITA, cell handling guidelines).
EDITS = [
    # relabelled chemistry: the battery file's chemistry sets the limit (LFP 3.65 V/cell)
    ("relabelled-lfp-as-nmc", LFP, _relabel_lfp_as_nmc, True, {"CK303", "CK403", "CK701"}),
    ("chemistry-profile-disagree", LFP, _set(("battery", "chemistry"), "nmc"), False,
     {"CK203"}),
    ("currents-times-ten", LFP, _times_ten, True, {"CK305", "CK405"}),
    ("capacity-and-currents-times-ten", NMC,
     lambda d: (_times_ten(d), d["battery"].__setitem__("capacity_mAh", 50000)), True,
     {"CK702", "CK305"}),
    ("cells-from-nominal-voltage", LFP, _five_cells, True, {"CK703"}),
    ("above-the-battery-files-charger", NMC,
     lambda d: [st.__setitem__("current_mA", 3100) for st in d["stages"]]
     + [d["interlocks"].__setitem__("current_max_mA", 3100)], True, {"CK802"}),
    ("tail-below-the-channels-minimum", NMC,
     _set(("stages", 1, "exits", 0, "current_mA"), 40), True, {"CK802", "CK310"}),
    ("lithium-without-timers", NMC, _no_timers, False, {"CK307"}),
    ("float-on-lifepo4", LFP, lambda d: d["stages"].append(
        {**d["stages"][-1], "kind": "float", "timer_s": None, "exits": []}), False,
     {"CK301", "CK302"}),
    ("compensation-on-lithium", NMC, _set(("temperature_compensation",), {
        "coefficient_uV_per_K_per_cell": -3000, "reference_dC": 250, "range_min_dC": -100,
        "range_max_dC": 400}), False, {"CK501"}),
    ("compensation-wrong-sign", FLOODED, _set(
        ("temperature_compensation", "coefficient_uV_per_K_per_cell"), 3000), False, {"CK502"}),
    ("compensation-ten-times", FLOODED, _set(
        ("temperature_compensation", "coefficient_uV_per_K_per_cell"), -30000), False,
     {"CK502"}),
    ("nmc-warm-zone-removed", NMC, _set(("interlocks", "warm_zone"), None), False, {"CK407"}),
    ("nmc-warm-zone-later", NMC, _set(("interlocks", "warm_zone", "above_dC"), 460), False,
     {"CK407"}),
    ("nmc-warm-zone-above-cell-max", NMC,
     _set(("interlocks", "warm_zone", "cell_voltage_max_mV"), 4300), False, {"CK407"}),
    ("lfp-cool-zone-removed", LFP, _set(("interlocks", "cool_zone"), None), False, {"CK406"}),
    ("lfp-cool-zone-narrowed", LFP, _set(("interlocks", "cool_zone", "below_dC"), 50), False,
     {"CK406"}),
    ("lfp-cool-zone-current", LFP, _set(("interlocks", "cool_zone", "current_max_mA"), 30000),
     False, {"CK406"}),
    ("nmc-cool-zone-above-1-it", NMC, _set(("interlocks", "cool_zone", "current_max_mA"), 5000),
     False, {"CK406"}),
    ("cells-fields-disagree", FLOODED, _set(("battery", "cells_in_series"), 7), False,
     {"CK201"}),
    ("nominal-voltage-disagrees", FLOODED, _set(("battery", "nominal_voltage_mV"), 24000),
     False, {"CK202"}),
    ("stages-reversed", FLOODED, lambda d: d["stages"].reverse(), False, {"CK302"}),
    ("precharge-above-bulk", NMC, _with_precharge_above_bulk, False, {"CK311"}),
    ("absorption-for-three-days", FLOODED, _set(("stages", 1, "timer_s"), 3 * 86400), False,
     {"CK309"}),
    ("table-row-in-cool-zone", LFP,
     _set(("temperature_table", "rows", 0, "current_max_mA"), 30000), False, {"CK603"}),
    ("voltage-exit-above-limit", FLOODED,
     _set(("stages", 0, "exits", 0, "voltage_mV"), 16000), False, {"CK310"}),
]


@pytest.mark.parametrize(("name", "index", "change", "with_battery", "expected"), EDITS,
                         ids=[e[0] for e in EDITS])
def test_checker_refuses_each_hand_edit(name, index, change, with_battery, expected):
    doc = copy.deepcopy(_good(index))
    change(doc)
    given = {"battery_file": _battery_file(index)} if with_battery else {}
    assert expected <= _codes(doc, **given), check_document(doc, **given)
    # the image of the same edit is refused by the same checks (where the image holds it)
    if name in ("chemistry-profile-disagree", "cells-fields-disagree",
                "nominal-voltage-disagrees"):
        return  # the image has no profile, one cells field and no nominal voltage
    back = image.decode(image.encode(doc))
    assert expected <= {v.code for v in check_document(back, kind="image", **given)}


@pytest.mark.parametrize(
    ("change", "expected"),
    [
        (lambda d: d["stages"][1].__setitem__("voltage_mV", 17000), "CK303"),
        (lambda d: d["stages"][1].__setitem__("voltage_mV", 2450), "CK304"),
        (lambda d: d["stages"][0].__setitem__("current_mA", 99999), "CK305"),
        (lambda d: d["interlocks"].__setitem__("charge_temperature_min_dC", 600), "CK401"),
        (lambda d: d["stages"][-1].__setitem__("voltage_mV", 16000), "CK312"),
        (lambda d: d["stages"][1].__setitem__("timer_s", 10), "CK308"),
        (lambda d: d["stages"].insert(0, {**d["stages"][1], "kind": "precharge",
                                          "current_mA": 9000}), "CK311"),
    ],
)
def test_checker_refuses_unsafe_or_disordered_documents(change, expected):
    doc = copy.deepcopy(_good())
    change(doc)
    assert expected in _codes(doc)


def test_checker_lithium_rules():
    # BU-410 Table 1: no lithium charging below 0 degC; never equalization for lithium
    doc = _good(LFP)
    cold = copy.deepcopy(doc)
    cold["interlocks"]["charge_temperature_min_dC"] = -50
    assert "CK402" in _codes(cold)
    eq = copy.deepcopy(doc)
    eq["stages"].append({**doc["stages"][-1], "kind": "equalization"})
    assert "CK301" in _codes(eq)


def test_every_check_has_a_unique_code_and_a_statement():
    from chargeplan.firmware.check import CHECKS, FORM_CHECKS

    codes = [check.code for check in FORM_CHECKS + CHECKS]
    assert len(codes) == len(set(codes))
    assert all(re.fullmatch(r"CK\d{3}", c) for c in codes)
    assert all((check.__doc__ or "").strip() for check in FORM_CHECKS + CHECKS)


def _patched_image(doc, offset_in_first_stage: int | None = None, value: int = 0) -> bytes:
    """The image of ``doc``, one stage byte set to ``value``, with its CRC recomputed."""
    import struct
    import zlib

    data = bytearray(image.encode(doc))
    if offset_in_first_stage is not None:
        # the first stage follows the header, the interlocks, compensation, the digest and
        # (image format 2) the program block with its fault table
        start = sum(block.size for block in (image._HEAD, image._HEADER, image._LOCKS,
                                             image._COMP, image._DIGEST, image._PROGRAM,
                                             image._COUNT))
        start += image._FAULT.size * len(doc["faults"])
        data[start + offset_in_first_stage] = value
    body = bytes(data[:-4])
    return body + struct.pack("<I", zlib.crc32(body))


@pytest.mark.parametrize(
    ("name", "build", "code", "fragment"),
    [
        ("no stages", lambda d: _patched_image({**d, "stages": []}), 1, "CK102"),
        ("version 99", lambda d: _patched_image({**d, "version": 99}), 1, "CK101"),
        ("zero cells", lambda d: _patched_image({**d, "cells_in_series": 0}), 1, "CK103"),
        # kind, compensated, voltage, current, timer, exit voltage: 'then' is byte 18
        ("then 7", lambda d: _patched_image(d, 18, 7), 1, "CK104"),
        ("compensated 5", lambda d: _patched_image(d, 1, 5), 1, "CK104"),
    ],
)
def test_check_command_on_edited_images(tmp_path, name, build, code, fragment):
    path = tmp_path / "edited.cpsi"
    path.write_bytes(build(_good(NMC)))
    result = runner.invoke(app, ["check", str(path)])
    assert result.exit_code == code, result.stderr
    assert fragment in result.stderr and "Traceback" not in result.stderr


def test_check_command_refuses_a_number_no_field_holds(tmp_path):
    doc = _good(NMC)
    doc["stages"][0]["voltage_mV"] = 10**400
    doc["digest"] = compute_digest(doc)
    path = tmp_path / "huge.json"
    path.write_text(json.dumps(doc))
    result = runner.invoke(app, ["check", str(path)])
    assert result.exit_code == 2, result.stderr
    assert "stages[0].voltage_mV" in result.stderr and "does not fit" in result.stderr


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
    assert runner.invoke(app, ["check", str(img), "--battery", str(path)]).exit_code == 0
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


def test_relabelled_document_fails_on_the_command_line(tmp_path):
    doc = _good(LFP)
    _relabel_lfp_as_nmc(doc)
    doc["digest"] = compute_digest(doc)
    path = tmp_path / "relabelled.json"
    path.write_text(json.dumps(doc))
    result = runner.invoke(app, ["check", str(path), "--battery", str(example_paths()[LFP])])
    assert result.exit_code == 1
    assert "above the lifepo4 limit 14600 mV" in result.stderr and "[CK701]" in result.stderr


def test_check_against_the_channel(tmp_path):
    path = example_paths()[0]
    doc = tmp_path / "d.json"
    runner.invoke(app, ["plan", str(path), "-f", "json", "-o", str(doc)])
    channel = tmp_path / "channel.yaml"
    channel.write_text("max_voltage: 14 V\nmax_current: 2 A\n")
    result = runner.invoke(app, ["check", str(doc), "--charger", str(channel)])
    assert result.exit_code == 1 and "channel's 14.0 V" in result.stderr
    # a channel that sets its voltage in 100 mV steps cannot set 15006 mV
    channel.write_text("max_voltage: 16 V\nmax_current: 6 A\nvoltage_step: 100 mV\n")
    result = runner.invoke(app, ["check", str(doc), "--charger", str(channel)])
    assert result.exit_code == 1 and "[CK803]" in result.stderr


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


def test_a_step_that_moves_a_setpoint_beyond_the_margin_is_refused():
    from chargeplan.engine.rules.fit import QUANTISATION_MARGIN
    from chargeplan.errors import PlanRefused

    from .conftest import plan_of

    # 4 x 3.55 V/cell = 14.2 V LiFePO4 (common practice CV); on a 5 V step it would be 10 V
    data = battery(battery={"chemistry": "lifepo4", "capacity": "100 Ah"},
                   state={"rest_voltage": "13.1 V"},
                   charger={"max_voltage": "15 V", "min_voltage": "5 V", "max_current": "40 A",
                            "voltage_step": "5 V", "can_disable_high_voltage_stages": True})
    with pytest.raises(PlanRefused, match="more than the 1%") as caught:
        plan_of(data)
    assert caught.value.rule_id == "CP405"
    # a 30 mV step moves 14.2 V to 14.19 V (0.07 %): planned, every move inside the margin
    data["charger"]["voltage_step"] = "30 mV"
    plan = plan_of(data)
    assert plan.quantisation
    for q in plan.quantisation:
        assert abs(q.encoded - q.requested) <= QUANTISATION_MARGIN[q.unit] * q.requested
    # currents: 50 A bulk (0.5 It) on a 30 A step would be 30 A, 40 % less: refused
    data["charger"].update(voltage_step="10 mV", max_current="100 A", current_step="30 A")
    with pytest.raises(PlanRefused, match="more than the 25%"):
        plan_of(data)


def test_a_makers_compensation_coefficient_is_held_to_the_battery_file(write_yaml):
    from chargeplan.api import load_battery_file

    # a maker's -7 mV/K/cell lies outside the checker's -2 to -6 (BU-410 -3 to -5 with a
    # margin): refused alone, accepted against the battery file that gives it
    path = write_yaml(battery(battery={"overrides": {"temperature_coefficient": "-7 mV/K/cell"}},
                              charger={"max_voltage": "16 V", "max_current": "10 A",
                                       "temperature_probe": True,
                                       "can_disable_high_voltage_stages": True}))
    doc = encode(program_file(path))
    assert doc["temperature_compensation"]["coefficient_uV_per_K_per_cell"] == -7000
    assert "CK502" in _codes(doc)
    given = {"battery_file": load_battery_file(path)}
    assert check_document(doc, **given) == []
    doc["temperature_compensation"]["coefficient_uV_per_K_per_cell"] = -5000
    assert _codes(doc, **given) == {"CK705"}


_IMAGE_MAIN = r"""
#include <stdio.h>
#include "setpoints.h"

int main(int argc, char **argv)
{
    static uint8_t data[65536];
    size_t size;
    FILE *f = fopen(argv[1], "rb");
    (void)argc;
    if (f == NULL) {
        return 9;
    }
    size = fread(data, 1, sizeof data, f);
    fclose(f);
    printf("%d %u %u\n", cp_image_check(data, (uint32_t)size), (unsigned)cp_le_u16(data + 12),
           (unsigned)cp_crc32((const uint8_t *)"123456789", 9u));
    data[size / 2] ^= 0x10u;
    printf("%d\n", cp_image_check(data, (uint32_t)size));
    data[size / 2] ^= 0x10u;
    printf("%d %lu %d\n", cp_image_check(data, (uint32_t)size - 1u),
           (unsigned long)cp_le_u32(data + 14), cp_le_s16(data + 18));
    return 0;
}
"""


@pytest.mark.parametrize(("compiler", "flags"), [("gcc", C_FLAGS), ("g++", CXX_FLAGS)])
def test_the_header_checks_the_image_byte_by_byte(tmp_path, compiler, flags):
    """The header's own portable reader (no packed structs) accepts the image written for
    the same document, and refuses a flipped bit (CRC-32/ISO-HDLC, check value 0xCBF43926:
    the CRC catalogue's value for "123456789") and a cut one."""
    plan = program_file(example_paths()[FLOODED])
    doc = encode(plan)
    data = image.encode(doc)
    (tmp_path / "setpoints.h").write_text(render_c_header(plan, doc))
    (tmp_path / "main.c").write_text(_IMAGE_MAIN)
    (tmp_path / "setpoints.bin").write_bytes(data)
    exe = tmp_path / f"image-{compiler}"
    subprocess.run([_compiler(compiler), *flags, "-o", str(exe), str(tmp_path / "main.c")],
                   check=True, capture_output=True, text=True)
    out = subprocess.run([str(exe), str(tmp_path / "setpoints.bin")], check=True,
                         capture_output=True, text=True).stdout.split()
    # the first payload fields, read with struct here: cells (u16), capacity (u32), planned
    # temperature (s16); a cut image is refused on its length
    cells, capacity, planned = struct.unpack_from("<HIh", data, 12)
    assert out == ["0", str(cells), str(0xCBF43926), "5", "4", str(capacity), str(planned)]
    assert (cells, capacity, planned) == (doc["cells_in_series"], doc["battery"]["capacity_mAh"],
                                          doc["planned_temperature_dC"])


@pytest.mark.parametrize("chemistry", ["flooded", "lifepo4"])
def test_c_header_carries_the_chemistry_cautions_in_ascii(write_yaml, chemistry):
    # project rule: every human-readable output shows its chemistry's cautions; a C
    # comment must stay ASCII (C99 5.2.1: the basic source character set), so degrees are
    # written as degC
    from chargeplan.api import program_file
    from chargeplan.firmware.c_header import render_c_header
    from chargeplan.firmware.setpoints import encode

    from .conftest import battery

    cells = {"lifepo4": 4}.get(chemistry, 6)
    data = battery(battery={"chemistry": chemistry, "cells_in_series": cells})
    data["battery"].pop("nominal_voltage", None)
    plan = program_file(write_yaml(data))
    header = render_c_header(plan, encode(plan))
    comment = " ".join(line.lstrip(" *-") for line in header.split("*/")[0].splitlines())
    for line in plan.cautions[:-1]:
        assert line.replace("°C", "degC") in comment, line
    assert header.isascii()
