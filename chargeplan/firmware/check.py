"""Checking a setpoint file before it is flashed: schema, digest or CRC, the chemistry's hard
limits, the order of its values, and (when given) the battery file and charger channel it is
for. What a firmware team runs in its own CI.

This is an independent look at the numbers: it reads only the file, the battery file and
the channel, and its own table of limits (:mod:`chargeplan.firmware.limits`), never the
rules or the profiles that made the plan. An image is decoded into the document form and
gets the same checks as JSON.

The checks are :data:`CHECKS`, a tuple of small named functions, each with its code
(``CK`` and three digits), each yielding the violations it finds. To add one, write a
function that takes a :class:`Subject` and yields one line per violation, mark it with
``@code("CK...")`` and append it to :data:`CHECKS`. Codes: 1xx the form of the file, 2xx
its identity, 3xx stages, 4xx interlocks and zones, 5xx compensation, 6xx the temperature
table, 7xx the battery file, 8xx the charger channel.
"""

from __future__ import annotations

import itertools
import math
from collections.abc import Callable, Iterable, Iterator
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from chargeplan.errors import InputError
from chargeplan.firmware.limits import (
    LEAD_REFERENCE_DC,
    LIMITS,
    ChemistryLimits,
    cell_count_candidates,
)
from chargeplan.model.battery import BatteryFile
from chargeplan.model.charger import ChargerChannel

__all__ = [
    "CHECKS",
    "FORM_CHECKS",
    "CheckReport",
    "Subject",
    "UserProfile",
    "Violation",
    "check_document",
    "check_file",
    "code",
    "load_channel_file",
    "read_setpoint_file",
    "read_user_profiles",
    "subject_for",
]

#: The order stages run in; a document's stages must follow it, each kind at most once.
STAGE_ORDER = ("precharge", "desulfation", "bulk", "absorption", "equalization", "float",
               "storage_hold")
_HOLDING = {"float", "storage_hold"}
_CHARGING = {"bulk", "absorption"}
_CONSTANT_VOLTAGE = {"absorption", "equalization", "desulfation"}
#: BU-403 Charging Lead Acid: do not dwell at the topping voltage for more than 48 h.
LEAD_DWELL_MAX_S = 48 * 3600
_THEN = {"next", "stop"}
_GUARDS = {"charge_above", "current_rising", "temperature_rise"}


@dataclass(frozen=True, slots=True)
class Violation:
    code: str
    text: str

    def __str__(self) -> str:
        return f"{self.text} [{self.code}]"


@dataclass
class CheckReport:
    file: str
    kind: str  # "json" or "image"
    violations: list[Violation] = field(default_factory=list)

    @property
    def ok(self) -> bool:
        return not self.violations

    @property
    def checks_run(self) -> int:
        return len(FORM_CHECKS) + len(CHECKS)


@dataclass(frozen=True)
class Subject:
    """What every check reads: the document and the facts it is held to."""

    doc: dict[str, Any]
    kind: str
    limits: ChemistryLimits
    capacity_mAh: float  # the battery file's when given (the smaller), else the document's
    battery_file: BatteryFile | None = None
    channels: tuple[tuple[str, ChargerChannel], ...] = ()
    #: the built-in chemistry the battery file's user profile names (``--profiles``)
    profile_chemistry: str | None = None

    @property
    def stages(self) -> list[dict[str, Any]]:
        return self.doc["stages"]

    @property
    def lock(self) -> dict[str, Any]:
        return self.doc["interlocks"]

    @property
    def cells(self) -> int:
        return self.doc["cells_in_series"]

    @property
    def v_max(self) -> int:
        return self.limits.cell_max_mV * self.cells

    def it(self, rate: float) -> float:
        """A C-rate in mA on this battery."""
        return rate * self.capacity_mAh

    def named(self) -> Iterator[tuple[str, dict[str, Any]]]:
        for n, stage in enumerate(self.stages, 1):
            yield f"stage {n} ({stage['kind']})", stage


CheckFunction = Callable[[Subject], Iterable[str]]


def code(check_code: str) -> Callable[[CheckFunction], CheckFunction]:
    """Mark a check function with its code."""
    def mark(function: CheckFunction) -> CheckFunction:
        function.code = check_code  # type: ignore[attr-defined]
        return function
    return mark


def _q(value: object) -> str:
    """A value from the file as a message quotes it: at most about 40 characters."""
    text = repr(value)
    return text if len(text) <= 40 else text[:37] + "..."


def _exit(stage: dict[str, Any], condition: str) -> dict[str, Any] | None:
    return next((e for e in stage["exits"] if e["condition"] == condition), None)


# --- 1xx: the form (checked first; nothing else is read when one fails) -----------------


@code("CK101")
def form_version(s: Subject) -> Iterator[str]:
    """The setpoint format version is one this checker reads."""
    from chargeplan.model import SETPOINT_VERSION

    if s.doc.get("version") not in (3, SETPOINT_VERSION):
        yield (f"version: {_q(s.doc.get('version'))} is not the setpoint format version this "
               f"chargeplan reads (3 or {SETPOINT_VERSION}); write the document again with "
               "'chargeplan plan'")


@code("CK102")
def form_stage_count(s: Subject) -> Iterator[str]:
    """At least one stage."""
    if not s.doc.get("stages"):
        yield "stages: there are none; a setpoint file needs at least one stage"


@code("CK103")
def form_cells(s: Subject) -> Iterator[str]:
    """At least one cell in series."""
    if not (isinstance(s.doc.get("cells_in_series"), int) and s.doc["cells_in_series"] >= 1):
        yield (f"cells_in_series: {_q(s.doc.get('cells_in_series'))} is not a whole number of "
               "cells of 1 or more")


@code("CK104")
def form_enumerations(s: Subject) -> Iterator[str]:
    """Every ``then``, ``finish`` and ``compensated`` holds one of its values."""
    if s.doc.get("finish") not in ("stop", "hold"):
        yield f"finish: {_q(s.doc.get('finish'))} is neither stop nor hold"
    for name, stage in s.named():
        if not isinstance(stage.get("compensated"), bool):
            yield f"{name} compensated: {_q(stage.get('compensated'))} is neither 0 nor 1"
        for e in stage.get("exits", []):
            allowed = {"fault"} if e["condition"] in _GUARDS else _THEN
            if e.get("then") not in allowed:
                yield (f"{name} {e['condition']} exit: then {_q(e.get('then'))} is not one of "
                       f"{', '.join(sorted(allowed))}")


