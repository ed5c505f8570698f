"""One battery's charge, simulated on its plan's own stages: a summary and a time series."""

from __future__ import annotations

import csv
import io
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from chargeplan.cautions import caution_text
from chargeplan.csvfile import csv_row
from chargeplan.fmt import amps, duration, num
from chargeplan.plan import ChargePlan, Severity
from chargeplan.profiles import ProfileSet

__all__ = ["SimulationRun", "simulate_file", "simulate_plan"]

CSV_COLUMNS = ("time_s", "stage", "voltage_V", "current_A", "state_of_charge_pct")


@dataclass
class SimulationRun:
    plan: ChargePlan
    series: dict[str, np.ndarray]

    @property
    def rows(self) -> int:
        return int(self.series["time_s"].size)

    def summary(self) -> str:
        lines = [f"{self.plan.battery.name}: {self.plan.summary()}"]
        for stage in self.plan.stages:
            e = stage.estimate
            if e is None:
                continue
            if e.per_day:
                lines.append(f"  {stage.kind.label:<13} holds; settles near "
                             f"{amps(e.end_current_a)}, {num(e.charge_ah, 2)} Ah and "
                             f"{num(e.energy_wh, 0)} Wh the first day")
            elif e.duration_s is not None:
                lines.append(f"  {stage.kind.label:<13} {duration(e.duration_s):>12}  "
                             f"{num(e.charge_ah, 2):>7} Ah  {num(e.energy_wh, 0):>6} Wh  "
                             f"ends at {amps(e.end_current_a)}")
        total = self.plan.total_estimate()
        if total:
            lines.append(f"  {'total':<13} {duration(total[0]):>12}  {num(total[1], 2):>7} Ah  "
                         f"{num(total[2], 0):>6} Wh")
        soc = self.series["soc"]
        if soc.size:
            lines.append(f"  state of charge {num(soc[0] * 100, 0)} % -> "
                         f"{num(soc[-1] * 100, 0)} %")
        lines.append("  (an estimate from the battery model: the stages still end on their "
                     "exits, not on these times)")
        if self.plan.findings:
            marks = {Severity.INFO: "-", Severity.WARNING: "!", Severity.REFUSAL: "X"}
            lines += ["", "Findings", *(f"  {marks[f.severity]} {f.message} [{f.rule_id}]"
                                        for f in self.plan.findings)]
        return "\n".join(lines) + "\n\n" + caution_text(self.plan.cautions)

    def csv(self) -> str:
        out = io.StringIO()
        writer = csv.writer(out, lineterminator="\n")
        csv_row(writer, CSV_COLUMNS)
        kinds = [stage.kind.value for stage in self.plan.stages]
        s = self.series
        for t, k, v, i, soc in zip(s["time_s"], s["stage"], s["voltage_v"], s["current_a"],
                                   s["soc"], strict=True):
            csv_row(writer, (f"{t:.0f}", kinds[int(k)], f"{v:.4f}", f"{i:.4f}",
                             f"{soc * 100:.3f}"))
        return out.getvalue()


def simulate_plan(plan: ChargePlan, *, profiles: ProfileSet | None = None) -> SimulationRun:
    """Estimate ``plan`` and keep its time series."""
    from chargeplan.estimate import estimate_plans

    result = estimate_plans([plan], profiles=profiles, record=True)
    series = result.series
    stopped = next((i for i, s in enumerate(plan.stages) if s.estimate is None), None)
    if stopped is not None and series:  # the charger stops on a timer fault before it
        keep = series["stage"] < stopped
        series = {key: values[keep] for key, values in series.items()}
    return SimulationRun(plan, series)


def simulate_file(path: str | Path, *, profiles: ProfileSet | None = None) -> SimulationRun:
    from chargeplan.api import plan_file

    return simulate_plan(plan_file(path, profiles=profiles, estimate=False), profiles=profiles)
