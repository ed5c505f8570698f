"""Round sheets: a printable checklist per round and bay (Markdown and HTML), and the
readings.csv template that matches them, which ``chargeplan storage --readings`` reads back
as it is (rows left blank were not measured).

The sheets' lines are made column by column, each text once per distinct key of what it
depends on (:mod:`chargeplan.render.columns`); the templates lay out each sheet, and its
table's rows are written here, so thousands of lines cost no template call each."""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache
from typing import TYPE_CHECKING, Any, NamedTuple

import numpy as np

from chargeplan.planners.readings import REST_HOURS
from chargeplan.planners.storage import StoragePlan
from chargeplan.planners.storage_kernel import CHARGES, Act, Kind
from chargeplan.render.columns import Column, by_key, csv_lines, csv_text, distinct, floats, pack
from chargeplan.render.storage_sections import ELECTROLYTE_EVERY

if TYPE_CHECKING:
    from chargeplan.render.storage_docs import FleetTexts

__all__ = ["READINGS_COLUMNS", "SHEET_VISITS_MAX", "Sheet", "expected_rest_voltages",
           "readings_template", "round_sheets", "sheets"]

#: Visits the sheets list at most, from the first round on; later rounds come from the next
#: run, which takes this round's readings (they change the plan anyway).
SHEET_VISITS_MAX = 20_000
READINGS_COLUMNS = ("date", "battery", "owner", "bay", "expected_rest_voltage", "rest_voltage",
                    "state_of_charge", "electrolyte_level_ok", "specific_gravity",
                    "terminals_case_ok", "returned_to_bay", "notes")


class Line(NamedTuple):
    battery: str
    owner: str
    location: str
    action: str
    charger: str
    expected: str
    checks: tuple[str, ...] = ()
    notes: str = ""  # the inventory's notes and extra columns ("berth: 9; keep upright")


@dataclass
class Sheet:
    date: str
    bay: str
    round_number: int
    lines: list[Line]
    #: the profiles of the batteries on the sheet (the fleet's own profile objects, each
    #: once): the sheet carries their cautions
    profiles: tuple[Any, ...] = ()


def _checks(plan: StoragePlan, k: int, round_number: int) -> tuple[str, ...]:
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
    return tuple(out)


def expected_rest_voltages(plan: StoragePlan, visits: np.ndarray) -> np.ndarray:
    """``plan.expected_rest_v(k)`` for each of ``visits`` at once: the rested voltage the
    predicted charge means (the profile's table), NaN where a rest voltage says nothing
    (an unknown charge, LiFePO4's flat curve, a battery on a maintainer)."""
    from chargeplan.physics.ocv import ocv_from_soc
    from chargeplan.planners.storage_intake import flat_reading

    v, f = plan.visits, plan.fleet
    b, soc = v.battery[visits], v.soc_before[visits].astype(np.float64)
    kind = plan.profile_first[b]  # each profile by the first battery that has it
    out = np.full(len(visits), np.nan)
    shown = np.isfinite(soc) & (v.act[visits] != Act.MAINTAINER)
    for i in np.unique(plan.profile_first).tolist():
        rows = np.flatnonzero(shown & (kind == i))
        profile = f.profiles[i]
        levels, which = np.unique(soc[rows], return_inverse=True)
        flat = np.array([flat_reading(profile, x) for x in levels.tolist()], dtype=bool)
        rows = rows[~flat[which.ravel()]] if len(rows) else rows
        out[rows] = ocv_from_soc(soc[rows], profile.rest_voltage.table) * f.cells[b[rows]]
    return out


def _expected(plan: StoragePlan, kept: np.ndarray) -> Column:
    shown = floats(expected_rest_voltages(plan, kept), ".2f", blank="pack display (LiFePO4)",
                   suffix=f" V after {REST_HOURS:g} h rest")
    maintainer = plan.visits.act[kept] == Act.MAINTAINER
    return Column([*shown.texts, "read the maintainer's display"],
                  np.where(maintainer, len(shown.texts), shown.codes))


