"""Design files: TOML with unit-bearing values, validated into a :class:`Design`.

Every physical value is a string with its unit (``"3.3 uF"``, ``"120 V"``); pint checks
its dimension and pydantic checks structure, unknown keys and ranges. Any problem is
raised as :class:`fleetpower.errors.InputError` naming the file and the key.

Owns: the design-file schema (:class:`Design` and its parts and output models),
:func:`load_design`, :func:`design_from_dict`, :func:`parse_load`. May import ``errors``,
``units`` and the rest of ``io``; nothing that simulates or evaluates.
"""

from __future__ import annotations

from pathlib import Path
from typing import Annotated, Any, Literal

from pydantic import BaseModel, BeforeValidator, ConfigDict, Field, ValidationError

from ..errors import InputError, suggest
from ..units import parse_quantity
from .toml import read_toml

TOPOLOGIES = ("capacitive-dropper", "resistive-dropper", "rectifier-smps", "mains-transformer")


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


class _Strict(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True)


class Mains(_Strict):
    """Supply the unit is plugged into (line-to-neutral rms voltage)."""

    voltage: Voltage
    frequency: Frequency
    source_resistance: ResistanceNN = 0.0
    source_inductance: InductanceNN = 0.0


class DiodeSpec(_Strict):
    """Rectifier diode figures as a datasheet gives them (defaults: a 1N400x-like part)."""

    forward_voltage: Voltage = 0.7
    forward_test_current: Current = 0.020


class CapacitiveDropperParts(_Strict):
    series_capacitance: Capacitance
    series_resistance: Resistance
    bleeder_resistance: Resistance
    zener_voltage: Voltage
    rectifier: Literal["half-wave", "bridge"]
    reservoir_capacitance: Capacitance
    capacitor_voltage_rating: Voltage | None = None
    capacitor_rating_type: Literal["ac", "dc"] = "ac"
    zener_power_rating: Power | None = None
    zener_resistance: Resistance = 7.0
    zener_test_current: Current = 0.020
    series_resistor_power_rating: Power | None = None
    bleeder_power_rating: Power | None = None
    diode: DiodeSpec = DiodeSpec()


class ResistiveDropperParts(_Strict):
    dropper_resistance: Resistance
    series_resistance: ResistanceNN = 0.0
    zener_voltage: Voltage
    rectifier: Literal["half-wave", "bridge"]
    reservoir_capacitance: Capacitance
    zener_power_rating: Power | None = None
    zener_resistance: Resistance = 7.0
    zener_test_current: Current = 0.020
    dropper_power_rating: Power | None = None
    diode: DiodeSpec = DiodeSpec()


class SmpsParts(_Strict):
    x_capacitance: Capacitance
    bleeder_resistance: Resistance
    series_resistance: Resistance
    bulk_capacitance: Capacitance
    rectifier: Literal["half-wave", "bridge"] = "bridge"
    x_capacitor_voltage_rating: Voltage | None = None
    x_capacitor_rating_type: Literal["ac", "dc"] = "ac"
    series_resistor_power_rating: Power | None = None
    bleeder_power_rating: Power | None = None
    diode: DiodeSpec = DiodeSpec()


class TransformerParts(_Strict):
    """A 50/60 Hz mains transformer as its datasheet describes it, then a rectifier."""

    secondary_voltage: Voltage  # open-circuit rms at rated mains
    rated_power: Power  # nameplate VA
    regulation_pct: Annotated[float, Field(gt=0, lt=100)]  # no-load to full-load drop
    no_load_power: Power  # core loss at rated mains
    no_load_current: Current | None = None  # magnetizing + core-loss current, rms
    leakage_inductance: InductanceNN = 0.0  # primary-referred
    rectifier: Literal["half-wave", "bridge"] = "bridge"
    reservoir_capacitance: Capacitance
    diode: DiodeSpec = DiodeSpec()


class LinearOutput(_Strict):
    """Linear regulator after the reservoir of a dropper."""

    voltage: Voltage
    regulator: Literal["linear"] = "linear"
    quiescent_current: CurrentNN = 0.0
    dropout: VoltageNN = 1.0