@code("CK105")
def form_stage_values(s: Subject) -> Iterator[str]:
    """Stage voltages and currents are above zero (an image has no schema to say so)."""
    for name, stage in s.named():
        if not (stage["voltage_mV"] > 0 and stage["current_mA"] > 0):
            yield f"{name}: voltage and current must both be above zero"


FORM_CHECKS: tuple[CheckFunction, ...] = (form_version, form_stage_count, form_cells,
                                          form_enumerations, form_stage_values)


# --- 2xx: identity -----------------------------------------------------------------------


@code("CK201")
def identity_cells_agree(s: Subject) -> Iterator[str]:
    """The document's two ``cells_in_series`` fields agree."""
    inner = s.doc["battery"].get("cells_in_series")
    if inner is not None and inner != s.cells:
        yield (f"cells_in_series is {s.cells} but battery.cells_in_series is {inner}; the "
               "file was edited by hand")


@code("CK202")
def identity_nominal_voltage(s: Subject) -> Iterator[str]:
    """``nominal_voltage_mV`` is what ``cells_in_series`` cells of the chemistry make."""
    nominal = s.doc["battery"].get("nominal_voltage_mV")
    if nominal is not None and s.cells not in cell_count_candidates(nominal, s.limits):
        yield (f"battery.nominal_voltage_mV {nominal} is not what {s.cells} "
               f"{s.limits.chemistry} cells make ({s.cells * s.limits.nominal_cell_mV} mV "
               "nominal)")


@code("CK203")
def identity_chemistry_profile(s: Subject) -> Iterator[str]:
    """A built-in profile names its own chemistry."""
    chemistry, profile = s.doc["battery"]["chemistry"], s.doc["battery"].get("profile")
    if profile in LIMITS and profile != chemistry:
        yield (f"battery.chemistry is {_q(chemistry)} but battery.profile is the built-in "
               f"{profile}; the two must agree")


# --- 3xx: stages -------------------------------------------------------------------------


@code("CK301")
def stages_allowed(s: Subject) -> Iterator[str]:
    """No stage the chemistry forbids (lithium: no float, equalization or desulfation)."""
    for name, stage in s.named():
        if stage["kind"] in s.limits.forbidden_stages:
            yield f"{name} is forbidden for {s.limits.chemistry}"


@code("CK302")
def stages_in_order(s: Subject) -> Iterator[str]:
    """Stages run in the trade's order (pre-charge, desulfation, bulk, absorption,
    equalization, float, storage hold), each kind at most once."""
    ranks = [STAGE_ORDER.index(stage["kind"]) for stage in s.stages]
    if any(b <= a for a, b in itertools.pairwise(ranks)):
        yield ("stages are out of order or repeated: "
               f"{', '.join(stage['kind'] for stage in s.stages)}")


@code("CK303")
def stages_voltage_limit(s: Subject) -> Iterator[str]:
    """No stage voltage above cells x the chemistry's maximum cell voltage."""
    for name, stage in s.named():
        if stage["voltage_mV"] > s.v_max:
            yield (f"{name} voltage {stage['voltage_mV']} mV is above the "
                   f"{s.limits.chemistry} limit {s.v_max} mV ({s.limits.cell_max_mV} mV/cell x "
                   f"{s.cells})")


@code("CK304")
def stages_voltage_per_cell(s: Subject) -> Iterator[str]:
    """A stage voltage below 1 V per cell is a per-cell value written for the battery."""
    for name, stage in s.named():
        if stage["voltage_mV"] < 1000 * s.cells:
            yield (f"{name} voltage {stage['voltage_mV']} mV is "
                   f"{stage['voltage_mV'] / s.cells:.0f} mV per cell: a per-cell value "
                   "written for the whole battery?")


@code("CK305")
def stages_current_limit(s: Subject) -> Iterator[str]:
    """No stage current above the chemistry's maximum C-rate on the battery's capacity."""
    limit = s.it(s.limits.current_max_it)
    for name, stage in s.named():
        if stage["current_mA"] > limit:
            yield (f"{name} current {stage['current_mA']} mA is above the "
                   f"{s.limits.chemistry} limit {limit:.0f} mA ({s.limits.current_max_it} It "
                   f"on {s.capacity_mAh:.0f} mAh)")


@code("CK306")
def stages_within_interlocks(s: Subject) -> Iterator[str]:
    """No stage above the document's own current and battery-voltage interlocks."""
    for name, stage in s.named():
        if stage["current_mA"] > s.lock["current_max_mA"]:
            yield f"{name} current is above the current interlock"
        if stage["voltage_mV"] > s.lock["battery_voltage_max_mV"]:
            yield f"{name} voltage is above the battery voltage interlock"


@code("CK307")
def stages_end(s: Subject) -> Iterator[str]:
    """Every stage has a safety timer, except a lead-acid float or storage hold that ends a
    document which holds; lithium is never held without one."""
    for n, (name, stage) in enumerate(s.named(), 1):
        if stage["timer_s"] is not None:
            continue
        held = (not s.limits.lithium and stage["kind"] in _HOLDING and n == len(s.stages)
                and s.doc["finish"] == "hold")
        if not held:
            yield (f"{name} has no safety timer: it could run for ever at "
                   f"{stage['voltage_mV']} mV")


@code("CK308")
def stages_timer_covers_estimate(s: Subject) -> Iterator[str]:
    """A timer shorter than the stage's own estimate would fault a normal charge (to the
    second: the document rounds timers down and estimates to the nearest second)."""
    for name, stage in s.named():
        estimate = stage.get("estimated_duration_s")
        if (stage["timer_s"] is not None and estimate is not None
                and stage["timer_s"] < estimate - 1):
            yield (f"{name} timer {stage['timer_s']} s is shorter than the {estimate} s the "
                   "stage is expected to take")


@code("CK309")
def stages_lead_dwell(s: Subject) -> Iterator[str]:
    """Lead-acid: no constant-voltage stage above float for more than 48 h (BU-403)."""
    if s.limits.lithium:
        return
    for name, stage in s.named():
        timer = stage["timer_s"]
        if stage["kind"] in _CONSTANT_VOLTAGE and timer is not None and timer > LEAD_DWELL_MAX_S:
            yield f"{name} timer {timer} s is above the 48 h a battery may dwell at this voltage"


