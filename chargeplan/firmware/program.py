"""A pure-Python reading of a charge program (setpoint document version 4).

:class:`ProgramRunner` steps the program the way charger firmware does, in the document's
integer units, with the same semantics as the reference C implementation shipped in
``chargeplan/firmware/c/`` (``cp_step``): the same trace of inputs gives the same outputs,
step by step (``tests/test_reference_c.py``). Integer arithmetic only; a division that
could round toward danger rounds down.

One step, in order:

1. a latched fault holds everything off;
2. the probe: open or short latches;
3. over-voltage and over-current latch once they have lasted ``voltage_filter_s``;
4. outside the charge window a charge pauses, and resumes ``temperature_margin_dK`` inside;
   a paused stage's clock stands still;
5. at connection: no battery waits, a voltage above ``wrong_cell_count`` latches, below the
   pre-charge voltage the pre-charge runs, else the first stage;
6. in a stage: the fault guards, then the exits, then the safety timer;
7. after a stop, or under float, the restart rule sends the charge back to the first stage.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from chargeplan.firmware.faults import FAULT_CODES
from chargeplan.firmware.image import KIND_CODES

__all__ = ["CV_BAND_MV_PER_CELL", "PROBE_OK", "ProgramRunner", "StepOutput"]

#: A stage is "at constant voltage" when the battery is within this of its target (per
#: cell): tail-current exits and the current-rising guard are judged only there. The C
#: implementation's CP_CV_BAND_MV_PER_CELL is the same number (a test reads it).
CV_BAND_MV_PER_CELL = 10
PROBE_OK, PROBE_OPEN, PROBE_SHORT = 0, 1, 2

_START, _PRECHARGE, _STAGE, _DONE, _LATCHED = range(5)


@dataclass(frozen=True, slots=True)
class StepOutput:
    target_voltage_mV: int
    current_limit_mA: int
    stage: int  # the running stage's kind code (1 precharge, 3 bulk, ...); 0: off
    fault: int  # the latched or pausing fault's code; 0: none


def _exit_value(stage: dict[str, Any], condition: str) -> tuple[int | None, str]:
    key = {"voltage_reached": "voltage_mV", "current_below": "current_mA",
           "duration": "duration_s", "charge_above": "charge_mAh",
           "current_rising": "current_mA", "temperature_rise": "temperature_rise_dK"}[condition]
    for e in stage["exits"]:
        if e["condition"] == condition:
            return e[key], e["then"]
    return None, "next"


def _holds(stage: dict[str, Any]) -> bool:
    """A stage with no exit that ends it (float, a lead-acid storage hold): guards aside."""
    return not any(e["then"] in ("next", "stop") for e in stage["exits"])


def _floor_div(a: int, b: int) -> int:
    return a // b  # Python floors; the C implementation uses its own floor division


class ProgramRunner:
    """The state machine of one charger channel running one program (a v4 document)."""

    def __init__(self, doc: dict[str, Any]) -> None:
        if doc.get("version") != 4:
            raise ValueError("a charge program is a setpoint document of version 4")
        self.doc = doc
        self.cells = doc["cells_in_series"]
        faults = {f["name"]: f for f in doc["faults"]}
        self.no_battery_mV = faults["no_battery"]["below_voltage_mV"]
        self.cells_above_mV = faults["wrong_cell_count"]["above_voltage_mV"]
        self.mode = _START
        self.index = 0
        self.pause = 0
        self.latched = 0
        self.stage_start = 0
        self.paused_at = 0
        self.charge_mAs = 0
        self.last_s: int | None = None
        self.min_current: int | None = None
        self.stage_temperature = 0
        self.ov_since: int | None = None
        self.oc_since: int | None = None
        self.restart_since: int | None = None
        self.actions = {f["name"]: f["action"] for f in doc["faults"]}

    # -- setpoints ----------------------------------------------------------------------
    def _adjust_mV(self, temperature_dC: int) -> int:
        comp = self.doc["temperature_compensation"]
        if comp is None:
            return 0
        low, high = comp["range_min_dC"], comp["range_max_dC"]
        delta = (min(max(temperature_dC, low), high)
                 - min(max(self.doc["planned_temperature_dC"], low), high))
        return _floor_div(comp["coefficient_uV_per_K_per_cell"] * self.cells * delta, 10_000)

    def _ceiling_mV(self, temperature_dC: int) -> int:
        lock = self.doc["interlocks"]
        ceiling = lock["battery_voltage_max_mV"]
        warm = lock["warm_zone"]
        if warm is not None and temperature_dC > warm["above_dC"]:
            ceiling = min(ceiling, warm["cell_voltage_max_mV"] * self.cells)
        return ceiling

    def _limit_mA(self, current_mA: int, temperature_dC: int) -> int:
        lock = self.doc["interlocks"]
        limit = min(current_mA, lock["current_max_mA"])
        cool = lock["cool_zone"]
        if cool is not None and temperature_dC < cool["below_dC"]:
            limit = min(limit, cool["current_max_mA"])
        return limit

    def _target_mV(self, stage: dict[str, Any], temperature_dC: int) -> int:
        adjust = self._adjust_mV(temperature_dC) if stage["compensated"] else 0
        return max(min(stage["voltage_mV"] + adjust, self._ceiling_mV(temperature_dC)), 0)

    # -- transitions --------------------------------------------------------------------
    def _enter(self, mode: int, index: int, now_s: int, temperature_dC: int) -> None:
        self.mode, self.index = mode, index
        self.stage_start, self.stage_temperature = now_s, temperature_dC
        self.min_current = None

    def _begin_charge(self, now_s: int, temperature_dC: int) -> None:
        self.charge_mAs = 0
        self.restart_since = None
        self._enter(_STAGE, 0, now_s, temperature_dC)

    def _latch(self, name: str) -> StepOutput:
        self.mode, self.latched = _LATCHED, FAULT_CODES[name]
        return StepOutput(0, 0, 0, self.latched)

    def _off(self, fault: int = 0) -> StepOutput:
        return StepOutput(0, 0, 0, fault)

    def _filtered(self, attr: str, tripped: bool, now_s: int) -> bool:
        """A trip that has lasted ``voltage_filter_s``."""
        if not tripped:
            setattr(self, attr, None)
            return False
        if getattr(self, attr) is None:
            setattr(self, attr, now_s)
        return now_s - getattr(self, attr) >= self.doc["hysteresis"]["voltage_filter_s"]

    def _restart_due(self, below: bool, now_s: int) -> bool:
        if not below:
            self.restart_since = None
            return False
        if self.restart_since is None:
            self.restart_since = now_s
        return now_s - self.restart_since >= self.doc["restart"]["filter_s"]

    # -- the step -----------------------------------------------------------------------
    def step(self, now_s: int, voltage_mV: int, current_mA: int, temperature_dC: int,
             probe_state: int = PROBE_OK) -> StepOutput:
        """One step; see the module docstring for the order."""
        if self.mode == _LATCHED:
            return self._off(self.latched)
        dt = 0 if self.last_s is None else max(now_s - self.last_s, 0)
        self.last_s = now_s
        if self.mode in (_PRECHARGE, _STAGE) and not self.pause and current_mA > 0:
            self.charge_mAs += current_mA * dt
        if probe_state == PROBE_OPEN:
            return self._latch("probe_open")
        if probe_state == PROBE_SHORT:
            return self._latch("probe_short")
        lock = self.doc["interlocks"]
        if self._filtered("ov_since", voltage_mV > lock["battery_voltage_max_mV"], now_s):
            return self._latch("over_voltage")
        if self._filtered("oc_since", current_mA > lock["current_max_mA"], now_s):
            return self._latch("over_current")
        if self.mode == _DONE:
            done = self._done(now_s, voltage_mV, temperature_dC)
            if done is not None:
                return done
        paused = self._temperature_pause(now_s, temperature_dC)
        if paused is not None:
            return paused
        if self.mode == _START:
            started = self._connect(now_s, voltage_mV, temperature_dC)
            if started is not None:
                return started
        if self.mode == _PRECHARGE:
            return self._precharge(now_s, voltage_mV, temperature_dC)
        return self._stage(now_s, voltage_mV, current_mA, temperature_dC)

    def _temperature_pause(self, now_s: int, temperature_dC: int) -> StepOutput | None:
        lock = self.doc["interlocks"]
        margin = self.doc["hysteresis"]["temperature_margin_dK"]
        t_min, t_max = lock["charge_temperature_min_dC"], lock["charge_temperature_max_dC"]
        if self.pause == FAULT_CODES["temperature_low"] and temperature_dC < t_min + margin:
            return self._off(self.pause)
        if self.pause == FAULT_CODES["temperature_high"] and temperature_dC > t_max - margin:
            return self._off(self.pause)
        if self.pause:
            self.stage_start += now_s - self.paused_at  # the stage clock stood still
            self.pause = 0
        if temperature_dC < t_min or temperature_dC > t_max:
            name = "temperature_low" if temperature_dC < t_min else "temperature_high"
            if self.actions[name] == "latch":  # a document may latch it instead
                return self._latch(name)
            self.pause, self.paused_at = FAULT_CODES[name], now_s
            return self._off(self.pause)
        return None

    def _connect(self, now_s: int, voltage_mV: int, temperature_dC: int) -> StepOutput | None:
        if voltage_mV < self.no_battery_mV:
            if self.actions["no_battery"] == "latch":
                return self._latch("no_battery")
            return self._off(FAULT_CODES["no_battery"])
        if voltage_mV > self.cells_above_mV:
            return self._latch("wrong_cell_count")
        self.charge_mAs = 0
        if voltage_mV < self.doc["precharge"]["below_voltage_mV"]:
            self._enter(_PRECHARGE, 0, now_s, temperature_dC)
        else:
            self._begin_charge(now_s, temperature_dC)
        return None

    def _precharge(self, now_s: int, voltage_mV: int, temperature_dC: int) -> StepOutput:
        pre = self.doc["precharge"]
        if voltage_mV >= pre["below_voltage_mV"]:
            self._enter(_STAGE, 0, now_s, temperature_dC)
            return self._outputs(temperature_dC)
        if now_s - self.stage_start >= pre["timer_s"]:
            return self._latch("stage_timer")
        return StepOutput(pre["below_voltage_mV"],
                          self._limit_mA(pre["current_mA"], temperature_dC), KIND_CODES[
                              "precharge"], 0)

    def _outputs(self, temperature_dC: int) -> StepOutput:
        stage = self.doc["stages"][self.index]
        return StepOutput(self._target_mV(stage, temperature_dC),
                          self._limit_mA(stage["current_mA"], temperature_dC),
                          KIND_CODES[stage["kind"]], 0)

    def _guards(self, stage: dict[str, Any], at_cv: bool, current_mA: int,
                temperature_dC: int) -> str | None:
        cap, _ = _exit_value(stage, "charge_above")
        if cap is not None and self.charge_mAs > cap * 3600:
            return "charge_above"
        rise, _ = _exit_value(stage, "current_rising")
        if at_cv:
            if rise is not None and self.min_current is not None and (
                    current_mA > self.min_current + rise):
                return "current_rising"
            if self.min_current is None or current_mA < self.min_current:
                self.min_current = current_mA
        warm, _ = _exit_value(stage, "temperature_rise")
        if warm is not None and temperature_dC - self.stage_temperature > warm:
            return "temperature_rise"
        return None

    def _ended(self, stage: dict[str, Any], at_cv: bool, elapsed: int, voltage_mV: int,
               current_mA: int, adjust: int, target: int) -> str | None:
        """The ``then`` of the first exit that is met, or None."""
        v_exit, v_then = _exit_value(stage, "voltage_reached")
        if v_exit is not None and voltage_mV >= min(v_exit + adjust, target):
            return v_then
        i_exit, i_then = _exit_value(stage, "current_below")
        if i_exit is not None and at_cv and current_mA < i_exit:
            return i_then
        t_exit, t_then = _exit_value(stage, "duration")
        if t_exit is not None and elapsed >= t_exit:
            return t_then
        return None

    def _stage(self, now_s: int, voltage_mV: int, current_mA: int,
               temperature_dC: int) -> StepOutput:
        stage = self.doc["stages"][self.index]
        target = self._target_mV(stage, temperature_dC)
        adjust = self._adjust_mV(temperature_dC) if stage["compensated"] else 0
        at_cv = voltage_mV >= target - CV_BAND_MV_PER_CELL * self.cells
        guard = self._guards(stage, at_cv, current_mA, temperature_dC)
        if guard is not None:
            return self._latch(guard)
        elapsed = now_s - self.stage_start
        then = self._ended(stage, at_cv, elapsed, voltage_mV, current_mA, adjust, target)
        if then == "stop" or (then == "next" and self.index + 1 >= len(self.doc["stages"])):
            self.mode, self.restart_since = _DONE, None
            return self._off()
        if then == "next":
            self._enter(_STAGE, self.index + 1, now_s, temperature_dC)
            return self._outputs(temperature_dC)
        if stage["timer_s"] is not None and elapsed >= stage["timer_s"]:
            return self._latch("stage_timer")
        restart = self.doc["restart"]
        if _holds(stage) and restart["condition"] == "float_below" and self._restart_due(
                voltage_mV < restart["voltage_mV"], now_s):
            self._begin_charge(now_s, temperature_dC)
        return self._outputs(temperature_dC)

    def _done(self, now_s: int, voltage_mV: int, temperature_dC: int) -> StepOutput | None:
        """Off after a stop; None once the restart rule has begun a new charge."""
        if voltage_mV < self.no_battery_mV:  # taken off: the next battery is a new connection
            self.mode = _START
            return self._off(FAULT_CODES["no_battery"])
        restart = self.doc["restart"]
        if restart["condition"] == "rest_below" and self._restart_due(
                voltage_mV < restart["voltage_mV"], now_s):
            self._begin_charge(now_s, temperature_dC)
            return None
        return self._off()
