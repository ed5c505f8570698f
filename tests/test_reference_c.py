"""The reference implementation in portable C99 (chargeplan/firmware/c/): it compiles as
strict C99 and as C++17, reads an image chargeplan wrote, runs a charge in closed loop
against the project's battery model (physics/charge.py, stepped through time) with the
stage times of the plan's own estimate, handles injected faults, and gives the same
outputs, step by step, as the Python reading of the program (firmware/program.py)."""

from __future__ import annotations

import ctypes
import os
import shutil
import subprocess
from itertools import pairwise

import numpy as np
import pytest

from chargeplan.engine.planner import plan_charge
from chargeplan.estimate import arrays_for, estimate_plans
from chargeplan.firmware import image
from chargeplan.firmware.charge_program import program_plan
from chargeplan.firmware.faults import FAULT_CODES
from chargeplan.firmware.program import CV_BAND_MV_PER_CELL, ProgramRunner
from chargeplan.firmware.reference import reference_files
from chargeplan.firmware.setpoints import encode
from chargeplan.model.battery import BatteryFile
from chargeplan.physics.charge import SOC_STEP, StageArrays, simulate_charge

from .conftest import battery

WARNINGS = ["-Wall", "-Wextra", "-Wpedantic", "-Werror"]


def _compiler(name: str) -> str:
    """The compiler, or a skip; in CI (CI=true) a missing compiler is a failure."""
    path = shutil.which(name)
    if path is None:
        if os.environ.get("CI") == "true":
            pytest.fail(f"{name} is missing in CI: .ci/run installs gcc, g++ and make")
        pytest.skip(f"no {name} on this machine")
    return path


@pytest.fixture(scope="module")
def sources(tmp_path_factory):
    folder = tmp_path_factory.mktemp("reference")
    for name, data in reference_files().items():
        (folder / name).write_text(data) if isinstance(data, str) else (
            folder / name).write_bytes(data)
    return folder


class Output(ctypes.Structure):
    _fields_ = [("target_voltage_mV", ctypes.c_int32), ("current_limit_mA", ctypes.c_int32),
                ("stage", ctypes.c_uint8), ("fault", ctypes.c_uint8)]


@pytest.fixture(scope="module")
def library(sources):
    gcc = _compiler("gcc")
    lib_path = sources / "libcp_program.so"
    subprocess.run([gcc, "-std=c99", *WARNINGS, "-O2", "-fPIC", "-shared", "-o", str(lib_path),
                    str(sources / "cp_image.c"), str(sources / "cp_step.c")], check=True)
    lib = ctypes.CDLL(str(lib_path))
    lib.cpr_program_size.restype = ctypes.c_size_t
    lib.cpr_state_size.restype = ctypes.c_size_t
    lib.cpr_read_image.restype = ctypes.c_int
    lib.cpr_read_image.argtypes = [ctypes.c_char_p, ctypes.c_size_t, ctypes.c_void_p]
    lib.cpr_init.argtypes = [ctypes.c_void_p, ctypes.c_void_p]
    lib.cpr_step_out.argtypes = [ctypes.c_void_p, ctypes.c_uint32, ctypes.c_int32,
                                 ctypes.c_int32, ctypes.c_int32, ctypes.c_uint8,
                                 ctypes.POINTER(Output)]
    return lib


class CRunner:
    """The C state machine through ctypes, stepped like ProgramRunner."""

    def __init__(self, lib, data: bytes) -> None:
        self.lib = lib
        self.program = ctypes.create_string_buffer(lib.cpr_program_size())
        self.state = ctypes.create_string_buffer(lib.cpr_state_size())
        status = lib.cpr_read_image(data, len(data), self.program)
        assert status == 0, f"the C reader refused the image (status {status})"
        lib.cpr_init(self.state, self.program)

    def step(self, now, v, i, t, probe=0):
        out = Output()
        self.lib.cpr_step_out(self.state, now, v, i, t, probe, ctypes.byref(out))
        return (out.target_voltage_mV, out.current_limit_mA, out.stage, out.fault)


def _py(runner: ProgramRunner, *args):
    out = runner.step(*args)
    return (out.target_voltage_mV, out.current_limit_mA, out.stage, out.fault)


