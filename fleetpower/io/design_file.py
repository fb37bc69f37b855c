"""Design files: TOML with unit-bearing values, validated into a :class:`Design`.

Every physical value is a string with its unit (``"3.3 uF"``, ``"120 V"``); pint checks
its dimension and pydantic checks structure, unknown keys and ranges. Any problem is
raised as :class:`fleetpower.errors.InputError` naming the file and the key.

Owns: the design-file schema (:class:`Design`; its topology names, parts and output
models come from the registry in :mod:`fleetpower.topologies`, the field types from
:mod:`fleetpower.io.schema`),
:func:`load_design`, :func:`design_from_dict`, :func:`parse_load`. May import ``errors``,
``units``, ``gadget_range``, the rest of ``io`` and the topology registry; nothing that simulates or
evaluates.
"""

from __future__ import annotations

from pathlib import Path
from typing import Annotated, Any, Literal, Union

from pydantic import BaseModel, ConfigDict, Field, ValidationError

from ..errors import InputError, suggest
from ..gadget_range import refuse_design
from ..spread.tolerance import SpreadSpec, read_spread_table, split_tolerances
from ..topologies import REGISTRY, TOPOLOGIES, Topology
from .schema import (  # noqa: F401 (re-exported)
    ConverterOutput,
    LinearOutput,
    Mains,
    RatedInput,
    parse_load,
)
from .toml import read_toml

#: every topology's parts and output models, derived from the registry
_PARTS = {name: t.parts_model for name, t in REGISTRY.items()}
_OUTPUT = {name: t.output_model for name, t in REGISTRY.items()}
_PartsUnion = Union[tuple(dict.fromkeys(_PARTS.values()))]  # noqa: UP007
_OutputUnion = Union[tuple(dict.fromkeys(_OUTPUT.values()))]  # noqa: UP007
#: a state is a load ("current" or "power", value) or a topology's own state model
_StateUnion = Union[(tuple[str, float],  # noqa: UP007
                     *dict.fromkeys(t.state_model for t in REGISTRY.values()
                                    if t.state_model is not None))]
#: the tables a design file may hold, over every topology
_PARTS_KEYS = tuple(dict.fromkeys(t.parts_key for t in REGISTRY.values()))
_TABLES = ("mains", "output", "states", "spread", *_PARTS_KEYS)


class Design(BaseModel):
    """A validated design file.

    Attributes are SI values (V, A, W, F, ohm, H, Hz). ``states`` maps each operating
    state to its load on the output: ``("current", A)`` or ``("power", W)``, or to the
    topology's own state model (a measured gadget's file, :mod:`.topologies.measured`).
    """

    model_config = ConfigDict(extra="forbid", frozen=True, arbitrary_types_allowed=True)

    name: str
    topology: Literal[TOPOLOGIES]
    unit_price: Annotated[float, Field(ge=0)] | None = None
    role: str | None = None
    equipment_class: Literal["A", "B", "C", "D"] | None = None
    lighting: bool = False
    isolated: bool | None = None
    rated_state: str | None = None
    standby_state: str | None = None  # the state the EU standby rule applies to
    external_power_supply: bool = False  # declared an EPS: the EPS rules apply
    mains: Mains
    parts: _PartsUnion
    output: _OutputUnion
    states: dict[str, _StateUnion]
    #: declared tolerances, the mains band and the ageing settings (``[spread]``); the
    #: values above are the nominals
    spread: SpreadSpec = SpreadSpec()
    #: input range on the rating label (universal input); None: rated for ``mains`` only
    rated_input: RatedInput | None = None
    source: str = "<input>"

    @property
    def topology_impl(self) -> Topology:
        """This design's topology (:mod:`fleetpower.topologies`)."""
        return REGISTRY[self.topology]

    @property
    def is_dropper(self) -> bool:
        """A capacitive or resistive dropper (non-isolated, zener-clamped)."""
        return self.topology_impl.is_dropper

    @property
    def has_linear_regulator(self) -> bool:
        return isinstance(self.output, LinearOutput)

    @property
    def is_isolated(self) -> bool | None:
        """Whether the output is isolated from the mains (the topology decides; a
        switch-mode supply is unless the file says not; None: not known)."""
        return self.topology_impl.is_isolated(self)

    def load_rank(self, state: str) -> float:
        """A state's weight for picking the heaviest (rated) and lightest (standby) state."""
        return self.topology_impl.load_rank(self, state)

    def on_mains(self, voltage_v: float, frequency_hz: float) -> Design:
        """The same design plugged into other mains (a site's voltage and frequency)."""
        mains = self.mains.model_copy(update={"voltage": voltage_v, "frequency": frequency_hz})
        return self.model_copy(update={"mains": mains})

    def load_current_a(self, state: str) -> float:
        """Output current [A] of ``state`` (a power is divided by the output voltage)."""
        kind, value = self.states[state]
        return value if kind == "current" else value / self.output.voltage

    def load_power_w(self, state: str) -> float:
        """Output power [W] of ``state``."""
        kind, value = self.states[state]
        return value if kind == "power" else value * self.output.voltage


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