class ConverterOutput(_Strict):
    """Switch-mode converter after the bulk capacitor."""

    voltage: Voltage
    rated_power: Power
    no_load_input_power: Power
    efficiency: list[Annotated[list[float], Field(min_length=2, max_length=2)]] = Field(
        min_length=1
    )
    undervoltage_lockout: Voltage


class Design(BaseModel):
    """A validated design file.

    Attributes are SI values (V, A, W, F, ohm, H, Hz). ``states`` maps each operating
    state to its load on the output: ``("current", A)`` or ``("power", W)``.
    """

    model_config = ConfigDict(extra="forbid", frozen=True, arbitrary_types_allowed=True)

    name: str
    topology: Literal["capacitive-dropper", "resistive-dropper", "rectifier-smps",
                      "mains-transformer"]
    unit_price: Annotated[float, Field(ge=0)] | None = None
    role: str | None = None
    equipment_class: Literal["A", "B", "C", "D"] | None = None
    lighting: bool = False
    isolated: bool | None = None
    rated_state: str | None = None
    mains: Mains
    parts: CapacitiveDropperParts | ResistiveDropperParts | SmpsParts | TransformerParts
    output: LinearOutput | ConverterOutput
    states: dict[str, tuple[str, float]]
    source: str = "<input>"

    @property
    def is_dropper(self) -> bool:
        """A capacitive or resistive dropper (non-isolated, zener-clamped)."""
        return self.topology in ("capacitive-dropper", "resistive-dropper")

    @property
    def has_linear_regulator(self) -> bool:
        return isinstance(self.output, LinearOutput)

    @property
    def is_isolated(self) -> bool:
        """Droppers are never isolated; a transformer always; a switch-mode supply is
        unless the file says not."""
        if self.is_dropper:
            return False
        if self.topology == "mains-transformer":
            return True
        return True if self.isolated is None else self.isolated

    def load_current_a(self, state: str) -> float:
        """Output current [A] of ``state`` (a power is divided by the output voltage)."""
        kind, value = self.states[state]
        return value if kind == "current" else value / self.output.voltage

    def load_power_w(self, state: str) -> float:
        """Output power [W] of ``state``."""
        kind, value = self.states[state]
        return value if kind == "power" else value * self.output.voltage


_PARTS = {
    "capacitive-dropper": CapacitiveDropperParts,
    "resistive-dropper": ResistiveDropperParts,
    "rectifier-smps": SmpsParts,
    "mains-transformer": TransformerParts,
}
_OUTPUT = {
    "capacitive-dropper": LinearOutput,
    "resistive-dropper": LinearOutput,
    "rectifier-smps": ConverterOutput,
    "mains-transformer": LinearOutput,
}


def _fail(file: str, exc: ValidationError, prefix: tuple, model: type[BaseModel]) -> InputError:
    errors = exc.errors()
    # a misspelt key shows up both as unknown and as missing: name the misspelling
    err = next((e for e in errors if e["type"] == "extra_forbidden"), errors[0])
    loc = prefix + tuple(str(p) for p in err["loc"])
    key = ".".join(loc)
    kind = err["type"]
    value = err.get("input")
    if kind == "extra_forbidden":
        fields = model.model_fields
        sub = model
        for part in err["loc"][:-1]:
            ann = sub.model_fields.get(str(part))
            if ann is None or not isinstance(ann.default, BaseModel):
                break
            sub = type(ann.default)
        fields = sub.model_fields
        return InputError(file, key, f"unknown key{suggest(str(err['loc'][-1]), fields)}")
    if kind == "missing":
        return InputError(file, key, "missing key")
    if kind in ("greater_than", "greater_than_equal"):
        bound = "zero" if err["ctx"].get("gt", err["ctx"].get("ge")) == 0 else err["ctx"]
        word = "greater than" if kind == "greater_than" else "at least"
        return InputError(file, key, f"must be {word} {bound}")
    if kind == "literal_error":
        return InputError(
            file, key, f"{value!r} is not one of {err['ctx']['expected']}"
        )
    msg = err["msg"]
    if msg.startswith("Value error, "):
        msg = msg[len("Value error, ") :]
    return InputError(file, key, msg)


