"""A chemistry profile: per-cell values, C-rate currents, temperatures, the hard envelope.

Every number is a ``{value, source}`` pair; the source names the standard and
clause, the handbook and table, or says "common practice" or "from memory".
"""

from __future__ import annotations

from itertools import pairwise
from typing import Annotated, ClassVar, Literal

from pydantic import Field, StrictFloat, create_model, model_validator

from chargeplan.model.fields import FreeText, InputModel, Parsed, Text, free_text, quantity

__all__ = [
    "Compensation",
    "Desulfation",
    "Envelope",
    "Equalization",
    "FlatBand",
    "Profile",
    "RestVoltage",
    "Sourced",
    "Temperature",
]

Family = Literal["lead_acid", "lithium"]
StageName = Literal[
    "precharge", "desulfation", "bulk", "absorption", "equalization", "float", "storage_hold"
]


def _source_text(raw: object) -> str:
    if not isinstance(raw, str) or len(raw.strip()) < 6:
        raise ValueError(
            "every value needs a source: a standard and clause, a handbook and table, "
            "'common practice' or 'from memory'"
        )
    return free_text(raw)


Source = Annotated[str, Parsed(_source_text, {"type": "string", "minLength": 6})]


class Sourced(InputModel):
    """Base of the ``{value, source}`` pairs; ``unit`` is the unit ``value`` is held in."""

    unit: ClassVar[str] = ""
    value: object
    source: Source

    def shown(self) -> str:
        """The value with its unit, for listings: '2.43 V/cell', '8 h', '-3 mV/K/cell'."""
        value = float(self.value)  # type: ignore[arg-type]
        if self.unit == "s":
            hours = value / 3600
            return f"{hours / 24:g} d" if hours >= 48 else f"{hours:g} h"
        return f"{value:g} {self.unit}".strip()


def _sourced(name: str, value_type: object, unit: str) -> type[Sourced]:
    model = create_model(  # type: ignore[call-overload]
        name, __base__=Sourced, value=(value_type, ...)
    )
    model.unit = unit
    return model  # type: ignore[no-any-return]


CellVoltage = _sourced("SourcedCellVoltage", quantity("cell_voltage", ge=0.5, le=5.0), "V/cell")
CellOffset = _sourced("SourcedCellOffset", quantity("cell_voltage", ge=0, le=0.5), "V/cell")
CRate = _sourced("SourcedCRate", quantity("c_rate", ge=0.001, le=20), "It")
Duration = _sourced("SourcedDuration", quantity("duration", ge=0, le=10 * 365 * 86_400), "s")
Temp = _sourced("SourcedTemperature", quantity("temperature", ge=-60, le=100), "degC")
Coefficient = _sourced("SourcedCoefficient", quantity("coefficient", ge=-10, le=0), "mV/K/cell")
OcvCoefficient = _sourced("SourcedOcvCoefficient", quantity("coefficient", ge=-5, le=5),
                          "mV/K/cell")
Percent = _sourced("SourcedPercent", quantity("fraction", ge=0, le=100), "%")
ResistanceCapacity = _sourced(
    "SourcedResistanceCapacity", quantity("resistance_capacity", ge=0.0001, le=20), "ohm*Ah"
)
CurrentPerAh = _sourced(
    "SourcedCurrentPerAh", quantity("current_per_capacity", ge=0.001, le=1000), "mA/Ah"
)
TempDifference = _sourced(
    "SourcedTemperatureDifference", quantity("temperature_difference", ge=1, le=100), "K"
)
Exponent = _sourced("SourcedExponent", Annotated[float, Field(ge=1.0, le=3.0, strict=True)], "")
Power = _sourced("SourcedPower", Annotated[float, Field(gt=0.0, le=3.0, strict=True)], "")
Efficiency = _sourced("SourcedEfficiency", Annotated[float, Field(gt=0.5, le=1.0, strict=True)], "")
Factor = _sourced("SourcedFactor", Annotated[float, Field(ge=1.0, le=2.0, strict=True)], "")
Gravity = _sourced("SourcedGravity", Annotated[float, Field(ge=0, le=0.3, strict=True)], "")