# --- compiling ------------------------------------------------------------------------
def test_compiles_as_strict_c99_and_runs_its_host_test(sources, tmp_path):
    _compiler("gcc")
    if shutil.which("make") is None:
        if os.environ.get("CI") == "true":
            pytest.fail("make is missing in CI")
        pytest.skip("no make on this machine")
    doc = encode(program_plan(BatteryFile.model_validate(battery()), estimate=False))
    (sources / "setpoints.bin").write_bytes(image.encode(doc))
    done = subprocess.run(["make", "-C", str(sources), "test", "CC=gcc"],
                          capture_output=True, text=True, check=False)
    assert done.returncode == 0, done.stdout + done.stderr
    assert "all host checks passed" in done.stdout


def test_compiles_as_cpp17(sources, tmp_path):
    gxx = _compiler("g++")
    for name in ("cp_image.c", "cp_step.c", "test_host.c"):
        subprocess.run([gxx, "-std=c++17", "-x", "c++", *WARNINGS, "-c", str(sources / name),
                        "-o", str(tmp_path / (name + ".o"))], check=True)


def test_c_constants_match_the_python_tables(sources):
    """One table: cp_faults.h is written from firmware/faults.py; the band is one number."""
    header = (sources / "cp_faults.h").read_text()
    for name, code in FAULT_CODES.items():
        assert f"#define CPR_FAULT_{name.upper()} {code}u" in header
    assert (f"#define CPR_CV_BAND_MV_PER_CELL {CV_BAND_MV_PER_CELL}\n"
            in (sources / "cp_program.h").read_text())


