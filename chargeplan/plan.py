"""Output models: a charge plan with its stages, exits, interlocks, findings and trace.

Plain dataclasses of floats whose names carry their unit (``voltage_v``,
``current_a``, ``duration_s``, ``temperature_c``). The setpoint document
(:mod:`chargeplan.firmware.setpoints`) is the integer form of the same plan.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from enum import StrEnum
from typing import Any

__all__ = [
    "EXIT_THEN",
    "ChargePlan",
    "Compensation",
    "Exit",
    "ExitKind",
    "Finding",
    "Interlocks",
    "PlannedBattery",
    "Quantised",
    "Severity",
    "Stage",
    "StageEstimate",
    "StageKind",
    "TraceEntry",
]


class StageKind(StrEnum):
    """Stage kinds, in the trade's words."""

    PRECHARGE = "precharge"
    DESULFATION = "desulfation"
    BULK = "bulk"
    ABSORPTION = "absorption"
    EQUALIZATION = "equalization"
    FLOAT = "float"
    STORAGE_HOLD = "storage_hold"

    @property
    def label(self) -> str:
        return {"precharge": "pre-charge", "storage_hold": "storage hold"}.get(
            self.value, self.value
        )


#: Stages that hold a lead-acid battery above its absorption voltage.
HIGH_VOLTAGE_STAGES = frozenset({StageKind.EQUALIZATION, StageKind.DESULFATION})


class ExitKind(StrEnum):
    """What ends a stage."""

    VOLTAGE_REACHED = "voltage_reached"  # terminal voltage rises to the value
    CURRENT_BELOW = "current_below"  # current falls below the value (tail current)
    DURATION = "duration"  # the stage has run this long
    # Guards: each ends the charge with a fault (``then="fault"``) when what it watches goes wrong.
    CHARGE_ABOVE = "charge_above"  # Ah put in since the charge began exceeds the value
    CURRENT_RISING = "current_rising"  # at constant voltage, current rose the value (A) above
    #                                    the lowest current of this stage: thermal runaway sign
    TEMPERATURE_RISE = "temperature_rise"  # battery temperature rose the value (K) above its
    #                                        temperature when this stage began


#: What follows an exit: the next stage, a normal stop, or a fault (stop and report).
EXIT_THEN = ("next", "stop", "fault")


@dataclass(frozen=True, slots=True)
class Exit:
    kind: ExitKind
    value: float  # V, A, s, Ah or K by kind (see ``unit``)
    then: str = "next"  # one of EXIT_THEN

    @property
    def unit(self) -> str:
        return {"voltage_reached": "V", "current_below": "A", "duration": "s",
                "charge_above": "Ah", "current_rising": "A", "temperature_rise": "K"}[self.kind]


@dataclass(frozen=True, slots=True)
class StageEstimate:
    """What the physics simulation expects of a stage (chargeplan.estimate)."""

    duration_s: float | None  # None for a hold stage (it runs until disconnected)
    charge_ah: float  # for a hold stage: per day
    energy_wh: float  # for a hold stage: per day
    end_current_a: float  # for a hold stage: its standing current after a day
    per_day: bool = False


@dataclass(slots=True)
class Stage:
    kind: StageKind
    voltage_v: float  # the limit (constant current) or regulation voltage (constant voltage)
    current_a: float  # the current limit
    exits: list[Exit] = field(default_factory=list)
    timer_s: float | None = None  # safety timer: still running then = fault, stop charging
    purpose: str = ""
    compensated: bool = False  # voltage follows the temperature compensation
    estimate: StageEstimate | None = None  # set by chargeplan.estimate


@dataclass(frozen=True, slots=True)
class Compensation:
    """Lead-acid voltage compensation, for firmware with a probe."""

    coefficient_v_per_k_per_cell: float
    reference_c: float
    range_min_c: float
    range_max_c: float


@dataclass(slots=True)
class Interlocks:
    charge_temperature_min_c: float
    charge_temperature_max_c: float
    cell_voltage_max_v: float
    battery_voltage_max_v: float
    current_max_a: float
    cool_zone_below_c: float | None = None  # below this, current at most cool_zone_current_max_a
    cool_zone_current_max_a: float | None = None
    warm_zone_above_c: float | None = None  # above this, cell voltage at most warm_zone_cell_...
    warm_zone_cell_voltage_max_v: float | None = None


class Severity(StrEnum):
    INFO = "info"
    WARNING = "warning"
    REFUSAL = "refusal"


@dataclass(frozen=True, slots=True)
class Finding:
    severity: Severity
    rule_id: str
    message: str


@dataclass(frozen=True, slots=True)
class TraceEntry:
    rule_id: str
    target: str  # what was decided: "absorption.voltage", "cells_in_series", ...
    text: str  # the decision and its arithmetic


@dataclass(frozen=True, slots=True)
class Quantised:
    """A setpoint moved onto the channel's step: what was asked, what is encoded."""

    what: str  # "bulk.voltage", "absorption.exit_current", ...
    requested: float
    encoded: float
    unit: str  # "V" or "A"


@dataclass(frozen=True, slots=True)
class PlannedBattery:
    name: str
    profile_id: str
    chemistry: str
    family: str
    profile_name: str
    cells_in_series: int
    capacity_ah: float
    nominal_voltage_v: float
    temperature_c: float
    state_of_charge_pct: float | None  # None when nothing was measured
    storage_s: float | None


@dataclass(slots=True)
class ChargePlan:
    battery: PlannedBattery
    stages: list[Stage]
    interlocks: Interlocks
    compensation: Compensation | None
    findings: list[Finding]
    trace: list[TraceEntry]
    cautions: list[str]
    finish: str  # what happens after the last stage: "hold" or "stop"
    estimated: bool = False  # the stages carry physics estimates
    quantisation: list[Quantised] = field(default_factory=list)  # rule CP405's changes
    temperature_table: list[Any] | None = None  # chargeplan.firmware.tables rows, when made
    table_step_c: float | None = None
    program: Any | None = None  # chargeplan.firmware.charge_program.ProgramRules, when made

    def total_estimate(self) -> tuple[float, float, float] | None:
        """(seconds, Ah, Wh) of the stages that end, or None before estimation."""
        if not self.estimated:
            return None
        timed = [s.estimate for s in self.stages if s.estimate and not s.estimate.per_day]
        return (
            sum(e.duration_s or 0.0 for e in timed),
            sum(e.charge_ah for e in timed),
            sum(e.energy_wh for e in timed),
        )

    def stage(self, kind: StageKind | str) -> Stage | None:
        """The first stage of ``kind``, or None."""
        for stage in self.stages:
            if stage.kind == kind:
                return stage
        return None

    @property
    def kinds(self) -> list[StageKind]:
        return [stage.kind for stage in self.stages]

    def summary(self) -> str:
        """The plan in one sentence."""
        steps = " → ".join(stage.kind.label for stage in self.stages)
        tail = "then stop" if self.finish == "stop" else "and hold"
        b = self.battery
        return (
            f"{b.profile_name}, {b.cells_in_series} cells, {b.capacity_ah:g} Ah at "
            f"{b.temperature_c:g} °C: {steps}, {tail}."
        )
