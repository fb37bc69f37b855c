"""Building blocks of the input schema: unit-bearing field types and shared models.

Every physical value is a string with its unit (``"3.3 uF"``, ``"120 V"``); pint checks its
dimension here and pydantic the range. The design file (:mod:`fleetpower.io.design_file`)
and the topologies' parts models (:mod:`fleetpower.topologies`) are built from these.

Owns: the quantity types, :class:`Strict`, :class:`Mains`, :class:`RatedInput`, :class:`DiodeSpec` and the two
output models. May import ``errors`` and ``units`` only.
"""

from __future__ import annotations

from typing import Annotated, Any, Literal

from pydantic import BaseModel, BeforeValidator, ConfigDict, Field, model_validator

from ..errors import InputError
from ..units import parse_quantity


class _UnitError(ValueError):
    pass


def _q(dimension: str):
    def parse(value: Any) -> float:
        try:
            return parse_quantity(value, dimension)
        except InputError as exc:
            raise _UnitError(exc.message) from None

    return BeforeValidator(parse)


Positive = Field(gt=0)
NonNegative = Field(ge=0)
Voltage = Annotated[float, _q("voltage"), Positive]
Current = Annotated[float, _q("current"), Positive]
CurrentNN = Annotated[float, _q("current"), NonNegative]
Power = Annotated[float, _q("power"), Positive]
Capacitance = Annotated[float, _q("capacitance"), Positive]
Resistance = Annotated[float, _q("resistance"), Positive]
ResistanceNN = Annotated[float, _q("resistance"), NonNegative]
InductanceNN = Annotated[float, _q("inductance"), NonNegative]
Frequency = Annotated[float, _q("frequency"), Positive]
VoltageNN = Annotated[float, _q("voltage"), NonNegative]


class Strict(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True)


class Mains(Strict):
    """Supply the unit is plugged into (line-to-neutral rms voltage)."""

    voltage: Voltage
    frequency: Frequency
    source_resistance: ResistanceNN = 0.0
    source_inductance: InductanceNN = 0.0


class DiodeSpec(Strict):
    """Rectifier diode figures as a datasheet gives them (defaults: a 1N400x-like part)."""

    forward_voltage: Voltage = 0.7
    forward_test_current: Current = 0.020


class LinearOutput(Strict):
    """Linear regulator after the reservoir of a dropper."""

    voltage: Voltage
    regulator: Literal["linear"] = "linear"
    quiescent_current: CurrentNN = 0.0
    dropout: VoltageNN = 1.0


class ConverterOutput(Strict):
    """Switch-mode converter after the bulk capacitor."""

    voltage: Voltage
    rated_power: Power
    no_load_input_power: Power
    efficiency: list[Annotated[list[float], Field(min_length=2, max_length=2)]] = Field(
        min_length=1
    )
    undervoltage_lockout: Voltage


class RatedInput(Strict):
    """Input range on the supply's rating label (a universal-input converter: 90-264 V,
    47-63 Hz). Without it the design's rating is its ``mains`` alone."""

    voltage: tuple[Voltage, Voltage]
    frequency: tuple[Frequency, Frequency] | None = None

    @model_validator(mode="after")
    def _ordered(self):
        for name, pair in (("voltage", self.voltage), ("frequency", self.frequency)):
            if pair is not None and pair[0] > pair[1]:
                raise ValueError(f"{name}: the lower end comes first, e.g. [\"90 V\", \"264 V\"]")
        return self


def parse_load(text: Any, *, file: str, key: str) -> tuple[str, float]:
    """A state's load: a current (``"20 mA"``) or a power (``"0.5 W"``), zero allowed."""
    for kind, dim in (("current", "current"), ("power", "power")):
        try:
            value = parse_quantity(text, dim, file=file, key=key)
        except InputError:
            continue
        if value < 0:
            raise InputError(file, key, "a load cannot be negative")
        return kind, value
    raise InputError(file, key, f"{text!r} is neither a current (\"20 mA\") nor a power (\"0.5 W\")")