@code("CK310")
def stages_exits_in_range(s: Subject) -> Iterator[str]:
    """A voltage exit at or below the stage's own limit; a tail current not below the
    chemistry's smallest sensible tail. (A tail at or above the stage's current limit, as on
    a channel weaker than the tail, ends the stage at once: toward safety, so allowed.)"""
    tail_min = s.it(s.limits.tail_min_it)
    for name, stage in s.named():
        voltage, tail = _exit(stage, "voltage_reached"), _exit(stage, "current_below")
        if voltage and voltage["voltage_mV"] > stage["voltage_mV"]:
            yield f"{name} exits at {voltage['voltage_mV']} mV, above its own limit"
        if tail and tail["current_mA"] < tail_min:
            yield (f"{name} tail current {tail['current_mA']} mA is below "
                   f"{s.limits.tail_min_it} It ({tail_min:.0f} mA): the stage would not end")


@code("CK311")
def stages_precharge_below_bulk(s: Subject) -> Iterator[str]:
    """Pre-charge sits below bulk in voltage and current."""
    by_kind = {stage["kind"]: stage for stage in s.stages}
    pre, bulk = by_kind.get("precharge"), by_kind.get("bulk")
    if pre and bulk and pre["current_mA"] > bulk["current_mA"]:
        yield "pre-charge current is above the bulk current"
    if pre and bulk and pre["voltage_mV"] > bulk["voltage_mV"]:
        yield "pre-charge voltage is above the bulk voltage"


@code("CK312")
def stages_hold_below_charge(s: Subject) -> Iterator[str]:
    """Lead-acid float and storage hold sit below the charge voltage."""
    top = max((st["voltage_mV"] for st in s.stages if st["kind"] in _CHARGING), default=None)
    if s.limits.lithium or top is None:
        return
    for stage in s.stages:
        if stage["kind"] in _HOLDING and stage["voltage_mV"] >= top:
            yield f"{stage['kind']} voltage is at or above the absorption voltage"


@code("CK313")
def stages_lithium_stops(s: Subject) -> Iterator[str]:
    """A lithium document stops at the end; it never holds."""
    if s.limits.lithium and s.doc["finish"] != "stop":
        yield "a lithium document must stop at the end, not hold"


@code("CK314")
def stages_obey_zones(s: Subject) -> Iterator[str]:
    """Stages planned inside the cool or warm zone keep to the zone's limits."""
    planned, cool, warm = s.doc["planned_temperature_dC"], s.lock["cool_zone"], s.lock["warm_zone"]
    for name, stage in s.named():
        if cool and planned < cool["below_dC"] and stage["current_mA"] > cool["current_max_mA"]:
            yield f"{name} current is above the cool-zone limit it was planned in"
        if (warm and planned > warm["above_dC"]
                and stage["voltage_mV"] > warm["cell_voltage_max_mV"] * s.cells):
            yield f"{name} voltage is above the warm-zone limit it was planned in"


def _maker_cell_mV(s: Subject, name: str) -> float | None:
    """A maker's voltage override from the battery file, per cell in mV (None: not given)."""
    if s.battery_file is None:
        return None
    spec = getattr(s.battery_file.battery.overrides, name)
    return None if spec is None else spec.cell_volts(s.cells) * 1000


def _lead_cap_mV(s: Subject, per_cell_25: float, t_dC: int) -> float:
    """A lead-acid voltage cap at ``t_dC`` for the battery: ``per_cell_25`` at 25 degC, moved
    by the steepest accepted coefficient in the cold and the shallowest in the heat (the
    maker's, when the battery file gives one), inside the charge window (BU-410)."""
    steep, shallow = s.limits.compensation_uV or (0, 0)
    maker = (s.battery_file.battery.overrides.temperature_coefficient_mv_per_k_per_cell
             if s.battery_file else None)
    if maker is not None:
        steep, shallow = min(steep, maker * 1000), max(shallow, maker * 1000)
    t = min(max(t_dC, s.limits.charge_min_dC), s.limits.charge_max_dC)
    slope_uV = steep if t < LEAD_REFERENCE_DC else shallow
    return (per_cell_25 + slope_uV / 1000 * (t - LEAD_REFERENCE_DC) / 10) * s.cells


def _lead_caps(s: Subject) -> tuple[float, float]:
    """The charge and hold caps per cell at 25 degC: the table's, or the maker's where the
    battery file raises them (inside the cell maximum, which CK303 holds)."""
    charge = max(s.limits.charge_cell_max_mV or 0, _maker_cell_mV(s, "absorption_voltage") or 0)
    hold = max(s.limits.hold_cell_max_mV or 0, _maker_cell_mV(s, "float_voltage") or 0,
               _maker_cell_mV(s, "storage_voltage") or 0)
    return charge, hold


def _per_cell_at(s: Subject, voltage_mV: float, t_dC: int) -> str:
    return f"{voltage_mV / s.cells:.0f} mV/cell at {t_dC / 10:g} degC"


@code("CK315")
def stages_lead_voltage_by_kind(s: Subject) -> Iterator[str]:
    """Lead-acid: bulk and absorption no higher than the sourced charge voltage, float and
    storage hold no higher than the sourced float band, each at the planned temperature
    (BU-403; IEC 62485-2 Table 1; BU-410: lower when hot)."""
    if s.limits.lithium or s.limits.charge_cell_max_mV is None:
        return
    charge, hold = _lead_caps(s)
    t = s.doc["planned_temperature_dC"]
    for name, stage in s.named():
        per_cell = charge if stage["kind"] in _CHARGING else (
            hold if stage["kind"] in _HOLDING else None)
        if per_cell is None:
            continue
        cap = _lead_cap_mV(s, per_cell, t)
        if stage["voltage_mV"] > cap + 1:
            what = "charge" if stage["kind"] in _CHARGING else "float"
            yield (f"{name} voltage {stage['voltage_mV']} mV ("
                   f"{_per_cell_at(s, stage['voltage_mV'], t)}) is above the {what} limit "
                   f"{cap:.0f} mV ({per_cell:.0f} mV/cell at 25 degC, compensated); lower it, or "
                   "check with --battery giving the maker's voltage")


