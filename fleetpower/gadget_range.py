"""The range of small mains gadgets: where fleetpower's models are meant to be used.

One table, ``data/gadget_ranges.csv`` (read once, :func:`ranges`), declares for each input
quantity and for two results the range a small always-on mains gadget lives in, what to do
outside it and why:

- ``outside = refuse``: the model itself would be meaningless there (mains above 1000 V;
  mains frequency below 15 Hz or above 500 Hz). The design is refused when it is read
  (:func:`refuse_outside`, :class:`~fleetpower.errors.InputError` naming the file and key
  with the physical reason, exit 2).
- ``outside = warn``: the figures can be computed but describe no small gadget (a 1 F X
  capacitor, a 1 mohm bleeder, 100 A of line current). The design is simulated and every
  report carries a :class:`RangeWarning` naming the key, its value and the range
  (:func:`design_warnings` on a validated design, :func:`result_warnings` on a simulated
  state); :mod:`fleetpower.simulate` attaches them to each result, so every verb that
  simulates has them.

Keys: ``mains.*`` and ``parts.*`` are design-file keys; ``states.load_current`` and
``states.load_power`` apply to every state's output load; ``result.i_rms_a`` and
``result.p_w`` to the line current and input power of a simulated state.

Owns: the table's reader, :class:`RangeRow`, :class:`RangeWarning` and the checks. May
import ``errors``, ``units`` and ``_resources`` only (no design, no engine), so the schema
and every verb can use it.
"""

from __future__ import annotations

import csv
import math
from dataclasses import dataclass
from functools import cache, lru_cache
from typing import Any

from ._resources import data_dir
from .errors import InputError
from .units import _PLAIN_PREFIXES, _PLAIN_UNITS, parse_quantity

#: the one table of ranges (shipped data)
RANGES_FILE = "gadget_ranges.csv"
#: how reports name the range
RANGE_NAME = "the range of small mains gadgets"


@dataclass(frozen=True)
class RangeRow:
    """One row of ``data/gadget_ranges.csv``: a quantity's range [SI units] and what to
    do outside it."""

    key: str
    quantity: str
    low_si: float
    high_si: float
    unit: str  # as the table writes it (a prefixed SI unit, e.g. "nF")
    outside: str  # "refuse" or "warn"
    reason: str
    provenance: str

    def contains(self, value: float) -> bool:
        return self.low_si <= value <= self.high_si

    @property
    def range_text(self) -> str:
        return range_words(self.low_si, self.high_si, self.unit)


#: an upper end at or above this [SI] is "no upper end" in :func:`range_words`
_UNBOUNDED = 1e12


def range_words(low_si: float, high_si: float, unit: str) -> str:
    """A range as it reads: "80 V to 280 V", "up to 16 A", "at least 100 ohm"."""
    if high_si >= _UNBOUNDED:
        return f"at least {_in_unit(low_si, unit)}"
    if low_si == 0:
        return f"up to {_in_unit(high_si, unit)}"
    return f"{_in_unit(low_si, unit)} to {_in_unit(high_si, unit)}"


def _split_unit(unit: str) -> tuple[str, str]:
    """("n", "F") of "nF": the SI prefix and the unit symbol."""
    if unit in _PLAIN_UNITS:
        return "", unit
    for prefix in _PLAIN_PREFIXES:
        if prefix and unit.startswith(prefix) and unit[len(prefix):] in _PLAIN_UNITS:
            return prefix, unit[len(prefix):]
    raise ValueError(f"{RANGES_FILE}: unit {unit!r} is not a prefixed SI unit")


def _in_unit(value_si: float, unit: str) -> str:
    """A value [SI] of the table's unit's quantity, SI-prefixed as a design file would
    write it (4.7e-6 F -> "4.7 uF")."""
    return value_text(value_si, _split_unit(unit)[1])


#: SI prefixes for :func:`value_text`, largest first (ASCII, as design files spell them)
_PREFIXES = ((1e9, "G"), (1e6, "M"), (1e3, "k"), (1.0, ""), (1e-3, "m"), (1e-6, "u"),
             (1e-9, "n"), (1e-12, "p"))


def value_text(value_si: float, symbol: str) -> str:
    """A value [SI] with an SI prefix as a design file spells it (1e-6 F -> "1 uF")."""
    if value_si == 0 or not math.isfinite(value_si):
        return f"{value_si:.4g} {symbol}"
    scale, prefix = next(((k, p) for k, p in _PREFIXES if abs(value_si) >= k * (1 - 1e-12)),
                         _PREFIXES[-1])
    return f"{value_si / scale:.4g} {prefix}{symbol}"