def _location(plan: StoragePlan, k: int) -> str:
    """Where the battery is, and where it goes: to its charger (and back, says the action),
    or, moved against the freeze, from its bay to the warm room."""
    v = plan.visits
    where, home = plan.bay_names[int(v.where[k])], plan.bay_names[int(v.bay[k])]
    if where == home:
        return home
    return f"{home} -> {where}" if v.act[k] in CHARGES else f"{where} -> {home}"


def _lines(plan: StoragePlan, kept: np.ndarray, round_of: np.ndarray,
           texts: FleetTexts) -> list[Line]:
    """The sheets' line of each of the visits ``kept`` (``round_of``: each one's round, from
    0); each text made once per distinct key of what it depends on."""
    from chargeplan.render.storage_docs import action_column, charge_columns

    v, f = plan.visits, plan.fleet
    b = v.battery[kept]
    rounds = dict(zip(v.day[kept].tolist(), round_of.tolist(), strict=True))
    checks = by_key(kept, pack(texts.chemistry.codes[b], round_of % ELECTROLYTE_EVERY == 0,
                               v.where[kept], v.bay[kept], np.isin(v.act[kept], CHARGES),
                               f.lead[b]),
                    lambda k: _checks(plan, k, rounds[int(v.day[k])]))
    location = by_key(kept, pack(v.where[kept], v.bay[kept], np.isin(v.act[kept], CHARGES)),
                      lambda k: _location(plan, k))
    columns = [texts.ids.of(b), texts.owners.of(b), location, action_column(plan, kept, texts),
               charge_columns(plan, kept)[0], _expected(plan, kept)]
    every = plan.rows.column("notes")
    notes = distinct(every[i] for i in b.tolist())
    return list(map(Line._make, zip(*(c.values() for c in [*columns, checks, notes]),
                                    strict=True)))


def sheets(plan: StoragePlan, texts: FleetTexts | None = None) -> tuple[list[Sheet], int]:
    """The sheets, per visit day and bay, and how many visits were left for a later run
    (``texts``: the plan's FleetTexts, when made already)."""
    from chargeplan.render.storage_docs import FleetTexts

    v = plan.visits
    chosen = np.flatnonzero(v.kind != Kind.RELEASE)
    kept = chosen[:SHEET_VISITS_MAX]
    visited = np.zeros(len(plan.dates), dtype=bool)
    visited[v.day[chosen]] = True
    round_of = (np.cumsum(visited) - 1)[v.day[kept]]  # the rounds, from 0, in order
    out: dict[tuple[int, int], Sheet] = {}
    present = _profiles_present(plan, kept)
    for d, b, n, line in zip(v.day[kept].tolist(), v.bay[kept].tolist(), round_of.tolist(),
                             _lines(plan, kept, round_of, texts or FleetTexts(plan)),
                             strict=True):
        sheet = out.get((d, b))
        if sheet is None:
            sheet = out[(d, b)] = Sheet(plan.dates[d].isoformat(), plan.bay_names[b], n + 1, [],
                                        present[(d, b)])
        sheet.lines.append(line)
    return [out[key] for key in sorted(out)], len(chosen) - len(kept)


def _owner(line: Line) -> str:
    """The owner cell: the owner, then the inventory's notes for staff to see."""
    return f"{line.owner} (note: {line.notes})" if line.notes else line.owner


def _profiles_present(plan: StoragePlan, kept: np.ndarray) -> dict[tuple[int, int], tuple]:
    """For each (day, bay) of the visits ``kept``, the profiles of its batteries, each once
    (one np.unique over the visits, not a loop over them)."""
    v, f = plan.visits, plan.fleet
    kind = plan.profile_first  # each profile by the first battery that has it
    if not len(kept):
        return {}
    triples = np.unique(np.stack([v.day[kept].astype(np.int64), v.bay[kept].astype(np.int64),
                                  kind[v.battery[kept]].astype(np.int64)]), axis=1)
    out: dict[tuple[int, int], list[Any]] = {}
    for d, b, i in triples.T.tolist():
        out.setdefault((d, b), []).append(f.profiles[i])
    return {key: tuple(found) for key, found in out.items()}