@code("CK316")
def stages_lithium_bounded(s: Subject) -> Iterator[str]:
    """Lithium: a constant-voltage stage ends on a tail current or a duration and times out
    within 4 h; a bulk timer lets in at most twice the rated capacity at the lowest current
    the document runs at (BU-409: no float, end on the tail or a set time)."""
    if not s.limits.lithium or s.limits.cv_timer_max_s is None:
        return
    # the pre-charge (a version-3 stage) runs on its own timer; the rest at these currents
    lowest = min([st["current_mA"] for st in s.stages if st["kind"] != "precharge"]
                 + [row["current_max_mA"] for row in _rows(s)]
                 + ([s.lock["cool_zone"]["current_max_mA"]] if s.lock["cool_zone"] else []))
    for name, stage in s.named():
        timer = stage["timer_s"]
        if stage["kind"] in _CONSTANT_VOLTAGE | _HOLDING:
            ends = [e for e in stage["exits"] if e["condition"] in ("current_below", "duration")
                    and e["then"] in _THEN]
            if not ends:
                yield (f"{name} at {stage['voltage_mV']} mV has no tail-current or duration exit: "
                       "lithium would be held at it; give it both (BU-409)")
            if timer is not None and timer > s.limits.cv_timer_max_s:
                yield (f"{name} timer {timer} s is above the {s.limits.cv_timer_max_s} s a "
                       "lithium constant-voltage stage may last; end it within 4 h (BU-409: no "
                       "float)")
        elif stage["kind"] == "bulk" and timer is not None and lowest > 0:
            charge_mAh = timer * lowest / 3600
            cap = s.limits.bulk_timer_charge_max_it * s.capacity_mAh
            if charge_mAh > cap:
                yield (f"{name} timer {timer} s lets in {charge_mAh:.0f} mAh at {lowest} mA, more "
                       f"than {s.limits.bulk_timer_charge_max_it:g} x the {s.capacity_mAh:.0f} "
                       "mAh capacity; shorten it")


@code("CK317")
def stages_lithium_storage_voltage(s: Subject) -> Iterator[str]:
    """Lithium: a storage hold sits at a storage voltage, not at full charge (BU-702: store
    at 40-50 %)."""
    cap_cell = s.limits.storage_cell_max_mV
    if cap_cell is None:
        return
    for name, stage in s.named():
        if stage["kind"] == "storage_hold" and stage["voltage_mV"] > cap_cell * s.cells:
            yield (f"{name} voltage {stage['voltage_mV']} mV is above the {s.limits.chemistry} "
                   f"storage voltage {cap_cell * s.cells} mV ({cap_cell} mV/cell); a storage "
                   "hold at charge voltage is a float: lower it (BU-702)")


# --- 4xx: interlocks and zones -------------------------------------------------------------


@code("CK401")
def locks_window_order(s: Subject) -> Iterator[str]:
    """The charge-temperature window is in order and holds the planned temperature."""
    t_min, t_max = s.lock["charge_temperature_min_dC"], s.lock["charge_temperature_max_dC"]
    if t_min >= t_max:
        yield "the minimum charge temperature is not below the maximum"
    elif not t_min <= s.doc["planned_temperature_dC"] <= t_max:
        yield "the planned temperature lies outside the charge-temperature interlocks"


@code("CK402")
def locks_window_limits(s: Subject) -> Iterator[str]:
    """The window lies inside the chemistry's (BU-410 Table 1; lithium never below 0 degC)."""
    t_min, t_max = s.lock["charge_temperature_min_dC"], s.lock["charge_temperature_max_dC"]
    if t_min < s.limits.charge_min_dC:
        yield (f"minimum charge temperature {t_min} dC is below the {s.limits.chemistry} limit "
               f"{s.limits.charge_min_dC} dC")
    if t_max > s.limits.charge_max_dC:
        yield (f"maximum charge temperature {t_max} dC is above the {s.limits.chemistry} limit "
               f"{s.limits.charge_max_dC} dC")


@code("CK403")
def locks_cell_voltage(s: Subject) -> Iterator[str]:
    """The cell-voltage interlock is not above the chemistry's maximum."""
    if s.lock["cell_voltage_max_mV"] > s.limits.cell_max_mV:
        yield (f"the cell voltage interlock {s.lock['cell_voltage_max_mV']} mV is above the "
               f"{s.limits.chemistry} limit {s.limits.cell_max_mV} mV")


@code("CK404")
def locks_battery_voltage(s: Subject) -> Iterator[str]:
    """The battery-voltage interlock is cells x the cell interlock (to a millivolt a cell)."""
    if abs(s.lock["battery_voltage_max_mV"] - s.lock["cell_voltage_max_mV"] * s.cells) > s.cells:
        yield "the battery voltage interlock does not match cells x the cell limit"


@code("CK405")
def locks_current(s: Subject) -> Iterator[str]:
    """The current interlock is not above the chemistry's maximum C-rate."""
    limit = s.it(s.limits.current_max_it)
    if s.lock["current_max_mA"] > limit:
        yield (f"the current interlock {s.lock['current_max_mA']} mA is above the "
               f"{s.limits.chemistry} limit {limit:.0f} mA")


@code("CK406")
def locks_cool_zone(s: Subject) -> Iterator[str]:
    """Where the chemistry has a cool zone and the window reaches it, the zone is present,
    reaches the sourced boundary and cuts the current to the sourced limit."""
    below, rate = s.limits.cool_below_dC, s.limits.cool_current_it
    if below is None or rate is None or s.lock["charge_temperature_min_dC"] >= below:
        return
    zone = s.lock["cool_zone"]
    if zone is None:
        yield f"the {s.limits.chemistry} cool zone (below {below} dC) is missing"
        return
    if zone["below_dC"] < below:
        yield (f"the cool zone ends at {zone['below_dC']} dC; for {s.limits.chemistry} it "
               f"must reach {below} dC")
    if zone["current_max_mA"] > s.it(rate):
        yield (f"the cool-zone current {zone['current_max_mA']} mA is above {rate} It "
               f"({s.it(rate):.0f} mA)")


@code("CK407")
def locks_warm_zone(s: Subject) -> Iterator[str]:
    """NMC: the warm zone is present, begins by the sourced temperature and cuts the cell
    voltage; no warm limit lies above the cell maximum."""
    zone, above, cap = s.lock["warm_zone"], s.limits.warm_above_dC, s.limits.warm_cell_max_mV
    if zone is not None and zone["cell_voltage_max_mV"] > min(s.lock["cell_voltage_max_mV"],
                                                             s.limits.cell_max_mV):
        yield (f"the warm-zone cell voltage {zone['cell_voltage_max_mV']} mV is above the "
               "cell maximum")
    if above is None or cap is None:
        return
    if zone is None:
        yield f"the {s.limits.chemistry} warm zone is missing"
        return
    if zone["above_dC"] > above or zone["above_dC"] >= s.lock["charge_temperature_max_dC"]:
        yield (f"the warm zone begins at {zone['above_dC']} dC; for {s.limits.chemistry} it "
               f"must begin by {above} dC, inside the charge window")
    if zone["cell_voltage_max_mV"] > cap:
        yield (f"the warm-zone cell voltage {zone['cell_voltage_max_mV']} mV is above "
               f"{cap} mV")


# --- 5xx: compensation ---------------------------------------------------------------------