def _validate(model: type[BaseModel], data: Any, file: str, prefix: tuple):
    if not isinstance(data, dict):
        raise InputError(file, ".".join(prefix), "expected a table")
    try:
        return model.model_validate(data)
    except ValidationError as exc:
        raise _fail(file, exc, prefix, model) from None


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


def design_from_dict(data: dict, file: str = "<input>") -> Design:
    """Validate a parsed design table; raise :class:`InputError` naming file and key."""
    if not isinstance(data, dict):
        raise InputError(file, "", "expected a TOML table")
    known = set(Design.model_fields) - {"source"}
    for key in data:
        if key not in known:
            raise InputError(file, key, f"unknown key{suggest(key, known)}")
    for key in ("name", "topology", "mains", "parts", "output", "states"):
        if key not in data:
            raise InputError(file, key, "missing key")
    topology = data["topology"]
    if topology not in TOPOLOGIES:
        raise InputError(
            file,
            "topology",
            f"unknown topology {topology!r}{suggest(str(topology), TOPOLOGIES)}; "
            f"choose one of {', '.join(TOPOLOGIES)}",
        )
    mains = _validate(Mains, data["mains"], file, ("mains",))
    parts = _validate(_PARTS[topology], data["parts"], file, ("parts",))
    output = _validate(_OUTPUT[topology], data["output"], file, ("output",))
    if isinstance(output, ConverterOutput):
        for k, pair in enumerate(output.efficiency):
            frac, eta = pair
            if not (0 < frac <= 1.5 and 0 < eta <= 1):
                raise InputError(
                    file,
                    f"output.efficiency[{k}]",
                    "each entry is [fraction_of_rated (0..1.5], efficiency (0..1]]",
                )
        if output.undervoltage_lockout >= mains.voltage * 2**0.5:
            raise InputError(
                file, "output.undervoltage_lockout", "is above the mains peak voltage"
            )
    states_raw = data["states"]
    if not isinstance(states_raw, dict) or not states_raw:
        raise InputError(file, "states", "needs at least one state, e.g. active = \"20 mA\"")
    states = {
        name: parse_load(value, file=file, key=f"states.{name}")
        for name, value in states_raw.items()
    }
    rest = {
        k: v for k, v in data.items() if k not in ("mains", "parts", "output", "states")
    }
    try:
        design = Design.model_validate(
            {**rest, "mains": mains, "parts": parts, "output": output, "states": states,
             "source": file}
        )
    except ValidationError as exc:
        raise _fail(file, exc, (), Design) from None
    if design.rated_state is not None and design.rated_state not in design.states:
        raise InputError(
            file,
            "rated_state",
            f"unknown state {design.rated_state!r}{suggest(design.rated_state, design.states)}",
        )
    if isinstance(parts, TransformerParts):
        if parts.no_load_current is not None and \
                parts.no_load_current <= parts.no_load_power / mains.voltage:
            raise InputError(file, "parts.no_load_current",
                             "must exceed the core-loss current no_load_power / voltage")
        if output.voltage >= parts.secondary_voltage * 2**0.5:
            raise InputError(file, "output.voltage", "is above the secondary's peak voltage")
    elif isinstance(output, LinearOutput) and output.voltage >= parts.zener_voltage:
        raise InputError(
            file, "output.voltage", "must be below parts.zener_voltage (the clamp feeds it)"
        )
    return design


def load_design(path: str | Path) -> Design:
    """Read and validate a design file.

    Raises
    ------
    InputError
        On a missing or unreadable file, malformed TOML, unknown or missing keys, values
        of the wrong dimension, and zero or negative values.
    """
    path = Path(path)
    return design_from_dict(read_toml(path), str(path))
