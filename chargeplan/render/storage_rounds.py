"""Round sheets: a printable checklist per round and bay (Markdown and HTML), and the
readings.csv template that matches them, which ``chargeplan storage --readings`` reads back
as it is (rows left blank were not measured)."""

from __future__ import annotations

import csv
import io
from dataclasses import dataclass, field

import numpy as np

from chargeplan.csvfile import csv_row
from chargeplan.planners.readings import REST_HOURS
from chargeplan.planners.storage import StoragePlan
from chargeplan.planners.storage_kernel import CHARGES, Act, Kind
from chargeplan.render.storage_sections import ELECTROLYTE_EVERY

__all__ = ["READINGS_COLUMNS", "SHEET_VISITS_MAX", "Sheet", "readings_template", "round_sheets",
           "sheets"]

#: Visits the sheets list at most, from the first round on; later rounds come from the next
#: run, which takes this round's readings (they change the plan anyway).
SHEET_VISITS_MAX = 20_000
READINGS_COLUMNS = ("date", "battery", "owner", "bay", "expected_rest_voltage", "rest_voltage",
                    "electrolyte_level_ok", "specific_gravity", "terminals_case_ok",
                    "returned_to_bay", "notes")


@dataclass
class Line:
    battery: str
    owner: str
    location: str
    action: str
    charger: str
    expected: str
    checks: list[str] = field(default_factory=list)


@dataclass
class Sheet:
    date: str
    bay: str
    round_number: int
    lines: list[Line]


def _checks(plan: StoragePlan, k: int, round_number: int) -> list[str]:
    v, f = plan.visits, plan.fleet
    i = int(v.battery[k])
    out = []
    if plan.chemistry[i] == "flooded" and round_number % ELECTROLYTE_EVERY == 0:
        out.append("electrolyte level and SG")
    out.append("terminals and case")
    if int(v.where[k]) != int(v.bay[k]) and v.act[k] in CHARGES:
        out.append(f"returned to {plan.bay_names[int(v.bay[k])]}")
    if f.lead[i] and plan.site_file.site.warm_room == plan.bay_names[int(v.where[k])] and (
            v.act[k] in CHARGES):
        out.append("warm room ventilated")
    return out


def _line(plan: StoragePlan, k: int, round_number: int) -> Line:
    from chargeplan.render.storage_docs import action_text, charge_text

    v = plan.visits
    row = plan.rows[int(v.battery[k])]
    where, home = plan.bay_names[int(v.where[k])], plan.bay_names[int(v.bay[k])]
    expected = plan.expected_rest_v(k)
    if v.act[k] == Act.MAINTAINER:
        shown = "read the maintainer's display"
    elif np.isfinite(expected):
        shown = f"{expected:.2f} V after {REST_HOURS:g} h rest"
    else:
        shown = "pack display (LiFePO4)"
    return Line(row.id, row.owner, home if where == home else f"{home} -> {where}",
                action_text(plan, k), charge_text(plan, k), shown,
                _checks(plan, k, round_number))


def sheets(plan: StoragePlan) -> tuple[list[Sheet], int]:
    """The sheets, per visit day and bay, and how many visits were left for a later run."""
    v = plan.visits
    chosen = np.flatnonzero(v.kind != Kind.RELEASE)
    kept = chosen[:SHEET_VISITS_MAX]
    rounds = {d: n for n, d in enumerate(sorted(set(v.day[chosen].tolist())))}
    out: dict[tuple[int, int], Sheet] = {}
    for k in kept:
        d, b = int(v.day[k]), int(v.bay[k])
        sheet = out.setdefault((d, b), Sheet(plan.dates[d].isoformat(), plan.bay_names[b],
                                             rounds[d] + 1, []))
        sheet.lines.append(_line(plan, int(k), rounds[d]))
    return [out[key] for key in sorted(out)], len(chosen) - len(kept)


def round_sheets(plan: StoragePlan, *, html: bool = False) -> str:
    from chargeplan.render.storage_docs import _environment

    found, left = sheets(plan)
    name = "storage_rounds.html.j2" if html else "storage_rounds.md.j2"
    return str(_environment(html).get_template(name).render(
        site=plan.site_file.site.name, sheets=found, left=left, rest_hours=REST_HOURS))


def readings_template(plan: StoragePlan) -> str:
    """One row per battery on the sheets, the measured columns blank."""
    out = io.StringIO()
    writer = csv.writer(out, lineterminator="\n")
    writer.writerow(READINGS_COLUMNS)
    found, _left = sheets(plan)
    for sheet in found:
        for line in sheet.lines:
            expected = line.expected.split(" after")[0] if line.expected.endswith("rest") else ""
            csv_row(writer, (sheet.date, line.battery, line.owner, sheet.bay, expected, "", "",
                             "", "", "", ""))
    return out.getvalue()