@code("CK501")
def compensation_not_for_lithium(s: Subject) -> Iterator[str]:
    """Lithium voltages are never temperature-compensated."""
    if not s.limits.lithium:
        return
    if s.doc["temperature_compensation"] is not None:
        yield "temperature compensation is given for lithium, whose voltage limit is fixed"
    for name, stage in s.named():
        if stage["compensated"]:
            yield f"{name} is compensated, but lithium voltages are never compensated"


@code("CK502")
def compensation_coefficient(s: Subject) -> Iterator[str]:
    """The coefficient is negative and in the sourced range (BU-410: -3 to -5 mV/K/cell,
    with a margin), unless the battery file gives the maker's own (then CK705 holds it)."""
    comp, accepted = s.doc["temperature_compensation"], s.limits.compensation_uV
    if comp is None or accepted is None:
        return
    overrides = s.battery_file.battery.overrides if s.battery_file else None
    if overrides and overrides.temperature_coefficient_mv_per_k_per_cell is not None:
        return
    value = comp["coefficient_uV_per_K_per_cell"]
    if not accepted[0] <= value <= accepted[1]:
        yield (f"the compensation coefficient {value} uV/K/cell is outside {accepted[0]} to "
               f"{accepted[1]} (lead-acid -3 to -5 mV/K/cell, BU-410)")


@code("CK503")
def compensation_table_present(s: Subject) -> Iterator[str]:
    """A compensated stage needs the compensation table, whose range is in order."""
    comp = s.doc["temperature_compensation"]
    if comp is None:
        if any(stage["compensated"] for stage in s.stages):
            yield "a stage is compensated but the document has no temperature_compensation"
        return
    if comp["range_min_dC"] >= comp["range_max_dC"]:
        yield "the compensation range's minimum is not below its maximum"


@code("CK504")
def compensation_required(s: Subject) -> Iterator[str]:
    """Lead-acid: the document carries temperature compensation and every bulk, absorption,
    float and storage-hold stage is compensated (BU-410: about -3 mV/K/cell), unless the
    battery file gives the maker's coefficient as zero."""
    if s.limits.lithium or s.limits.compensation_uV is None:
        return
    maker = (s.battery_file.battery.overrides.temperature_coefficient_mv_per_k_per_cell
             if s.battery_file else None)
    if maker == 0:
        return
    if s.doc["temperature_compensation"] is None:
        yield ("temperature_compensation is missing: lead-acid voltages must fall as the "
               "battery warms (BU-410); write the document again with 'chargeplan plan'")
    for name, stage in s.named():
        if stage["kind"] in _CHARGING | _HOLDING and not stage["compensated"]:
            yield (f"{name} is not compensated: a hot lead-acid battery would get the cold "
                   "voltage (BU-410); set compensated: true")


@code("CK505")
def compensation_range(s: Subject) -> Iterator[str]:
    """The compensation range reaches the top of the charge window, so a hot battery is never
    held at a cooler, higher voltage (BU-410). (Its cold end may lie anywhere: a clamp in the
    cold only lowers the voltage, and the interlocks stop the charge outside the window.)"""
    comp = s.doc["temperature_compensation"]
    if comp is None or s.limits.lithium:
        return
    t_max = s.lock["charge_temperature_max_dC"]
    if comp["range_max_dC"] < t_max:
        yield (f"temperature_compensation.range_max_dC {comp['range_max_dC']} is below the "
               f"charge window's top {t_max} dC: above it a hot battery keeps a cooler, higher "
               "voltage; the range is in 0.1 degC (dC), so write it up to "
               f"{t_max}")


# --- 6xx: the temperature table -----------------------------------------------------------


def _rows(s: Subject) -> list[dict[str, Any]]:
    return (s.doc.get("temperature_table") or {}).get("rows") or []


@code("CK601")
def table_order(s: Subject) -> Iterator[str]:
    """Rows rise in temperature, on a positive step, inside the charge window."""
    table = s.doc.get("temperature_table")
    if table and table["step_dC"] <= 0:
        yield "the temperature table's step is not above zero"
    temps = [row["temperature_dC"] for row in _rows(s)]
    if any(b <= a for a, b in itertools.pairwise(temps)):
        yield "the temperature table's rows are not in rising order"
    t_min, t_max = s.lock["charge_temperature_min_dC"], s.lock["charge_temperature_max_dC"]
    for t in temps:
        if not t_min <= t <= t_max:
            yield f"table row at {t} dC lies outside the charge-temperature interlocks"


@code("CK602")
def table_limits(s: Subject) -> Iterator[str]:
    """Rows keep to the chemistry's voltage and current limits and the voltage interlock.

    (Each row is the plan made at its temperature, so its current may exceed the current
    interlock of the plan made at the planned temperature, which is cut in the cool zone.)
    """
    v_cap = min(s.v_max, s.lock["battery_voltage_max_mV"])
    i_cap = s.it(s.limits.current_max_it)
    for row in _rows(s):
        t = row["temperature_dC"]
        if max(row["charge_voltage_mV"], row["hold_voltage_mV"] or 0) > v_cap:
            yield f"table row at {t} dC is above the voltage limit {v_cap} mV"
        if row["current_max_mA"] > i_cap:
            yield f"table row at {t} dC is above the current limit {i_cap:.0f} mA"


@code("CK603")
def table_zones(s: Subject) -> Iterator[str]:
    """Rows in the cool zone keep its current; rows in the warm zone its voltage."""
    cool, warm = s.lock["cool_zone"], s.lock["warm_zone"]
    for row in _rows(s):
        t = row["temperature_dC"]
        if cool and t < cool["below_dC"] and row["current_max_mA"] > cool["current_max_mA"]:
            yield f"table row at {t} dC is above the cool-zone current"
        if (warm and t > warm["above_dC"]
                and row["charge_voltage_mV"] > warm["cell_voltage_max_mV"] * s.cells):
            yield f"table row at {t} dC is above the warm-zone voltage"


@code("CK604")
def table_hold_below_charge(s: Subject) -> Iterator[str]:
    """A row's hold voltage sits below its charge voltage; lithium rows hold nothing."""
    for row in _rows(s):
        hold = row["hold_voltage_mV"]
        if hold is not None and (s.limits.lithium or hold >= row["charge_voltage_mV"]):
            yield (f"table row at {row['temperature_dC']} dC holds at {hold} mV"
                   + (" (lithium is never held)" if s.limits.lithium else
                      ", not below its charge voltage"))


