"""A charger channel: what it can set and what it cannot switch off."""

from __future__ import annotations

from pydantic import Field, model_validator

from chargeplan.model.fields import InputModel, Text, quantity

__all__ = ["ChargerChannel"]


class ChargerChannel(InputModel):
    """One charger channel. Voltages are the battery terminal voltage it can regulate."""

    name: Text | None = None
    max_voltage_v: quantity("voltage", ge=0.5, le=1000) = Field(
        alias="max_voltage", description="highest voltage the channel can set"
    )
    min_voltage_v: quantity("voltage", ge=0, le=1000) = Field(
        default=0.0, alias="min_voltage", description="lowest voltage the channel can regulate"
    )
    max_current_a: quantity("current", ge=0.001, le=10_000) = Field(
        alias="max_current", description="highest charge current the channel can deliver"
    )
    min_current_a: quantity("current", ge=0, le=10_000) = Field(
        default=0.0,
        alias="min_current",
        description="lowest current the channel can regulate and measure (for pre-charge and "
        "tail-current exits)",
    )
    voltage_step: quantity("voltage", ge=0.0001, le=10) | None = Field(
        default=None, alias="voltage_step",
        description="the channel's voltage resolution; setpoints become multiples of it",
    )
    current_step: quantity("current", ge=0.0001, le=100) | None = Field(
        default=None, alias="current_step",
        description="the channel's current resolution; setpoints become multiples of it",
    )
    temperature_probe: bool = Field(
        default=False, description="a battery temperature probe compensates setpoints live"
    )
    can_disable_high_voltage_stages: bool = Field(
        default=False,
        description="true only when the channel has no equalization or desulfation stage, or "
        "can switch it off; left out, it is assumed false and the channel is refused for "
        "lithium, gel and AGM",
    )

    @model_validator(mode="after")
    def _ranges_in_order(self) -> ChargerChannel:
        if self.min_voltage_v >= self.max_voltage_v:
            raise ValueError(
                "min_voltage must be below max_voltage; check the channel's voltage range"
            )
        if self.min_current_a >= self.max_current_a:
            raise ValueError(
                "min_current must be below max_current; check the channel's current range"
            )
        return self