def _caution_groups() -> Any:
    """``cautions_of(profiles)``: the cautions of the profiles on a sheet, grouped by family
    (chargeplan.cautions.caution_groups), made once per distinct set of profiles."""
    from chargeplan.cautions import caution_groups

    made: dict[tuple[int, ...], list[tuple[str, list[str]]]] = {}

    def cautions_of(profiles: tuple[Any, ...]) -> list[tuple[str, list[str]]]:
        key = tuple(sorted(id(p) for p in profiles))
        if key not in made:
            made[key] = caution_groups(profiles)
        return made[key]

    return cautions_of


def _md_bodies(shown: list[Sheet]) -> list[str]:
    """Each sheet's table rows in Markdown, every text made inert (render.markdown.md_text:
    ids, owners, notes, bay and profile names are user text), each distinct text once."""
    from chargeplan.render.markdown import md_text

    text = lru_cache(maxsize=None)(md_text)  # most texts recur on many lines
    checks = lru_cache(maxsize=None)(lambda c: "; ".join(f"[ ] {text(x)}" for x in c))
    return ["".join(f"| [ ] | {text(line.battery)} | {text(_owner(line))} | "
                    f"{text(line.location)} | {text(line.action)} | {text(line.charger)} | "
                    f"{text(line.expected)} | ______ | {checks(line.checks)} |\n"
                    for line in sheet.lines) for sheet in shown]


def _html_bodies(shown: list[Sheet]) -> list[Any]:
    """Each sheet's table rows in HTML, every text escaped (markupsafe)."""
    from markupsafe import Markup, escape

    text = lru_cache(maxsize=None)(lambda t: str(escape(t)))  # most texts recur on many lines
    checks = lru_cache(maxsize=None)(lambda c: "".join(
        f'<span class="box">&#9744;</span> {text(x)}<br>' for x in c))
    return [Markup("".join(
        f'<tr><td class="box">&#9744;</td><td>{text(line.battery)}</td>'
        f"<td>{text(_owner(line))}</td><td>{text(line.location)}</td>"
        f"<td>{text(line.action)}</td><td>{text(line.charger)}</td>"
        f'<td>{text(line.expected)}</td><td class="blank"></td><td>{checks(line.checks)}</td>'
        "</tr>\n" for line in sheet.lines)) for sheet in shown]


def round_sheets(plan: StoragePlan, *, html: bool = False,
                 found: tuple[list[Sheet], int] | None = None) -> str:
    """The round sheets, Markdown or HTML (``found``: :func:`sheets` of the plan, when made
    already). The template lays out each sheet; its table's rows, one line per battery
    (thousands of them), are written here, each distinct text formatted once."""
    from chargeplan.render.storage_docs import _environment

    shown, left = found or sheets(plan)
    bodies = _html_bodies(shown) if html else _md_bodies(shown)
    name = "storage_rounds.html.j2" if html else "storage_rounds.md.j2"
    from chargeplan.cautions import DEFERRAL

    return str(_environment(html).get_template(name).render(
        site=plan.site_file.site.name, sheets=list(zip(shown, bodies, strict=True)), left=left,
        rest_hours=REST_HOURS, cautions_of=_caution_groups(), deferral=DEFERRAL))


def readings_template(plan: StoragePlan, *,
                      found: tuple[list[Sheet], int] | None = None) -> str:
    """One row per battery on the sheets, the measured columns blank (``found``: as for
    :func:`round_sheets`)."""
    shown, _left = found or sheets(plan)
    lines = [line for sheet in shown for line in sheet.lines]
    per_line = np.repeat(np.arange(len(shown)), [len(sheet.lines) for sheet in shown])
    expected = (line.expected.split(" after")[0] if line.expected.endswith("rest") else ""
                for line in lines)
    return csv_text(READINGS_COLUMNS, csv_lines([
        Column([sheet.date for sheet in shown], per_line), distinct(line[0] for line in lines),
        distinct(line[1] for line in lines), Column([sheet.bay for sheet in shown], per_line),
        distinct(expected), *[Column.constant("", len(lines))] * 7]))