@code("CK605")
def table_trends(s: Subject) -> Iterator[str]:
    """As the battery warms, no row's charge or hold voltage rises (lead-acid compensation
    lowers it, BU-410; the lithium warm zone cuts it, JEITA) and no row's current falls (the
    cuts are in the cold: BU-410 Table 1, JEITA's cool zone)."""
    rows = _rows(s)
    for a, b in itertools.pairwise(rows):
        where = f"table row at {b['temperature_dC']} dC"
        if b["charge_voltage_mV"] > a["charge_voltage_mV"] or (
                (b["hold_voltage_mV"] or 0) > (a["hold_voltage_mV"] or 0)):
            yield f"{where} has a higher voltage than the colder row before it"
        if b["current_max_mA"] < a["current_max_mA"]:
            yield f"{where} has a lower current than the colder row before it"


@code("CK606")
def table_lead_voltage(s: Subject) -> Iterator[str]:
    """Lead-acid: each row's charge and hold voltage keep to the sourced charge and float
    limits at the row's temperature (BU-403; BU-410: lower when hot), as CK315 for stages."""
    if s.limits.lithium or s.limits.charge_cell_max_mV is None:
        return
    charge, hold = _lead_caps(s)
    for row in _rows(s):
        t = row["temperature_dC"]
        cap = _lead_cap_mV(s, charge, t)
        if row["charge_voltage_mV"] > cap + 1:
            yield (f"table row at {t} dC charge voltage {row['charge_voltage_mV']} mV is above "
                   f"the charge limit {cap:.0f} mV there; lower it")
        cap = _lead_cap_mV(s, hold, t)
        if row["hold_voltage_mV"] is not None and row["hold_voltage_mV"] > cap + 1:
            yield (f"table row at {t} dC hold voltage {row['hold_voltage_mV']} mV is above "
                   f"the float limit {cap:.0f} mV there; lower it")


# --- 7xx: the battery file -----------------------------------------------------------------


def _file_capacity_mAh(battery_file: BatteryFile) -> float:
    b = battery_file.battery
    if b.rating == "lead-equivalent" and b.actual_capacity_ah is not None:
        return b.actual_capacity_ah * 1000
    return b.capacity_ah * 1000


@code("CK701")
def battery_chemistry(s: Subject) -> Iterator[str]:
    """The battery file's chemistry is the document's chemistry, or its profile."""
    if s.battery_file is None:
        return
    mine = s.battery_file.battery.chemistry
    doc_chemistry, profile = s.doc["battery"]["chemistry"], s.doc["battery"].get("profile")
    if mine in LIMITS and mine != doc_chemistry:
        yield f"the battery file is {_q(mine)}, the document {_q(doc_chemistry)}"
    elif mine not in LIMITS and profile is not None and mine != profile:
        yield f"the battery file's profile is {_q(mine)}, the document's {_q(profile)}"
    if mine not in LIMITS and s.profile_chemistry not in (None, doc_chemistry):
        yield (f"the battery file's profile {_q(mine)} is {_q(s.profile_chemistry)}, the "
               f"document {_q(doc_chemistry)}")


@code("CK702")
def battery_capacity(s: Subject) -> Iterator[str]:
    """The document's capacity is the battery file's (to the milliampere-hour)."""
    if s.battery_file is None:
        return
    mine, theirs = _file_capacity_mAh(s.battery_file), s.doc["battery"]["capacity_mAh"]
    if abs(theirs - mine) > 1:
        yield f"the document is for {theirs} mAh, the battery file's battery has {mine:.0f} mAh"


@code("CK703")
def battery_cells(s: Subject) -> Iterator[str]:
    """The document's cells are the battery file's, or those its nominal voltage makes."""
    if s.battery_file is None:
        return
    b = s.battery_file.battery
    if b.cells_in_series is not None:
        allowed = {b.cells_in_series}
    else:
        allowed = cell_count_candidates((b.nominal_voltage_v or 0) * 1000, s.limits)
    if s.cells not in allowed:
        shown = " or ".join(str(n) for n in sorted(allowed)) or "no whole number of"
        yield f"the battery file's battery has {shown} cells, the document {s.cells}"


@code("CK704")
def battery_maker_current(s: Subject) -> Iterator[str]:
    """No stage above the maker's maximum charge current, when the battery file gives one."""
    if s.battery_file is None or s.battery_file.battery.overrides.max_charge_current is None:
        return
    maker = s.battery_file.battery.overrides.max_charge_current
    limit = maker.amps(s.capacity_mAh / 1000) * 1000
    for name, stage in s.named():
        if stage["current_mA"] > limit + 1e-6:
            yield f"{name} current is above the maker's {limit:.0f} mA"
    for row in _rows(s):
        if row["current_max_mA"] > limit + 1:
            yield (f"table row at {row['temperature_dC']} dC current {row['current_max_mA']} mA "
                   f"is above the maker's {limit:.0f} mA; lower it")


@code("CK705")
def battery_maker_coefficient(s: Subject) -> Iterator[str]:
    """The compensation coefficient is the maker's, when the battery file gives one."""
    comp = s.doc["temperature_compensation"]
    if s.battery_file is None or comp is None:
        return
    maker = s.battery_file.battery.overrides.temperature_coefficient_mv_per_k_per_cell
    if maker is not None and abs(comp["coefficient_uV_per_K_per_cell"] - maker * 1000) > 1:
        yield (f"the compensation coefficient {comp['coefficient_uV_per_K_per_cell']} "
               f"uV/K/cell is not the maker's {maker * 1000:.0f}")


@code("CK706")
def battery_chemistry_known(s: Subject) -> Iterator[str]:
    """A battery file whose chemistry is a user profile is checked against that profile's
    built-in chemistry (``--profiles``); without it the checker has no limits of its own."""
    if s.battery_file is None:
        return
    mine = s.battery_file.battery.chemistry
    if mine not in LIMITS and s.profile_chemistry is None:
        yield (f"the battery file's chemistry {_q(mine)} is not built in and no profile "
               "names it: give --profiles with its profile file or folder, so its chemistry's "
               "limits apply")


# --- 8xx: the charger channels (the battery file's charger section and --charger) --------


@code("CK801")
def channel_voltages(s: Subject) -> Iterator[str]:
    """Stage voltages inside each channel's range (held stages no lower than its minimum)."""
    for where, ch in s.channels:
        top, bottom = round(ch.max_voltage_v * 1000, 3), round(ch.min_voltage_v * 1000, 3)
        for name, stage in s.named():
            if stage["voltage_mV"] > top:
                yield f"{name} voltage is above the {where}'s {ch.max_voltage_v} V"
            regulated = stage["kind"] in _HOLDING | {"absorption"}
            if regulated and stage["voltage_mV"] < bottom - 1:
                yield f"{name} voltage is below the {where}'s smallest {ch.min_voltage_v} V"