def test_c_reader_refuses_damaged_images(library):
    data = image.encode(encode(program_plan(BatteryFile.model_validate(battery()),
                                            estimate=False)))
    program = ctypes.create_string_buffer(library.cpr_program_size())
    assert library.cpr_read_image(data, len(data), program) == 0
    flipped = bytearray(data)
    flipped[len(data) // 2] ^= 0x01
    assert library.cpr_read_image(bytes(flipped), len(data), program) == 5  # CPR_ERR_CRC
    assert library.cpr_read_image(data[:-1], len(data) - 1, program) == 4  # CPR_ERR_LENGTH
    assert library.cpr_read_image(b"XXXX" + data[4:], len(data), program) == 2  # magic


# --- closed loop ------------------------------------------------------------------------
BATTERIES = {
    "flooded": battery(battery={"chemistry": "flooded", "capacity": "20 Ah"}),
    "agm": battery(battery={"capacity": "20 Ah"}),
    "gel": battery(battery={"chemistry": "gel", "capacity": "20 Ah"}),
    "lifepo4": battery(battery={"chemistry": "lifepo4", "capacity": "20 Ah"}),
    "nmc": battery(battery={"chemistry": "nmc", "nominal_voltage": None,
                            "cells_in_series": 3, "capacity": "5 Ah"}),
}
DT_S = 20
START_SOC_PCT = 50.0


class Battery:
    """A battery of the project's charge model, stepped through time: each interval runs
    physics/charge.py's simulate_charge for one constant setpoint."""

    def __init__(self, plan, soc: float) -> None:
        self.params, _ = arrays_for([plan])
        self.cells = plan.battery.cells_in_series
        self.soc = soc

    def _run(self, v_mV: int, i_mA: int, seconds: float):
        self.params.soc_start = np.array([self.soc])
        one = np.ones((1, 1))
        stages = StageArrays(one > 0, one * v_mV / 1000 / self.cells, one * max(i_mA, 0) / 1000,
                             one * np.nan, one * np.nan, one * seconds, one > 0)
        return simulate_charge(self.params, stages, record=True)

    def measure(self, v_mV: int, i_mA: int) -> tuple[int, int]:
        """Terminal voltage and current under this setpoint (integer mV and mA)."""
        series = self._run(v_mV, i_mA, 1e-3).series
        return int(series["voltage_v"][0] * 1000), int(series["current_a"][0] * 1000)

    def advance(self, v_mV: int, i_mA: int, seconds: float) -> None:
        self.soc = float(self._run(v_mV, i_mA, seconds).end_soc[0, 0])


def _closed_loop(runner, plan, temperature_dC, limit_s):
    """Run until the charge stops or holds; (trace of inputs, outputs, stage times)."""
    cell = Battery(plan, START_SOC_PCT / 100)
    out = (0, 0, 0, 0)
    trace, outputs, stages = [], [], []
    for now in range(0, limit_s, DT_S):
        v, i = cell.measure(out[0], out[1]) if out[1] > 0 else cell.measure(0, 0)
        step = (now, v, i, temperature_dC, 0)
        out = runner.step(*step)
        trace.append(step)
        outputs.append(out)
        if not stages or stages[-1][0] != out[2]:
            stages.append((out[2], now))
        holding = out[2] in (6, 7) and len(stages) > 2  # on float after its charge
        if out[3] or (out[2] == 0 and now > 0) or holding:
            break
        cell.advance(out[0], out[1], DT_S)
    return trace, outputs, stages


@pytest.mark.parametrize("chemistry", sorted(BATTERIES))
def test_closed_loop_follows_the_plans_estimate(library, chemistry):
    data = BATTERIES[chemistry]
    battery_file = BatteryFile.model_validate(data)
    doc = encode(program_plan(battery_file, estimate=False))
    now_file = battery_file.model_copy(update={"state": BatteryFile.model_validate(
        {**data, "state": {"state_of_charge": f"{START_SOC_PCT} %"}}).state})
    plan = plan_charge(now_file)
    estimate_plans([plan])
    runner = CRunner(library, image.encode(doc))
    trace, outputs, stages = _closed_loop(runner, plan, doc["planned_temperature_dC"],
                                          3 * 86_400)
    assert all(out[3] == 0 for out in outputs), outputs[-1]
    kinds = [stage.kind.value for stage in plan.stages]
    codes = {3: "bulk", 4: "absorption", 6: "float", 7: "storage_hold"}
    seen = [codes[code] for code, _ in stages if code]
    assert seen == kinds[:len(seen)] and len(seen) >= min(2, len(kinds)), (seen, kinds)
    for (code, start), (_, end) in pairwise(stages):
        if code in (3, 4):  # a stage that ends: its time against the plan's estimate, within
            # 5 %, plus the estimate's own resolution (its time step moves SOC_STEP of the
            # capacity at the stage's current) and one loop step
            stage = plan.stage(codes[code])
            estimated = stage.estimate.duration_s
            resolution = SOC_STEP * plan.battery.capacity_ah * 3600 / stage.current_a
            assert abs((end - start) - estimated) <= 0.05 * estimated + resolution + DT_S, (
                codes[code], end - start, estimated)
    # the same trace into the Python reading of the program: the same outputs
    python = ProgramRunner(doc)
    assert [_py(python, *step) for step in trace] == outputs


# --- faults -----------------------------------------------------------------------------
def _both(library, data):
    doc = encode(program_plan(BatteryFile.model_validate(data), estimate=False))
    return doc, CRunner(library, image.encode(doc)), ProgramRunner(doc)


def _connect_mV(doc):
    """A rested battery of the program's kind, below its first stage's voltage."""
    above = next(f["above_voltage_mV"] for f in doc["faults"] if f["name"] == "wrong_cell_count")
    return min(doc["stages"][0]["voltage_mV"] - 500, above - 100)


def _run_trace(c, py, trace):
    outs = [c.step(*step) for step in trace]
    assert [_py(py, *step) for step in trace] == outs  # the same, step by step
    return outs


@pytest.mark.parametrize("chemistry", sorted(BATTERIES))
def test_over_temperature_pauses_then_resumes_after_the_hysteresis(library, chemistry):
    doc, c, py = _both(library, BATTERIES[chemistry])
    lock, margin = doc["interlocks"], doc["hysteresis"]["temperature_margin_dK"]
    v = _connect_mV(doc)
    hot = lock["charge_temperature_max_dC"] + 1
    # a battery that starts warm (a hot room): the rise to over-temperature stays inside
    # the lead-acid temperature-rise guard, which would otherwise latch first (tested below)
    rise = _exit(doc["stages"][0], "temperature_rise", "temperature_rise_dK")
    t_ok = doc["planned_temperature_dC"] if rise is None else max(
        doc["planned_temperature_dC"], hot - rise)
    back = lock["charge_temperature_max_dC"] - margin
    outs = _run_trace(c, py, [(0, v, 0, t_ok, 0), (10, v, 100, hot, 0), (20, v, 0, back + 1, 0),
                              (30, v, 0, back, 0)])
    assert outs[0][2] == 3 and outs[0][1] > 0
    assert outs[1][:3] == (0, 0, 0) and outs[1][3] == FAULT_CODES["temperature_high"]
    assert outs[2][3] == FAULT_CODES["temperature_high"]  # inside the margin: still paused
    assert outs[3][3] == 0 and outs[3][2] == 3  # resumed


@pytest.mark.parametrize("chemistry", sorted(BATTERIES))
def test_over_voltage_latches(library, chemistry):
    doc, c, py = _both(library, BATTERIES[chemistry])
    v = _connect_mV(doc)
    high = doc["interlocks"]["battery_voltage_max_mV"] + 1
    f = doc["hysteresis"]["voltage_filter_s"]
    trace = [(0, v, 0, 250, 0), (1, high, 0, 250, 0), (1 + f, high, 0, 250, 0),
             (5 + f, v, 0, 250, 0)]
    outs = _run_trace(c, py, trace)
    assert outs[1][3] == 0  # a transient shorter than the filter does not trip
    assert outs[2] == (0, 0, 0, FAULT_CODES["over_voltage"])
    assert outs[3] == (0, 0, 0, FAULT_CODES["over_voltage"])  # latched


def test_an_open_or_shorted_probe_faults(library):
    doc, c, py = _both(library, BATTERIES["nmc"])
    v = doc["stages"][0]["voltage_mV"] - 500
    outs = _run_trace(c, py, [(0, v, 0, 250, 0), (1, v, 100, 250, 1), (2, v, 0, 250, 0)])
    assert outs[1][3] == outs[2][3] == FAULT_CODES["probe_open"]
    doc, c, py = _both(library, BATTERIES["agm"])
    assert _run_trace(c, py, [(0, 12_500, 0, 250, 2)])[0][3] == FAULT_CODES["probe_short"]


@pytest.mark.parametrize("chemistry", sorted(BATTERIES))
def test_a_timer_expiry_faults(library, chemistry):
    doc, c, py = _both(library, BATTERIES[chemistry])
    bulk = doc["stages"][0]
    v = bulk["voltage_mV"] - 200 * doc["cells_in_series"]  # never reaches its exit
    timer = bulk["timer_s"]
    # a weak supply: the current that keeps the charge put in under the Ah cap, if there
    # is one, so that the timer is what ends the stage (the cap is tested below)
    cap = _exit(bulk, "charge_above", "charge_mAh")
    i = bulk["current_mA"] if cap is None else min(bulk["current_mA"],
                                                   cap * 3600 * 9 // (10 * timer))
    outs = _run_trace(c, py, [(0, v, 0, 250, 0), (timer - 1, v, i, 250, 0),
                              (timer, v, i, 250, 0)])
    assert outs[1][3] == 0 and outs[1][2] == 3
    assert outs[2][3] == FAULT_CODES["stage_timer"]


LEAD_ACID = ["agm", "flooded", "gel"]


@pytest.mark.parametrize("chemistry", LEAD_ACID)
def test_the_ah_cap_latches(library, chemistry):
    """Charge put in beyond the cap (a shorted cell never reaching its voltage) latches
    charge_above, in bulk and in absorption, and stays latched."""
    doc, c, py = _both(library, BATTERIES[chemistry])
    bulk = doc["stages"][0]
    cap = _exit(bulk, "charge_above", "charge_mAh")
    assert cap is not None and cap == _exit(doc["stages"][1], "charge_above", "charge_mAh")
    v = bulk["voltage_mV"] - 200 * doc["cells_in_series"]
    i = bulk["current_mA"]
    over_s = cap * 3600 // i + 20  # the time at this current that puts in the cap, and more
    assert over_s < bulk["timer_s"]
    trace = [(0, v, 0, 250, 0), *[(s, v, i, 250, 0) for s in range(10, over_s - 40, 600)],
             (over_s, v, i, 250, 0), (over_s + 10, v, 0, 250, 0)]
    outs = _run_trace(c, py, trace)
    assert all(o[3] == 0 for o in outs[:-2])
    assert outs[-2] == outs[-1] == (0, 0, 0, FAULT_CODES["charge_above"])


@pytest.mark.parametrize("chemistry", LEAD_ACID)
def test_current_rising_at_constant_voltage_latches(library, chemistry):
    """In absorption the current falls; a rise above its lowest by more than the guard
    (thermal runaway sign) latches current_rising; a rise within it does not."""
    doc, c, py = _both(library, BATTERIES[chemistry])
    absorb = doc["stages"][1]
    v_abs = absorb["voltage_mV"]
    rise = _exit(absorb, "current_rising", "current_mA")
    tail = _exit(absorb, "current_below", "current_mA")
    low = tail + 2 * rise + 50  # above the tail: absorption goes on
    trace = [(0, _connect_mV(doc), 0, 250, 0), (10, v_abs, 1000, 250, 0),
             (20, v_abs, low + rise, 250, 0), (30, v_abs, low, 250, 0),
             (40, v_abs, low + rise, 250, 0), (50, v_abs, low + rise + 1, 250, 0)]
    outs = _run_trace(c, py, trace)
    assert outs[2][2] == 4 and outs[3][3] == 0 and outs[4][3] == 0  # within the guard
    assert outs[5] == (0, 0, 0, FAULT_CODES["current_rising"])


@pytest.mark.parametrize("chemistry", LEAD_ACID)
def test_a_temperature_rise_latches(library, chemistry):
    """A battery that warms by more than the guard within a stage, still inside the charge
    window, latches temperature_rise (a pause would restart the runaway)."""
    doc, c, py = _both(library, BATTERIES[chemistry])
    rise = _exit(doc["stages"][0], "temperature_rise", "temperature_rise_dK")
    t0 = 150
    assert t0 + rise + 1 < doc["interlocks"]["charge_temperature_max_dC"]
    v = _connect_mV(doc)
    i = doc["stages"][0]["current_mA"]
    outs = _run_trace(c, py, [(0, v, 0, t0, 0), (10, v, i, t0 + rise, 0),
                              (20, v, i, t0 + rise + 1, 0), (30, v, 0, t0, 0)])
    assert outs[1][3] == 0
    assert outs[2] == outs[3] == (0, 0, 0, FAULT_CODES["temperature_rise"])


def _exit(stage, condition, field):
    """The value of a stage's exit of this kind, or None."""
    return next((e[field] for e in stage["exits"] if e["condition"] == condition), None)


def test_precharge_then_restart(library):
    """A flat pack is pre-charged; after a stop, a rest below the restart voltage for its
    filter time starts the charge again from bulk."""
    doc, c, py = _both(library, BATTERIES["nmc"])
    pre, restart = doc["precharge"], doc["restart"]
    low = pre["below_voltage_mV"] - 300
    absorb = doc["stages"][1]
    tail = next(e["current_mA"] for e in absorb["exits"] if e["condition"] == "current_below")
    trace = [(0, low, 0, 250, 0), (10, pre["below_voltage_mV"], 100, 250, 0),
             (20, absorb["voltage_mV"], 1000, 250, 0), (30, absorb["voltage_mV"], tail - 1,
                                                        250, 0),
             (40, restart["voltage_mV"] - 1, 0, 250, 0),
             (40 + restart["filter_s"], restart["voltage_mV"] - 1, 0, 250, 0)]
    outs = _run_trace(c, py, trace)
    assert [o[2] for o in outs] == [1, 3, 4, 0, 0, 3]


@pytest.mark.parametrize("chemistry", sorted(BATTERIES))
def test_the_state_machine_charges_as_the_temperature_table_says(library, chemistry):
    """Firmware may look setpoints up in the document's temperature table (each row the
    plan made again at that temperature) or compute them as the reference does (the
    compensation slope, its range, the clamp and the zones). At every row both give the
    same charge voltage and current limit (the C, at connection) and hold voltage (the
    Python reading, equal to the C step for step)."""
    doc = encode(program_plan(BatteryFile.model_validate(BATTERIES[chemistry]),
                              estimate=False))
    rows = doc["temperature_table"]["rows"]
    assert len(rows) >= 5
    hold = next((s for s in doc["stages"] if s["kind"] in ("float", "storage_hold")), None)
    for row in rows:
        t = row["temperature_dC"]
        c = CRunner(library, image.encode(doc))
        target, limit, stage, fault = c.step(0, _connect_mV(doc), 0, t, 0)
        assert (fault, stage) == (0, 3), row
        assert (target, limit) == (row["charge_voltage_mV"], row["current_max_mA"]), row
        if row["hold_voltage_mV"] is not None:
            assert ProgramRunner(doc)._target_mV(hold, t) == row["hold_voltage_mV"], row
