"""The working state rules read and write while a plan is made."""

from __future__ import annotations

from dataclasses import dataclass, field

from chargeplan.errors import InputError, PlanRefused
from chargeplan.model.battery import BatteryFile
from chargeplan.model.profile import Profile
from chargeplan.plan import (
    Compensation,
    Finding,
    Interlocks,
    Quantised,
    Severity,
    Stage,
    StageKind,
    TraceEntry,
)

__all__ = ["Context", "Settings"]


@dataclass(slots=True)
class Settings:
    """Setpoints per cell (V/cell) and per battery (A, s) at the reference temperature."""

    absorption_v_cell: float
    float_v_cell: float | None
    storage_v_cell: float
    equalization_v_cell: float | None
    desulfation_v_cell: float | None
    precharge_below_v_cell: float | None  # None: no pre-charge stage (lead-acid)
    precharge_a: float | None
    bulk_a: float
    tail_a: float
    max_a: float  # the envelope's (or the maker's) highest charge current
    equalization_a: float | None
    desulfation_a: float | None
    absorption_time_s: float
    equalization_time_s: float | None
    desulfation_time_s: float | None
    coefficient_v_per_k_per_cell: float  # 0 for lithium
    cell_voltage_max_v: float  # the profile envelope's (never above the built-in one)


@dataclass(slots=True)
class Context:
    """Everything the rules know, and what they have decided so far."""

    battery_file: BatteryFile
    profile: Profile
    file: str | None = None
    cells: int = 0
    nominal_voltage_v: float = 0.0
    capacity_ah: float = 0.0
    temperature_c: float = 25.0
    soc_pct: float | None = None  # measured or given; None when unknown
    rest_v_cell: float | None = None
    freezing_point_c: float | None = None
    target: str = "full"  # "full" or "storage"
    finish: str = "stop"  # "hold" or "stop"
    settings: Settings | None = None
    stages: list[Stage] = field(default_factory=list)
    compensation: Compensation | None = None
    interlocks: Interlocks | None = None
    findings: list[Finding] = field(default_factory=list)
    trace: list[TraceEntry] = field(default_factory=list)
    cautions: list[str] = field(default_factory=list)
    quantisation: list[Quantised] = field(default_factory=list)
    rule_id: str = ""  # the rule now running, set by the planner

    # -- what the battery is -------------------------------------------------
    @property
    def lithium(self) -> bool:
        return self.profile.family == "lithium"

    @property
    def storage_s(self) -> float | None:
        storage = self.battery_file.storage
        return storage.duration_s if storage is not None else None

    @property
    def storage_planned(self) -> bool:
        """The battery goes into storage long enough for the profile's storage plan."""
        storage = self.storage_s
        return storage is not None and storage >= self.profile.charge.storage_after.value

    def charge_window(self) -> tuple[float, float]:
        """The charge-temperature window (°C): the profile's, inside its envelope."""
        p = self.profile
        return (
            max(p.temperature.charge_min.value, p.envelope.charge_temperature_min.value),
            min(p.temperature.charge_max.value, p.envelope.charge_temperature_max.value),
        )

    def corrected_gravity(self) -> float:
        """The hydrometer reading corrected to the tables' 80 °F, at the battery's temperature."""
        from chargeplan.physics.electrolyte import specific_gravity_corrected

        reading = self.battery_file.state.specific_gravity
        assert reading is not None
        return float(specific_gravity_corrected(reading, self.temperature_c))

    def storage_soc_pct(self) -> float:
        """The state of charge the storage voltage stands for, by the profile's table."""
        from chargeplan.physics.ocv import soc_from_ocv

        assert self.settings is not None
        return float(soc_from_ocv(self.settings.storage_v_cell, self.profile.rest_voltage.table))

    @property
    def soc_assumed_pct(self) -> float:
        """The state of charge timers plan from: the known one, else flat (the longest)."""
        return self.soc_pct if self.soc_pct is not None else 0.0

    def stage(self, kind: StageKind) -> Stage | None:
        return next((s for s in self.stages if s.kind == kind), None)

    # -- what the rules say --------------------------------------------------
    def note(self, target: str, text: str) -> None:
        """Record a decision and its arithmetic in the trace."""
        self.trace.append(TraceEntry(self.rule_id, target, text))

    def info(self, message: str) -> None:
        self.findings.append(Finding(Severity.INFO, self.rule_id, message))

    def warn(self, message: str) -> None:
        self.findings.append(Finding(Severity.WARNING, self.rule_id, message))

    def refuse(self, reason: str) -> PlanRefused:
        """A refusal to raise: ``raise ctx.refuse("...")``."""
        self.findings.append(Finding(Severity.REFUSAL, self.rule_id, reason))
        return PlanRefused(
            reason, rule_id=self.rule_id, findings=self.findings, trace=self.trace
        )

    def bad_input(self, field: str, problem: str, fix: str) -> InputError:
        """An input error found by a rule: ``raise ctx.bad_input(...)``."""
        return InputError(problem, file=self.file, field=field, fix=fix)