@code("CK802")
def channel_currents(s: Subject) -> Iterator[str]:
    """Stage currents and tail currents inside each channel's range."""
    for where, ch in s.channels:
        top, bottom = round(ch.max_current_a * 1000, 3), round(ch.min_current_a * 1000, 3)
        for name, stage in s.named():
            if stage["current_mA"] > top:
                yield f"{name} current is above the {where}'s {ch.max_current_a} A"
            if stage["current_mA"] < bottom - 1:
                yield f"{name} current is below the {where}'s smallest {ch.min_current_a} A"
            tail = _exit(stage, "current_below")
            if tail and tail["current_mA"] < bottom - 1:
                yield (f"{name} tail current is below the {where}'s smallest "
                       f"{ch.min_current_a} A, which it cannot measure")
        for row in _rows(s):
            if row["current_max_mA"] > top:
                yield (f"table row at {row['temperature_dC']} dC current "
                       f"{row['current_max_mA']} mA is above the {where}'s "
                       f"{ch.max_current_a} A; lower it")


def _off_step(value_m: int, step: float | None) -> bool:
    """Whether ``value_m`` (mV or mA) is off the channel's ``step`` (V or A), allowing the
    document's rounding down of one unit."""
    if step is None:
        return False
    step_m = step * 1000
    if step_m <= 1:
        return False
    return value_m - math.floor(value_m / step_m + 1e-9) * step_m > 1 + 1e-9


@code("CK803")
def channel_steps(s: Subject) -> Iterator[str]:
    """Stage voltages and currents lie on each channel's steps."""
    for where, ch in s.channels:
        for name, stage in s.named():
            if _off_step(stage["voltage_mV"], ch.voltage_step):
                yield f"{name} voltage {stage['voltage_mV']} mV is not on the {where}'s step"
            if _off_step(stage["current_mA"], ch.current_step):
                yield f"{name} current {stage['current_mA']} mA is not on the {where}'s step"


#: Every check, in order, after :data:`FORM_CHECKS`. Add new checks at the end of a group.
CHECKS: tuple[CheckFunction, ...] = (
    identity_chemistry_profile, identity_cells_agree, identity_nominal_voltage,
    stages_allowed, stages_in_order, stages_voltage_limit, stages_voltage_per_cell,
    stages_current_limit, stages_within_interlocks, stages_end, stages_timer_covers_estimate,
    stages_lead_dwell, stages_exits_in_range, stages_precharge_below_bulk,
    stages_hold_below_charge, stages_lithium_stops, stages_obey_zones,
    stages_lead_voltage_by_kind, stages_lithium_bounded, stages_lithium_storage_voltage,
    locks_window_order, locks_window_limits, locks_cell_voltage, locks_battery_voltage,
    locks_current, locks_cool_zone, locks_warm_zone,
    compensation_not_for_lithium, compensation_coefficient, compensation_table_present,
    compensation_required, compensation_range,
    table_order, table_limits, table_zones, table_hold_below_charge, table_trends,
    table_lead_voltage,
    battery_chemistry, battery_capacity, battery_cells, battery_maker_current,
    battery_maker_coefficient, battery_chemistry_known,
    channel_voltages, channel_currents, channel_steps,
)


def _run(checks: Iterable[CheckFunction], subject: Subject) -> list[Violation]:
    return [Violation(check.code, text)  # type: ignore[attr-defined]
            for check in checks for text in check(subject)]


def _limits_for(doc: dict[str, Any], battery_file: BatteryFile | None,
                profile: UserProfile | None = None) -> ChemistryLimits | None:
    """The limits the document is held to: the battery file's chemistry when it names a
    built-in one, or the built-in chemistry of its user profile (tightened by the profile's
    envelope), so a relabelled document cannot escape them; else the document's."""
    if battery_file is not None and battery_file.battery.chemistry in LIMITS:
        return LIMITS[battery_file.battery.chemistry]
    if profile is not None:
        return profile.limits
    return LIMITS.get(doc.get("battery", {}).get("chemistry"))


@dataclass(frozen=True, slots=True)
class UserProfile:
    """What the checker reads of a user profile: its id, the built-in chemistry it names, and
    that chemistry's limits tightened by the profile's own envelope."""

    id: str
    chemistry: str
    limits: ChemistryLimits


def _envelope_value(envelope: dict[str, Any], key: str, kind: str, file: str) -> float | None:
    from chargeplan.units import QuantityError, parse_quantity

    entry = envelope.get(key)
    raw = entry.get("value") if isinstance(entry, dict) else entry
    if raw is None:
        return None
    try:
        return parse_quantity(raw, kind)
    except QuantityError as error:
        raise InputError(f"envelope.{key}: {error.problem}", file=file, fix=error.fix) from None


def read_user_profiles(paths: Iterable[str | Path]) -> dict[str, UserProfile]:
    """The user profiles in ``paths`` (files, or folders of .yaml/.yml/.json files), read as
    plain files: the checker does not load the profile machinery it checks. A profile must
    name a built-in ``chemistry``; its envelope may only tighten that chemistry's limits."""
    import dataclasses

    from chargeplan.loading import read_mapping

    files: list[Path] = []
    for entry in map(Path, paths):
        if entry.is_dir():
            files += sorted(p for p in entry.iterdir()
                            if p.suffix.lower() in {".yaml", ".yml", ".json"})
        else:
            files.append(entry)
    found: dict[str, UserProfile] = {}
    for path in files:
        data = read_mapping(path, what="profile")
        pid, chemistry = data.get("id"), data.get("chemistry")
        if chemistry not in LIMITS:
            raise InputError(f"chemistry: {_q(chemistry)} is not a built-in chemistry",
                             file=str(path), fix=f"name one of {', '.join(LIMITS)}")
        if not isinstance(pid, str) or not pid:
            raise InputError("id: a profile needs an id", file=str(path),
                             fix="give it 'id: <name>'")
        base = LIMITS[chemistry]
        envelope = data.get("envelope") or {}
        if not isinstance(envelope, dict):
            envelope = {}
        cell_v = _envelope_value(envelope, "max_cell_voltage", "cell_voltage", str(path))
        rate = _envelope_value(envelope, "max_current", "c_rate", str(path))
        t_min = _envelope_value(envelope, "charge_temperature_min", "temperature", str(path))
        t_max = _envelope_value(envelope, "charge_temperature_max", "temperature", str(path))
        forbidden = envelope.get("forbidden_stages")
        limits = dataclasses.replace(
            base,
            cell_max_mV=min(base.cell_max_mV, round(cell_v * 1000)) if cell_v else base.cell_max_mV,
            current_max_it=min(base.current_max_it, rate) if rate else base.current_max_it,
            charge_min_dC=(max(base.charge_min_dC, round(t_min * 10)) if t_min is not None
                           else base.charge_min_dC),
            charge_max_dC=(min(base.charge_max_dC, round(t_max * 10)) if t_max is not None
                           else base.charge_max_dC),
            forbidden_stages=base.forbidden_stages | (
                frozenset(str(k) for k in forbidden) if isinstance(forbidden, list)
                else frozenset()))
        found[pid] = UserProfile(pid, chemistry, limits)
    return found


