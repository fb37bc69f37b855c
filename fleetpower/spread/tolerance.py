"""Tolerance declarations: a part's nominal value, its band and how units spread inside it.

A design file may write a part as a plain value (``series_capacitance = "1 uF"``) or as an
inline table that adds its spread::

    series_capacitance = { value = "1 uF", tolerance = "10 %" }                  # uniform
    zener_voltage = { value = "10 V", tolerance = "5 %", distribution = "normal" }  # band = 3 sigma
    zener_voltage = { value = "10 V", tolerance = "5 %", distribution = "normal", sigmas = 2 }
    series_resistance = { value = "47 ohm", distribution = "corners",
                          corners = ["44.65 ohm", "47 ohm", "49.35 ohm"] }

and the mains band of a site or a run as ``{ voltage = "10 %", frequency = "1 %" }``.

Distributions
-------------
``uniform``
    Every value in ``nominal * (1 +- band)`` equally likely. The usual reading of a
    tolerance printed on a part when nothing else is known (common practice, no source).
``normal``
    Normal about the nominal with the band equal to ``sigmas`` standard deviations
    (default :data:`DEFAULT_SIGMAS` = 3, so 99.73 % of units fall inside the printed band;
    common practice, no source). The tails are cut at :data:`NORMAL_TRUNCATION_SIGMAS`
    standard deviations so a part that must stay positive cannot be drawn negative.
``corners``
    A fixed list of values (measured bins, preferred values); Monte Carlo draws each with
    equal probability; corner analysis takes the smallest and the largest.

Defaults by part class
----------------------
:data:`PART_CLASS_DEFAULTS` holds the band assumed for a part declared as a plain value
when a spread run is asked to fill in undeclared tolerances; each entry carries its
provenance.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass
from typing import Any, Literal

import numpy as np
from pydantic import BaseModel, ConfigDict, ValidationError

from ..errors import InputError, suggest
from ..units import parse_quantity

DISTRIBUTIONS = ("uniform", "normal", "corners")
#: band of a ``normal`` declaration in standard deviations, when not given (common
#: practice, no source: a printed tolerance is read as the 3-sigma limits of production)
DEFAULT_SIGMAS = 3.0
#: a normal draw is cut at this many standard deviations (Phi(-6) = 1e-9: no visible
#: change to the distribution, but a bounded range that validation can check)
NORMAL_TRUNCATION_SIGMAS = 6.0


@dataclass(frozen=True)
class ClassDefault:
    """Usual tolerance of a part class and where the figure comes from."""

    band: float  # relative half-width of the band [-]
    distribution: str
    source: str


#: Usual tolerance by part class. Used only where the design declares none and the run
#: asks for defaults. Provenance beside each.
PART_CLASS_DEFAULTS: dict[str, ClassDefault] = {
    "film-capacitor": ClassDefault(
        0.10, "uniform",
        "common practice, no source: metallized-film X2 / dropper capacitors are sold as "
        "K (±10 %) or M (±20 %); K is the usual choice for a dropper"),
    "electrolytic-capacitor": ClassDefault(
        0.20, "uniform",
        "common practice, no source: aluminium electrolytics are ±20 % (M) parts"),
    "resistor": ClassDefault(
        0.05, "uniform",
        "common practice, no source: carbon-film resistors are J (±5 %) parts; "
        "declare 1 % for metal film"),
    "zener": ClassDefault(
        0.05, "uniform",
        "from memory: the usual zener series (1N47xxA, BZX55C) specify ±5 % of V_Z "
        "at the test current"),
    "mains-voltage": ClassDefault(
        0.10, "uniform",
        "from memory: EN 50160 (supply voltage variations) ±10 % of the nominal voltage "
        "for 95 % of the 10-min means of a week; IEC 60038 230 V ±10 %"),
    "mains-frequency": ClassDefault(
        0.01, "uniform",
        "from memory: EN 50160 (power frequency) 50 Hz ±1 % during 99.5 % of a year on "
        "interconnected systems"),
}

#: Keys that take a tolerance: key -> (dimension, part class or None for no default).
#: Every listed part must stay positive. A key of the design schema that is not listed
#: (a rating, a rectifier kind, a test condition) takes none.
TOLERANCE_KEYS: dict[str, tuple[str, str | None]] = {
    "parts.series_capacitance": ("capacitance", "film-capacitor"),
    "parts.x_capacitance": ("capacitance", "film-capacitor"),
    "parts.reservoir_capacitance": ("capacitance", "electrolytic-capacitor"),
    "parts.bulk_capacitance": ("capacitance", "electrolytic-capacitor"),
    "parts.series_resistance": ("resistance", "resistor"),
    "parts.bleeder_resistance": ("resistance", "resistor"),
    "parts.dropper_resistance": ("resistance", "resistor"),
    "parts.zener_voltage": ("voltage", "zener"),
    "parts.zener_resistance": ("resistance", None),
    "parts.secondary_voltage": ("voltage", None),
    "parts.no_load_power": ("power", None),
    "mains.voltage": ("voltage", "mains-voltage"),
    "mains.frequency": ("frequency", "mains-frequency"),
}

_PERCENT = re.compile(r"^\s*([0-9]*\.?[0-9]+(?:[eE][-+]?[0-9]+)?)\s*%\s*$")
_NEG_PERCENT = re.compile(r"^\s*-\s*[0-9.]+(?:[eE][-+]?[0-9]+)?\s*%\s*$")


def parse_band(text: Any, *, file: str = "<input>", key: str = "") -> float:
    """Read a tolerance band such as ``"10 %"`` and return it as a fraction (0.10).

    Raises
    ------
    InputError
        On a negative band, a missing ``%`` or anything that is not a percentage.
    """
    if isinstance(text, str):
        if _NEG_PERCENT.match(text):
            raise InputError(file, key, f"tolerance band {text!r} cannot be negative")
        m = _PERCENT.match(text)
        if m:
            return float(m.group(1)) / 100.0
    if isinstance(text, (int, float)) and not isinstance(text, bool) and text < 0:
        raise InputError(file, key, f"tolerance band {text!r} cannot be negative")
    raise InputError(file, key, f"expected a tolerance band as a percentage, e.g. \"10 %\", "
                                f"not {text!r}")


class ToleranceDecl(BaseModel):
    """The inline table of a toleranced value, as written (before units are read)."""

    model_config = ConfigDict(extra="forbid", frozen=True)

    value: Any
    tolerance: Any = None
    distribution: Literal["uniform", "normal", "corners"] = "uniform"
    sigmas: float | None = None
    corners: list[Any] | None = None


class MainsBandDecl(BaseModel):
    """The mains band of a site or a run: relative bands of voltage and frequency."""

    model_config = ConfigDict(extra="forbid", frozen=True)

    voltage: Any = None
    frequency: Any = None
    distribution: Literal["uniform", "normal"] = "uniform"
    sigmas: float | None = None


@dataclass(frozen=True)
class PartSpread:
    """One toleranced value, in SI units.

    Attributes
    ----------
    key : str
        Key path in the design (``"parts.series_capacitance"``, ``"mains.voltage"``).
    nominal : float
        Nominal value [SI unit of the key].
    distribution : str
        ``"uniform"``, ``"normal"`` or ``"corners"``.
    band : float
        Relative half-width of the band [-] (0 for ``corners``).
    sigmas : float
        Standard deviations the band spans (``normal`` only).
    corners : tuple of float
        The listed values (``corners`` only) [SI unit of the key].
    source : str
        Where the band comes from ("declared" or a class default's provenance).
    """

    key: str
    nominal: float
    distribution: str = "uniform"
    band: float = 0.0
    sigmas: float = DEFAULT_SIGMAS
    corners: tuple[float, ...] = ()
    source: str = "declared"

    @property
    def low(self) -> float:
        """Smallest value a unit can have (corner analysis takes it) [SI]."""
        if self.distribution == "corners":
            return min(self.corners)
        return self.nominal * (1.0 - self.band)

    @property
    def high(self) -> float:
        """Largest value a unit can have (corner analysis takes it) [SI]."""
        if self.distribution == "corners":
            return max(self.corners)
        return self.nominal * (1.0 + self.band)

    @property
    def varies(self) -> bool:
        """Whether units differ at all in this value."""
        return self.high > self.low

    def from_uniform(self, u: np.ndarray) -> np.ndarray:
        """Map uniform variates ``u`` in [0, 1) to values of this part [SI].

        Notes
        -----
        Inverse-transform sampling (Devroye 1986, ch. II.2): if :math:`U` is uniform on
        [0, 1) then :math:`F^{-1}(U)` has distribution :math:`F`. Uniform:
        :math:`x = x_0 (1 + b (2u - 1))`. Normal with the band at :math:`k\\sigma`:
        :math:`x = x_0 (1 + (b/k) \\Phi^{-1}(u))`, with :math:`u` first clipped to
        :math:`[\\Phi(-6), \\Phi(6)]` (truncation at 6 sigma). Corners: the
        :math:`\\lfloor u n \\rfloor`-th listed value. One variate per part keeps each
        column of a sample independent of how many other parts are declared.

        References
        ----------
        .. [1] L. Devroye, *Non-Uniform Random Variate Generation*, Springer, 1986.
        """
        u = np.asarray(u, dtype=float)
        if self.distribution == "uniform":
            return self.nominal * (1.0 + self.band * (2.0 * u - 1.0))
        if self.distribution == "normal":
            from scipy.special import ndtr, ndtri  # only when sampling: a quick `unit` skips it

            edge = float(ndtr(-NORMAL_TRUNCATION_SIGMAS))
            z = ndtri(np.clip(u, edge, 1.0 - edge))
            return self.nominal * (1.0 + (self.band / self.sigmas) * z)
        values = np.asarray(self.corners, dtype=float)
        idx = np.minimum((u * len(values)).astype(np.int64), len(values) - 1)
        return values[idx]


def _check_positive(spread: PartSpread, file: str, key: str, band_where: str = "") -> None:
    band_where = band_where or f"{key}.tolerance"
    if spread.distribution == "corners":
        bad = [c for c in spread.corners if not c > 0]
        if bad:
            raise InputError(file, f"{key}.corners", "every corner value must be greater than zero")
        return
    if spread.distribution == "uniform" and spread.band >= 1.0:
        raise InputError(
            file, band_where,
            f"a band of {spread.band * 100:g} % reaches zero or below; this part must stay "
            "positive (use less than 100 %)")
    if spread.distribution == "normal":
        reach = spread.band / spread.sigmas * NORMAL_TRUNCATION_SIGMAS
        if reach >= 1.0:
            raise InputError(
                file, band_where,
                f"a band of {spread.band * 100:g} % at {spread.sigmas:g} sigma reaches zero "
                f"within the {NORMAL_TRUNCATION_SIGMAS:g}-sigma tails; this part must stay "
                f"positive (use less than {spread.sigmas / NORMAL_TRUNCATION_SIGMAS * 100:g} %)")


def _decl_error(file: str, key: str, exc: ValidationError) -> InputError:
    err = exc.errors()[0]
    loc = ".".join([key, *(str(p) for p in err["loc"])])
    if err["type"] == "extra_forbidden":
        return InputError(file, loc, "unknown key" + suggest(
            str(err["loc"][-1]), ToleranceDecl.model_fields))
    if err["type"] == "literal_error":
        return InputError(
            file, loc, f"unknown distribution {err.get('input')!r}"
            f"{suggest(str(err.get('input')), DISTRIBUTIONS)}; choose one of "
            f"{', '.join(DISTRIBUTIONS)}")
    if err["type"] == "missing":
        return InputError(file, loc, "missing key")
    return InputError(file, loc, err["msg"])


def read_toleranced(
    raw: Any, key: str, *, file: str = "<input>"
) -> tuple[Any, PartSpread | None]:
    """Split a design-file value into its plain nominal and its declared spread.

    Parameters
    ----------
    raw : str or dict
        The value as written: ``"1 uF"`` or ``{ value = "1 uF", tolerance = "10 %" }``.
    key : str
        Its key path, e.g. ``"parts.series_capacitance"``.
    file : str
        File name for error messages.

    Returns
    -------
    nominal : Any
        What the plain schema expects in place of ``raw`` (the ``value`` string).
    spread : PartSpread or None
        The declared spread in SI units; ``None`` for a plain value.

    Raises
    ------
    InputError
        One line naming the file and key: a tolerance on a key that takes none, an
        unknown distribution or key, a negative band, a band that reaches zero for a part
        that must stay positive, a malformed value.
    """
    if not isinstance(raw, dict):
        return raw, None
    if key not in TOLERANCE_KEYS:
        takes = ", ".join(k.split(".", 1)[1] for k in TOLERANCE_KEYS if k.startswith(
            key.split(".", 1)[0] + "."))
        raise InputError(file, key, f"takes no tolerance (keys that do here: {takes})")
    try:
        decl = ToleranceDecl.model_validate(raw)
    except ValidationError as exc:
        raise _decl_error(file, key, exc) from None
    dimension, part_class = TOLERANCE_KEYS[key]
    nominal = parse_quantity(decl.value, dimension, file=file, key=f"{key}.value")
    if not nominal > 0:
        raise InputError(file, f"{key}.value", "must be greater than zero")
    if decl.distribution == "corners":
        if decl.tolerance is not None:
            raise InputError(file, f"{key}.tolerance",
                             "a 'corners' declaration lists its values; give no tolerance")
        if not decl.corners:
            raise InputError(file, f"{key}.corners",
                             "a 'corners' declaration needs a list of values")
        values = tuple(
            parse_quantity(c, dimension, file=file, key=f"{key}.corners[{i}]")
            for i, c in enumerate(decl.corners)
        )
        spread = PartSpread(key, nominal, "corners", corners=values)
    else:
        if decl.corners is not None:
            raise InputError(file, f"{key}.corners",
                             "only a 'corners' declaration takes a list of values")
        if decl.sigmas is not None and decl.distribution != "normal":
            raise InputError(file, f"{key}.sigmas", "only a 'normal' declaration takes sigmas")
        sigmas = DEFAULT_SIGMAS if decl.sigmas is None else float(decl.sigmas)
        if not (math.isfinite(sigmas) and sigmas > 0):
            raise InputError(file, f"{key}.sigmas", "must be greater than zero")
        if decl.tolerance is None:
            default = PART_CLASS_DEFAULTS.get(part_class) if part_class else None
            if default is None:
                raise InputError(file, f"{key}.tolerance",
                                 "missing key (this part has no usual tolerance to assume)")
            band, source = default.band, f"class default: {default.source}"
        else:
            band = parse_band(decl.tolerance, file=file, key=f"{key}.tolerance")
            source = "declared"
        spread = PartSpread(key, nominal, decl.distribution, band, sigmas, source=source)
    _check_positive(spread, file, key)
    return decl.value, spread


def split_tolerances(
    table: dict, prefix: str, *, file: str = "<input>", known: set[str] | None = None
) -> tuple[dict, list[PartSpread]]:
    """Replace every toleranced value of a design-file table by its plain nominal.

    A value is a tolerance declaration when it is an inline table with a ``value``,
    ``tolerance``, ``distribution`` or ``corners`` key; other tables (``diode``) are
    left to the schema, and so are keys not in ``known`` (the schema names them unknown).

    Returns
    -------
    plain : dict
        The table the plain schema validates.
    spreads : list of PartSpread
        Declared spreads, in file order.
    """
    plain, spreads = {}, []
    marks = {"value", "tolerance", "distribution", "corners", "sigmas"}
    for name, raw in table.items():
        key = f"{prefix}.{name}"
        if isinstance(raw, dict) and marks & set(raw) and (known is None or name in known):
            nominal, spread = read_toleranced(raw, key, file=file)
            plain[name] = nominal
            spreads.append(spread)
        else:
            plain[name] = raw
    return plain, spreads


def default_spreads(
    nominals: dict[str, float], declared: list[PartSpread]
) -> list[PartSpread]:
    """Spreads of the undeclared keys that have a part-class default.

    Parameters
    ----------
    nominals : dict
        Key path -> nominal SI value of every toleranceable key present in the design.
    declared : list of PartSpread
        What the file declared (those keys are left alone).

    Returns
    -------
    list of PartSpread
        One per undeclared key with a class default, in the order of ``nominals``; the
        ``source`` names the default's provenance.
    """
    have = {s.key for s in declared}
    out = []
    for key, value in nominals.items():
        if key in have or key not in TOLERANCE_KEYS or not value > 0:
            continue
        part_class = TOLERANCE_KEYS[key][1]
        if part_class is None:
            continue
        d = PART_CLASS_DEFAULTS[part_class]
        out.append(PartSpread(key, float(value), d.distribution, d.band,
                              source=f"class default: {d.source}"))
    return out


def mains_band_spreads(
    raw: Any, voltage_v: float, frequency_hz: float, *, file: str = "<input>",
    key: str = "mains_band",
) -> list[PartSpread]:
    """The mains band of a site or run as spreads of ``mains.voltage`` / ``mains.frequency``.

    Parameters
    ----------
    raw : dict or None
        ``{ voltage = "10 %", frequency = "1 %", distribution = "uniform" }``; a missing
        band takes the class default (:data:`PART_CLASS_DEFAULTS`); ``None`` takes both.
    voltage_v, frequency_hz : float
        Nominal rms voltage [V] and frequency [Hz].
    """
    raw = {} if raw is None else raw
    if not isinstance(raw, dict):
        raise InputError(file, key, "expected a table, e.g. { voltage = \"10 %\", "
                                    "frequency = \"1 %\" }")
    try:
        decl = MainsBandDecl.model_validate(raw)
    except ValidationError as exc:
        err = exc.errors()[0]
        loc = ".".join([key, *(str(p) for p in err["loc"])])
        if err["type"] == "extra_forbidden":
            raise InputError(file, loc, "unknown key" + suggest(
                str(err["loc"][-1]), MainsBandDecl.model_fields)) from None
        if err["type"] == "literal_error":
            raise InputError(file, loc, f"unknown distribution {err.get('input')!r}; "
                                        "choose uniform or normal") from None
        raise InputError(file, loc, err["msg"]) from None
    if decl.sigmas is not None and decl.distribution != "normal":
        raise InputError(file, f"{key}.sigmas", "only a 'normal' band takes sigmas")
    sigmas = DEFAULT_SIGMAS if decl.sigmas is None else float(decl.sigmas)
    if not (math.isfinite(sigmas) and sigmas > 0):
        raise InputError(file, f"{key}.sigmas", "must be greater than zero")
    out = []
    for name, nominal, text, cls in (
        ("voltage", voltage_v, decl.voltage, "mains-voltage"),
        ("frequency", frequency_hz, decl.frequency, "mains-frequency"),
    ):
        default = PART_CLASS_DEFAULTS[cls]
        if text is None:
            band, source = default.band, f"class default: {default.source}"
        else:
            band, source = parse_band(text, file=file, key=f"{key}.{name}"), "declared"
        spread = PartSpread(f"mains.{name}", float(nominal), decl.distribution, band, sigmas,
                            source=source)
        _check_positive(spread, file, key, band_where=f"{key}.{name}")
        out.append(spread)
    return out


class SpreadDecl(BaseModel):
    """The design file's ``[spread]`` table, as written."""

    model_config = ConfigDict(extra="forbid", frozen=True)

    mains: Any = None
    capacitor_loss_per_year: Any = None
    capacitor_loss_voltage_accelerated: bool = False
    part_class_defaults: bool = True


@dataclass(frozen=True)
class SpreadSpec:
    """What a design declares about its production spread and ageing.

    Attributes
    ----------
    parts : tuple of PartSpread
        Tolerances declared beside values in ``[parts]`` and ``[mains]``.
    mains_band : tuple of PartSpread
        The band of ``[spread] mains`` (empty: the class defaults, or ``[mains]``'s own).
    capacitor_loss_per_year : float
        Capacitance loss of the series / X capacitor [1/year] at the reference stress
        (:data:`fleetpower.spread.ageing.DEFAULT_LOSS_PER_YEAR` unless declared).
    capacitor_loss_voltage_accelerated : bool
        Scale that loss by the voltage stress on the capacitor's ac rating.
    part_class_defaults : bool
        Undeclared parts take their class's usual tolerance (:data:`PART_CLASS_DEFAULTS`).
    """

    parts: tuple[PartSpread, ...] = ()
    mains_band: tuple[PartSpread, ...] = ()
    capacitor_loss_per_year: float | None = None
    capacitor_loss_voltage_accelerated: bool = False
    part_class_defaults: bool = True


def read_spread_table(
    raw: Any, declared: list[PartSpread], voltage_v: float, frequency_hz: float, *,
    file: str = "<input>",
) -> SpreadSpec:
    """Validate a design's ``[spread]`` table into a :class:`SpreadSpec`.

    Parameters
    ----------
    raw : dict or None
        The table as written (None when the file has none).
    declared : list of PartSpread
        Tolerances declared beside values (from :func:`split_tolerances`).
    voltage_v, frequency_hz : float
        The design's nominal mains [V], [Hz].
    """
    if raw is None:
        return SpreadSpec(parts=tuple(declared))
    if not isinstance(raw, dict):
        raise InputError(file, "spread", "expected a table")
    try:
        decl = SpreadDecl.model_validate(raw)
    except ValidationError as exc:
        err = exc.errors()[0]
        loc = ".".join(["spread", *(str(p) for p in err["loc"])])
        if err["type"] == "extra_forbidden":
            raise InputError(file, loc, "unknown key" + suggest(
                str(err["loc"][-1]), SpreadDecl.model_fields)) from None
        raise InputError(file, loc, err["msg"]) from None
    band: tuple[PartSpread, ...] = ()
    if decl.mains is not None:
        if any(s.key.startswith("mains.") for s in declared):
            raise InputError(file, "spread.mains",
                             "the mains band is already declared beside [mains] values; "
                             "declare it once")
        band = tuple(mains_band_spreads(decl.mains, voltage_v, frequency_hz, file=file,
                                        key="spread.mains"))
    loss = None
    if decl.capacitor_loss_per_year is not None:
        loss = parse_band(decl.capacitor_loss_per_year, file=file,
                          key="spread.capacitor_loss_per_year")
        if loss >= 1.0:
            raise InputError(file, "spread.capacitor_loss_per_year",
                             "a loss of 100 % or more per year leaves no capacitor")
    return SpreadSpec(parts=tuple(declared), mains_band=band, capacitor_loss_per_year=loss,
                      capacitor_loss_voltage_accelerated=decl.capacitor_loss_voltage_accelerated,
                      part_class_defaults=decl.part_class_defaults)