class Charge(InputModel):
    """The normal charge, per cell and as C-rates, at the reference temperature."""

    precharge_below: CellVoltage | None = None  # type: ignore[valid-type]
    precharge_current: CRate | None = None  # type: ignore[valid-type]
    bulk_current: CRate  # type: ignore[valid-type]
    absorption_voltage: CellVoltage  # type: ignore[valid-type]
    tail_current: CRate  # type: ignore[valid-type]
    absorption_time_max: Duration  # type: ignore[valid-type]
    float_voltage: CellVoltage | None = None  # type: ignore[valid-type]
    storage_voltage: CellVoltage  # type: ignore[valid-type]
    storage_after: Duration  # type: ignore[valid-type]
    charge_factor: Factor  # type: ignore[valid-type]
    timer_margin: Factor  # type: ignore[valid-type]


class _OptionalStage(InputModel):
    """An optional high-voltage stage (a controlled overcharge after a full charge).

    ``allowed`` is the chemistry's default; ``maker_may_allow`` lets a battery file carry
    the maker's explicit permission (its datasheet voltage for the stage, in
    ``battery.overrides``). When either holds, every value the stage needs must be given:
    its voltage, current and time, the Ah cap (``charge_max``, a share of the capacity),
    and the temperature stops (``temperature_rise`` above its start, ``stop_above``).
    """

    allowed: bool
    maker_may_allow: bool = False
    voltage: CellVoltage | None = None  # type: ignore[valid-type]
    current: CRate | None = None  # type: ignore[valid-type]
    duration: Duration | None = None  # type: ignore[valid-type]
    charge_max: Percent | None = None  # type: ignore[valid-type]
    temperature_rise: TempDifference | None = None  # type: ignore[valid-type]
    stop_above: Temp | None = None  # type: ignore[valid-type]
    _needs: ClassVar[tuple[str, ...]] = (
        "voltage", "current", "duration", "charge_max", "temperature_rise", "stop_above"
    )

    @property
    def possible(self) -> bool:
        """Allowed by default, or with the maker's permission."""
        return self.allowed or self.maker_may_allow

    @model_validator(mode="after")
    def _complete_when_allowed(self) -> _OptionalStage:
        missing = [name for name in self._needs if getattr(self, name) is None]
        if self.possible and missing:
            raise ValueError(f"an allowed stage needs {', '.join(missing)}")
        return self


class Equalization(_OptionalStage):
    """Equalization: on a specific-gravity spread, a cell low on float, when due, or when
    the operator asks."""

    _needs = (*_OptionalStage._needs, "gravity_spread_trigger", "interval")
    gravity_spread_trigger: Gravity | None = None  # type: ignore[valid-type]
    interval: Duration | None = None  # type: ignore[valid-type]
    float_cell_below: CellVoltage | None = None  # type: ignore[valid-type]


class Desulfation(_OptionalStage):
    """Desulfation: only on evidence of sulfation (a failed capacity or recharge test) or
    when the operator asks."""


class Compensation(InputModel):
    coefficient: Coefficient  # type: ignore[valid-type]
    reference: Temp  # type: ignore[valid-type]
    range_min: Temp  # type: ignore[valid-type]
    range_max: Temp  # type: ignore[valid-type]

    @model_validator(mode="after")
    def _ordered(self) -> Compensation:
        if not self.range_min.value < self.reference.value < self.range_max.value:
            raise ValueError("compensation needs range_min < reference < range_max")
        return self


class Zone(InputModel):
    """A cool zone (current cut below a temperature) or a warm zone (voltage cut above)."""

    boundary: Temp  # type: ignore[valid-type]
    current: CRate | None = None  # type: ignore[valid-type]
    voltage: CellVoltage | None = None  # type: ignore[valid-type]


class Temperature(InputModel):
    charge_min: Temp  # type: ignore[valid-type]
    charge_max: Temp  # type: ignore[valid-type]
    compensation: Compensation | None = None
    cool_zone: Zone | None = None
    warm_zone: Zone | None = None


class FlatBand(InputModel):
    """Where a chemistry's rested voltage curve is too flat to read the state of charge."""

    low: Percent  # type: ignore[valid-type]
    high: Percent  # type: ignore[valid-type]