def subject_for(
    doc: dict[str, Any],
    *,
    battery_file: BatteryFile | None = None,
    channel: ChargerChannel | None = None,
    kind: str = "json",
    profiles: dict[str, UserProfile] | None = None,
) -> Subject | None:
    """What the checks read about ``doc``; None when its chemistry has no limits here.
    ``profiles`` (:func:`read_user_profiles`) resolve a battery file's user profile."""
    profile = None
    if battery_file is not None:
        profile = (profiles or {}).get(battery_file.battery.chemistry)
    limits = _limits_for(doc, battery_file, profile)
    if limits is None:
        return None
    capacity = doc.get("battery", {}).get("capacity_mAh") or 0
    if battery_file is not None:
        capacity = min(capacity, _file_capacity_mAh(battery_file))
    channels: list[tuple[str, ChargerChannel]] = []
    if battery_file is not None and battery_file.charger is not None:
        channels.append(("battery file's charger", battery_file.charger))
    if channel is not None:
        channels.append(("channel", channel))
    return Subject(doc, kind, limits, capacity, battery_file, tuple(channels),
                   profile.chemistry if profile else None)


def check_document(
    doc: dict[str, Any],
    *,
    battery_file: BatteryFile | None = None,
    channel: ChargerChannel | None = None,
    kind: str = "json",
    profiles: dict[str, UserProfile] | None = None,
) -> list[Violation]:
    """Every way ``doc`` (a schema-valid document, or a decoded image) is unsafe or out of
    order: empty when it may be flashed."""
    subject = subject_for(doc, battery_file=battery_file, channel=channel, kind=kind,
                          profiles=profiles)
    if subject is None:
        chemistry = doc.get("battery", {}).get("chemistry")
        return [Violation("CK106", f"unknown chemistry {_q(chemistry)}: no limits to check "
                                   "against")]
    found = _run(FORM_CHECKS, subject)
    return found or _run(CHECKS, subject)


def read_setpoint_file(path: str | Path) -> tuple[dict[str, Any], str, list[Violation]]:
    """The document in a JSON file or an image, its kind, and integrity violations found
    while reading (digest or CRC). A file that is neither is an InputError."""
    from chargeplan.firmware import image
    from chargeplan.loading import parse_json, read_input

    shown = str(path)
    raw = read_input(path, what="setpoint JSON or image")
    if raw.startswith(image.MAGIC):
        try:
            return image.decode(raw), "image", []
        except image.ImageError as error:
            if "CRC" in str(error):
                return {}, "image", [Violation("CK002", f"the image {error}")]
            raise InputError(str(error), file=shown,
                             fix="write the image again with 'chargeplan plan -f image'") from None
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError:
        text = ""
    if not text.lstrip().startswith(("{", "[")):
        raise InputError("is neither a setpoint JSON document nor a setpoint image",
                         file=shown, fix="give the file 'chargeplan plan -f json' or "
                                         "'-f image' wrote")
    # strict JSON: a duplicate key (the last would silently win) or NaN is refused
    doc = parse_json(text, shown)
    if not isinstance(doc, dict) or doc.get("format") != "chargeplan-setpoints":
        raise InputError("is JSON but not a chargeplan setpoint document", file=shown,
                         field="format", fix="give the file 'chargeplan plan -f json' wrote")
    from chargeplan.firmware.setpoints import compute_digest

    found = []
    if doc.get("digest") != compute_digest(doc):
        found.append(Violation("CK001", "the digest does not match the contents: the file was "
                                        "edited by hand or damaged"))
    return doc, "json", found


def load_channel_file(path: str | Path) -> ChargerChannel:
    """A charger channel file: the channel's keys at the top, or under ``charger:``."""
    from chargeplan.loading import read_mapping, validate

    data = read_mapping(path, what="channel")
    if set(data) == {"charger"} and isinstance(data["charger"], dict):
        data = data["charger"]
    return validate(ChargerChannel, data, file=str(path))


def _schema_violations(doc: dict[str, Any]) -> list[Violation]:
    from pydantic import ValidationError

    from chargeplan.firmware.document import SetpointDocument, SetpointDocumentV3

    version = list(form_version(Subject(doc, "json", LIMITS["flooded"], 0)))
    if version:
        return [Violation("CK101", version[0])]
    models = {3: SetpointDocumentV3, 4: SetpointDocument}
    try:
        models[doc["version"]].model_validate(doc)
    except ValidationError as error:
        return [
            Violation("CK100", f"schema: {'.'.join(str(p) for p in e['loc'])}: "
                      f"{str(e['msg']).removeprefix('Value error, ')}")
            for e in error.errors(include_url=False)
        ]
    return []


def check_file(
    path: str | Path,
    *,
    battery_file: BatteryFile | None = None,
    channel: ChargerChannel | None = None,
    profiles: Iterable[str | Path] = (),
) -> CheckReport:
    """Read and check one setpoint file. A value too large for its field type is an
    InputError (exit 2); every other finding is a violation (exit 1). ``profiles``: user
    profile files or folders, for a battery file whose chemistry is one of them."""
    from chargeplan.firmware.fieldtypes import require_fit

    doc, kind, found = read_setpoint_file(path)
    report = CheckReport(str(path), kind, list(found))
    if not doc:
        return report
    if kind == "json":
        schema = _schema_violations(doc)
        report.violations += schema
        if schema:
            return report
        require_fit(doc, file=str(path))
    report.violations += check_document(doc, battery_file=battery_file, channel=channel,
                                        kind=kind, profiles=read_user_profiles(profiles))
    if doc.get("version") in (3, 4):
        from chargeplan.firmware.check_program import program_violations

        for finding in program_violations(doc):
            code, _, text = finding.partition(": ")
            report.violations.append(Violation(code, text))
    return report