@lru_cache(maxsize=1)
def ranges() -> tuple[RangeRow, ...]:
    """Every row of ``data/gadget_ranges.csv``, read once per process."""
    rows = []
    path = data_dir() / RANGES_FILE
    with open(path, encoding="utf-8", newline="") as fh:
        for rec in csv.DictReader(fh):
            prefix, symbol = _split_unit(rec["unit"])
            dim = _PLAIN_UNITS[symbol]
            lo, hi = (parse_quantity(f"{rec[k]} {rec['unit']}", dim, file=str(path),
                                     key=rec["key"]) for k in ("low", "high"))
            if rec["outside"] not in ("refuse", "warn") or not lo <= hi:
                raise ValueError(f"{path}: row {rec['key']}: outside must be refuse or warn "
                                 "and low <= high")
            rows.append(RangeRow(rec["key"], rec["quantity"], lo, hi, rec["unit"],
                                 rec["outside"], rec["reason"], rec["provenance"]))
    return tuple(rows)


def rows_for(key: str, outside: str | None = None) -> tuple[RangeRow, ...]:
    """The rows of ``key`` (all, or only those with ``outside`` = "refuse" / "warn")."""
    return _index().get((key, outside), ())


@lru_cache(maxsize=1)
def _index() -> dict[tuple[str, str | None], tuple[RangeRow, ...]]:
    """:func:`rows_for` of every key and kind, built once (it runs per solved case)."""
    out: dict[tuple[str, str | None], list[RangeRow]] = {}
    for r in ranges():
        for kind in (None, r.outside):
            out.setdefault((r.key, kind), []).append(r)
    return {k: tuple(v) for k, v in out.items()}


@lru_cache(maxsize=1)
def _input_rows() -> tuple[tuple[str, str, str], ...]:
    """(row key, table, field) of every ``mains.*`` / ``parts.*`` row with a warning range."""
    keys = dict.fromkeys(r.key for r in ranges() if r.outside == "warn")
    return tuple((k, *k.split(".", 1)) for k in keys if k.split(".", 1)[0] in ("mains", "parts"))


# ----------------------------------------------------------------------------------
# refusals: the model would be meaningless
# ----------------------------------------------------------------------------------
def refusal(key: str, value_si: float) -> str | None:
    """The one-line physical reason ``value_si`` of ``key`` is refused, or None."""
    for row in rows_for(key, "refuse"):
        if not row.contains(value_si):
            symbol = _split_unit(row.unit)[1]
            return (f"{value_text(value_si, symbol)} is outside what fleetpower can model "
                    f"({row.range_text}): {row.reason} ({row.provenance})")
    return None


def refuse_outside(key: str, value_si: float, *, file: str, where: str | None = None) -> None:
    """Raise :class:`InputError` naming ``file`` and ``where`` (default ``key``) when
    ``value_si`` lies outside a refusing row of ``key``."""
    why = refusal(key, value_si)
    if why is not None:
        raise InputError(file, where or key, why)


def refuse_design(design, *, file: str) -> None:
    """Refuse (:class:`InputError` naming ``file`` and the key) a validated design any of
    whose ``mains.*`` or ``parts.*`` values lies outside a refusing row."""
    for row_key in dict.fromkeys(r.key for r in ranges() if r.outside == "refuse"):
        table, _, name = row_key.partition(".")
        holder = {"mains": design.mains, "parts": design.parts}.get(table)
        value = getattr(holder, name, None)
        if isinstance(value, (int, float)) and not isinstance(value, bool):
            refuse_outside(row_key, float(value), file=file)