class RestVoltage(InputModel):
    """Rested open-circuit voltage per cell: the state-of-charge table and plausibility.

    ``freeze_check_offset`` (lead-acid whose table overstates its charge) is taken off a
    reading before the freezing check, so that check errs toward a warmer freezing point.
    ``temperature_coefficient`` corrects a reading to ``table_temperature`` before the table
    is read; ``flat_band`` is where the curve is too flat to read.
    """

    table: list[tuple[StrictFloat, StrictFloat]] = Field(
        description="[state of charge %, open-circuit V/cell] rows, rising"
    )
    table_source: Source
    dead_below: CellVoltage  # type: ignore[valid-type]
    highest_plausible: CellVoltage  # type: ignore[valid-type]
    freeze_check_offset: CellOffset | None = None  # type: ignore[valid-type]
    table_temperature: Temp | None = None  # type: ignore[valid-type]
    temperature_coefficient: OcvCoefficient | None = None  # type: ignore[valid-type]
    flat_band: FlatBand | None = Field(
        default=None, description="states of charge a rest voltage cannot tell apart")

    def in_flat_band(self, *soc_pct: float) -> bool:
        """Every one of ``soc_pct`` lies inside the flat band (where one is given)."""
        band = self.flat_band
        return band is not None and all(band.low.value < s < band.high.value for s in soc_pct)

    @model_validator(mode="after")
    def _rising(self) -> RestVoltage:
        rows = self.table
        if len(rows) < 2:
            raise ValueError("table needs at least two rows")
        for (soc_a, v_a), (soc_b, v_b) in pairwise(rows):
            if not (soc_b > soc_a and v_b > v_a):
                raise ValueError("table rows must rise in both state of charge and voltage")
        if rows[0][0] != 0 or rows[-1][0] != 100:
            raise ValueError("table must run from 0 to 100 % state of charge")
        return self


class Gassing(InputModel):
    """Lead-acid gas current of a full battery at two voltages; exponential between them."""

    float_voltage: CellVoltage  # type: ignore[valid-type]
    float_current: CurrentPerAh  # type: ignore[valid-type]
    boost_voltage: CellVoltage  # type: ignore[valid-type]
    boost_current: CurrentPerAh  # type: ignore[valid-type]
    doubling: TempDifference  # type: ignore[valid-type]

    @model_validator(mode="after")
    def _rising(self) -> Gassing:
        if not (self.boost_voltage.value > self.float_voltage.value
                and self.boost_current.value > self.float_current.value):
            raise ValueError("boost_voltage and boost_current must be above the float ones")
        return self


class Physics(InputModel):
    """The equivalent-circuit charge model's parameters, per cell (see physics/charge.py)."""

    ohmic_resistance: ResistanceCapacity  # type: ignore[valid-type]
    acceptance_resistance: ResistanceCapacity  # type: ignore[valid-type]
    #: the acceptance conductance is (1 - soc)**p / (R_acc * (soc + 0.05)); absent: p = 1
    #: (Shepherd's form, lithium); lead-acid gives its own p
    acceptance_exponent: Power | None = None  # type: ignore[valid-type]
    resistance_doubling: TempDifference  # type: ignore[valid-type]
    coulombic_efficiency: Efficiency  # type: ignore[valid-type]
    peukert_exponent: Exponent  # type: ignore[valid-type]
    gassing: Gassing | None = None


Rate = _sourced("SourcedRate", quantity("rate", ge=0, le=10), "%/day")


class StorageLoss(InputModel):
    """How a stored battery loses charge, and when it must be topped up."""

    self_discharge: Rate  # type: ignore[valid-type]
    reference: Temp  # type: ignore[valid-type]
    doubling: TempDifference  # type: ignore[valid-type]
    top_up_below: Percent  # type: ignore[valid-type]


class Termination(InputModel):
    """Lead-acid: how a charge ends full in the cold, and the guards that stop one going
    wrong (see engine/rules/termination.py). A user profile may only tighten these."""

    tail_doubling: TempDifference  # type: ignore[valid-type]  # tail halves per K cooler
    tail_current_min: CRate  # type: ignore[valid-type]  # the cold tail's floor
    absorption_time_cold_max: Duration  # type: ignore[valid-type]  # stretched limit's ceiling
    charge_cap: Factor  # type: ignore[valid-type]  # x (missing + 10 % of C); x C in a program
    current_rise: CRate  # type: ignore[valid-type]  # at constant voltage, above the lowest
    temperature_rise: TempDifference  # type: ignore[valid-type]  # above the stage's start