def design_from_dict(data: dict, file: str = "<input>") -> Design:
    """Validate a parsed design table; raise :class:`InputError` naming file and key."""
    if not isinstance(data, dict):
        raise InputError(file, "", "expected a TOML table")
    known = (set(Design.model_fields) - {"source", "parts"}) | set(_TABLES)
    for key in data:
        if key not in known:
            raise InputError(file, key, f"unknown key{suggest(key, known)}")
    for key in ("name", "topology"):
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
    impl = REGISTRY[topology]
    pkey = impl.parts_key
    for key in impl.required_tables:
        if key not in data:
            raise InputError(file, key, "missing key")
    for key in _PARTS_KEYS:
        if key in data and key != pkey:
            raise InputError(file, key, f"not a key of a {topology} design (its table is "
                             f"[{pkey}])")
    data = dict(data)
    data.setdefault(pkey, {})
    data.setdefault("output", {})
    states_raw = data.get("states")
    if not isinstance(states_raw, dict) or not states_raw:
        raise InputError(file, "states", "needs at least one state, e.g. active = \"20 mA\"")
    states = {
        name: impl.read_state(value, file=file, key=f"states.{name}")
        for name, value in states_raw.items()
    }
    if "mains" not in data:
        data["mains"] = impl.default_mains(states, file)
    declared = []
    tables = {}
    for name, model in (("mains", Mains), (pkey, _PARTS[topology])):
        if isinstance(data[name], dict):
            tables[name], found = split_tolerances(data[name], name, file=file,
                                                   known=set(model.model_fields))
            declared += found
        else:
            tables[name] = data[name]
    mains = _validate(Mains, tables["mains"], file, ("mains",))
    parts = _validate(_PARTS[topology], tables[pkey], file, (pkey,))
    output = _validate(_OUTPUT[topology], data["output"], file, ("output",))
    rest = {k: v for k, v in data.items() if k not in _TABLES}
    spread = read_spread_table(data.get("spread"), declared, mains.voltage, mains.frequency,
                               file=file)
    try:
        design = Design.model_validate(
            {**rest, "mains": mains, "parts": parts, "output": output, "states": states,
             "spread": spread, "source": file}
        )
    except ValidationError as exc:
        raise _fail(file, exc, (), Design) from None
    for key in ("rated_state", "standby_state"):
        name = getattr(design, key)
        if name is not None and name not in design.states:
            raise InputError(
                file, key, f"unknown state {name!r}{suggest(name, design.states)}; the "
                f"states are {', '.join(design.states)}",
            )
    # mains no small gadget's model means anything on (data/gadget_ranges.csv); values
    # merely unusual are simulated with a warning (fleetpower.gadget_range)
    refuse_design(design, file=file)
    design = design.topology_impl.complete(design)
    design.topology_impl.check(design)
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