# ----------------------------------------------------------------------------------
# warnings: simulated, but no small gadget looks like this
# ----------------------------------------------------------------------------------
@dataclass(frozen=True)
class RangeWarning:
    """A value outside :data:`RANGE_NAME`: simulated, and said so in every report."""

    key: str  # where the value is: a design-file key ("parts.x_capacitance",
    # "states.active") or a result ("result.i_rms_a")
    quantity: str
    value_si: float
    low_si: float
    high_si: float
    unit: str  # the table's unit
    reason: str
    provenance: str
    design: str = ""  # the design's name
    state: str | None = None  # the state of a result or a load

    @property
    def symbol(self) -> str:
        return _split_unit(self.unit)[1]

    @property
    def message(self) -> str:
        """One sentence naming the design, the key, the value and the range."""
        who = f"design '{self.design}'" if self.design else "the design"
        where = f"{who}, state '{self.state}'" if self.state else who
        what = (f"{self.quantity} {value_text(self.value_si, self.symbol)}"
                if self.key.startswith("result.") else
                f"{self.key} = {value_text(self.value_si, self.symbol)}")
        return (f"{where}: {what} is outside {RANGE_NAME} "
                f"({range_words(self.low_si, self.high_si, self.unit)}; data/{RANGES_FILE}): "
                "simulated, but the figures describe no small gadget")

    @property
    def short(self) -> str:
        """``key = value (range low to high)``, for a line that says more around it."""
        return (f"{self.key} = {value_text(self.value_si, self.symbol)} (range "
                f"{range_words(self.low_si, self.high_si, self.unit)})")

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready (SI values; ``unit`` is the SI unit of the values)."""
        return {"design": self.design, "state": self.state, "key": self.key,
                "quantity": self.quantity, "value": self.value_si, "low": self.low_si,
                "high": self.high_si, "unit": self.symbol, "reason": self.reason,
                "provenance": self.provenance, "message": self.message}


def _warn(key: str, row_key: str, value: float | None, design: str,
          state: str | None = None) -> list[RangeWarning]:
    if value is None or not isinstance(value, (int, float)):
        return []
    value = float(value)
    return [RangeWarning(key, row.quantity, value, row.low_si, row.high_si, row.unit,
                         row.reason, row.provenance, design, state)
            for row in rows_for(row_key, "warn") if not row.contains(value)]


@cache
def _bounds(row_key: str) -> tuple[tuple[float, float], ...]:
    """(low, high) [SI] of every warning row of ``row_key``."""
    return tuple((r.low_si, r.high_si) for r in rows_for(row_key, "warn"))


def _inside(value, bounds: tuple[tuple[float, float], ...]) -> bool:
    """Whether ``value`` is inside every range (or not a number to check: no warning)."""
    if value is None or not isinstance(value, (int, float)):
        return True
    for low, high in bounds:
        if not low <= value <= high:
            return False
    return True


@cache
def _checks(mains_cls: type, parts_cls: type) -> tuple[tuple[str, int, str, bool, tuple], ...]:
    """(row key, holder 0 = mains / 1 = parts, field, stored, bounds) of the input rows a
    design with these mains and parts models can have: a field its pydantic model lacks
    is left out, and one it stores is read from the instance's ``__dict__`` (``stored``),
    without pydantic's attribute path (asked of every design in a spread); a property, or
    any field of a holder that is not a pydantic model, is read as an attribute."""
    classes = (mains_cls, parts_cls)
    out = []
    for row_key, table, field in _input_rows():
        which = 0 if table == "mains" else 1
        cls = classes[which]
        fields = getattr(cls, "model_fields", None)  # None: not a pydantic model
        attribute = fields is None or hasattr(cls, field)
        if not attribute and field not in fields:
            continue  # absent from this model: never a value to check
        out.append((row_key, which, field, not attribute, _bounds(row_key)))
    return tuple(out)


def design_warnings(design) -> tuple[RangeWarning, ...]:
    """Inputs of a validated design (its mains, parts and state loads) outside the range.

    ``design`` is a :class:`fleetpower.io.design_file.Design` (duck-typed: ``name``,
    ``mains``, ``parts``, ``states``, ``load_current_a``, ``load_power_w``).
    """
    out: list[RangeWarning] = []
    name = design.name
    holders = (design.mains, design.parts)
    for row_key, which, field, stored, bounds in _checks(type(design.mains),
                                                          type(design.parts)):
        holder = holders[which]
        value = holder.__dict__.get(field) if stored else getattr(holder, field, None)
        if not _inside(value, bounds):  # checked first: run per solved design
            out += _warn(row_key, row_key, value, name)
    for state, load in design.states.items():
        if not (isinstance(load, tuple) and len(load) == 2):
            continue  # a measured gadget's state is a file, not a load
        current, power = design.load_current_a(state), design.load_power_w(state)
        if _inside(current, _bounds("states.load_current")) and \
                _inside(power, _bounds("states.load_power")):
            continue
        key = f"states.{state}"
        out += _warn(key, "states.load_current", current, name, state)
        out += _warn(key, "states.load_power", power, name, state)
    return tuple(out)


def result_warnings(design_name: str, state: str, i_rms_a: float,
                    p_w: float) -> tuple[RangeWarning, ...]:
    """A simulated state's line current [A] and input power [W] outside the range."""
    if _inside(i_rms_a, _bounds("result.i_rms_a")) and _inside(p_w, _bounds("result.p_w")):
        return ()  # the usual case, asked per solved case
    return tuple(_warn("result.i_rms_a", "result.i_rms_a", i_rms_a, design_name, state)
                 + _warn("result.p_w", "result.p_w", p_w, design_name, state))


def unique(warnings) -> list[RangeWarning]:
    """Warnings without repeats (the same design, key and state once), in order."""
    seen: dict[tuple, RangeWarning] = {}
    for w in warnings:
        seen.setdefault((w.design, w.key, w.state), w)
    return list(seen.values())