class Envelope(InputModel):
    """The hard limits no plan may cross; safety.verify checks every plan against them."""

    max_cell_voltage: CellVoltage  # type: ignore[valid-type]
    max_current: CRate  # type: ignore[valid-type]
    charge_temperature_min: Temp  # type: ignore[valid-type]
    charge_temperature_max: Temp  # type: ignore[valid-type]
    forbidden_stages: list[StageName] = Field(default_factory=list)


class Profile(InputModel):
    id: Annotated[str, Field(pattern=r"^[a-z][a-z0-9_-]{0,39}$")]
    chemistry: Annotated[str, Field(pattern=r"^[a-z][a-z0-9_-]{0,39}$")] = Field(
        description="the built-in chemistry whose hard envelope bounds this profile"
    )
    family: Family
    name: Text
    summary: FreeText = ""
    vented: bool = Field(description="true for flooded cells that gas freely and take water")
    nominal_cell_voltage: CellVoltage  # type: ignore[valid-type]
    charge: Charge
    equalization: Equalization
    desulfation: Desulfation
    temperature: Temperature
    rest_voltage: RestVoltage
    physics: Physics
    storage: StorageLoss
    termination: Termination | None = None
    envelope: Envelope
    cautions: list[FreeText] = Field(default_factory=list)

    @model_validator(mode="after")
    def _consistent(self) -> Profile:
        c = self.charge
        if c.float_voltage is not None and c.float_voltage.value >= c.absorption_voltage.value:
            raise ValueError("charge.float_voltage must be below charge.absorption_voltage")
        if (c.precharge_below is None) != (c.precharge_current is None):
            raise ValueError("give charge.precharge_below and charge.precharge_current together")
        if self.family == "lithium" and c.precharge_below is None:
            raise ValueError("lithium profiles need charge.precharge_below and "
                             "charge.precharge_current (BU-808a)")
        if c.precharge_below is not None and c.precharge_current is not None:
            if c.precharge_below.value >= c.absorption_voltage.value:
                raise ValueError("charge.precharge_below must be below "
                                 "charge.absorption_voltage")
            if c.precharge_current.value > c.bulk_current.value:
                raise ValueError("charge.precharge_current must not exceed charge.bulk_current")
        if c.tail_current.value >= c.bulk_current.value:
            raise ValueError("charge.tail_current must be below charge.bulk_current")
        t = self.temperature
        if t.charge_min.value >= t.charge_max.value:
            raise ValueError("temperature.charge_min must be below temperature.charge_max")
        if self.family == "lithium":
            if t.compensation is not None:
                raise ValueError("lithium voltages are not temperature compensated; "
                                 "remove temperature.compensation")
            if self.termination is not None:
                raise ValueError("termination is for lead-acid (lithium ends on its tail "
                                 "current and its own protection); remove termination")
            for stage in ("equalization", "desulfation"):
                if getattr(self, stage).possible:
                    raise ValueError(f"{stage} is never allowed for lithium; set allowed: "
                                     "false and maker_may_allow: false")
        elif t.compensation is None:
            raise ValueError("lead-acid profiles need temperature.compensation")
        elif t.compensation.range_max.value < t.charge_max.value:
            raise ValueError("temperature.compensation.range_max must reach "
                             "temperature.charge_max: a flat hold below it would charge a warm "
                             "battery at a cooler, higher voltage")
        elif self.physics.gassing is None:
            raise ValueError("lead-acid profiles need physics.gassing")
        elif self.termination is None:
            raise ValueError("lead-acid profiles need termination (the cold tail current, the "
                             "Ah cap and the current- and temperature-rise guards): copy the "
                             "built-in profile's termination block")
        elif self.physics.acceptance_exponent is None:
            raise ValueError("lead-acid profiles need physics.acceptance_exponent")
        return self

    def sourced_values(self) -> list[tuple[str, str, str]]:
        """Every sourced number as (dotted key, value with unit, source), in file order."""
        rows: list[tuple[str, str, str]] = []

        def walk(node: object, prefix: str) -> None:
            if isinstance(node, Sourced):
                rows.append((prefix, node.shown(), node.source))
            elif isinstance(node, InputModel):
                for name in type(node).model_fields:
                    walk(getattr(node, name), f"{prefix}.{name}" if prefix else name)

        walk(self, "")
        rows.insert(
            [r[0] for r in rows].index("envelope.max_cell_voltage"),
            ("rest_voltage.table", f"{len(self.rest_voltage.table)} rows",
             self.rest_voltage.table_source),
        )
        return rows
