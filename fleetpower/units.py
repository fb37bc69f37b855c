"""Unit-bearing input: strings such as ``"3.3 uF"`` parsed with dimension checks (pint)."""

from __future__ import annotations

import functools
import math
import re

from .errors import InputError


@functools.lru_cache(maxsize=1)
def registry():
    """pint's unit registry with the trade's spellings (built on first use: ~1 s)."""
    import pint

    ureg = pint.UnitRegistry()
    # Trade spellings that pint does not know out of the box.
    ureg.define("Mohm = 1e6 * ohm")
    ureg.define("kohm = 1e3 * ohm")
    ureg.define("mohm_ = 1e-3 * ohm")
    ureg.define("var = volt * ampere")
    ureg.define("VA = volt * ampere")
    return ureg


#: Dimension name -> (pint dimensionality string, SI unit the library works in)
DIMENSIONS: dict[str, tuple[str, str]] = {
    "voltage": ("[length] ** 2 * [mass] / [current] / [time] ** 3", "V"),
    "current": ("[current]", "A"),
    "power": ("[length] ** 2 * [mass] / [time] ** 3", "W"),
    "capacitance": ("[current] ** 2 * [time] ** 4 / [length] ** 2 / [mass]", "F"),
    "resistance": ("[length] ** 2 * [mass] / [current] ** 2 / [time] ** 3", "ohm"),
    "inductance": ("[length] ** 2 * [mass] / [current] ** 2 / [time] ** 2", "H"),
    "frequency": ("1 / [time]", "Hz"),
    "time": ("[time]", "s"),
    "energy": ("[length] ** 2 * [mass] / [time] ** 2", "J"),
}


def parse_quantity(text, dimension: str, *, file: str = "<input>", key: str = "") -> float:
    """Parse ``text`` (e.g. ``"3.3 uF"``) and return its magnitude in SI units.

    Parameters
    ----------
    text : str
        A number followed by a unit. Plain numbers are refused: every physical value
        in a design file carries its unit.
    dimension : str
        One of :data:`DIMENSIONS`.

    Returns
    -------
    float
        The value in the SI unit of ``dimension`` (V, A, W, F, ohm, H, Hz, s, J).

    Raises
    ------
    InputError
        Naming the file and key, on a missing unit, an unknown unit or the wrong dimension.
    """
    dim, si = DIMENSIONS[dimension]
    if isinstance(text, bool) or not isinstance(text, (str, int, float)):
        raise InputError(file, key, f"expected a {dimension} with its unit, e.g. \"1 {si}\"")
    if not isinstance(text, str):
        raise InputError(file, key, f"{text!r} has no unit; write it as \"{text} {si}\"")
    cleaned = text.strip().replace("µ", "u").replace("μ", "u").replace("Ω", "ohm")
    _check_bounded(cleaned, text, dimension, file, key)
    quick = _plain_si(cleaned, dimension)
    if quick is not None:
        return _in_range(quick, text, dimension, si, file, key)
    import pint

    ureg = registry()
    try:
        q = ureg.Quantity(cleaned)
    except OverflowError:
        raise InputError(file, key, f"{text!r} overflows: the magnitude is out of range "
                         f"for a {dimension}") from None
    except Exception as exc:  # pint raises several unrelated types here
        raise InputError(file, key, f"cannot read {text!r} as a {dimension}: {exc}") from None
    if not isinstance(q, pint.Quantity) or q.dimensionless:
        raise InputError(file, key, f"{text!r} has no unit; write it as \"{text} {si}\"")
    if q.dimensionality != ureg.Quantity(1, si).dimensionality:
        raise InputError(
            file, key, f"{text!r} is not a {dimension} (it has units of {q.units:~})"
        )
    try:
        value = float(q.to(si).magnitude)
    except OverflowError:
        value = math.inf
    return _in_range(value, text, dimension, si, file, key)


# ----------------------------------------------------------------------------------
# Bounds checked before pint sees a string: pint evaluates arithmetic in a unit string
# with Python integers, so "2**99999999 uF" would never end, and its tokenizer is slow on
# very long strings. No value a designer types needs more than these.
# ----------------------------------------------------------------------------------
#: Longest unit string read [characters]
MAX_QUANTITY_CHARS = 100
#: Largest literal exponent allowed after ``**`` or ``^`` (absolute value)
MAX_POWER_EXPONENT = 20
#: Most power operators in one string
MAX_POWER_OPERATORS = 3
#: Range of a non-zero magnitude in SI units [SI unit of the dimension]
MIN_MAGNITUDE_SI = 1e-15
MAX_MAGNITUDE_SI = 1e15

_POWER = re.compile(r"(\*\*|\^)\s*")
_SMALL_EXPONENT = re.compile(r"\(?\s*[+-]?(\d{1,2})(?:\.\d{1,3})?\s*\)?(?!\s*(?:[\d.(]|\*\*|\^))")


def _check_bounded(cleaned: str, text: str, dimension: str, file: str, key: str) -> None:
    """Refuse a string too long, or with powers other than a few small literals."""
    if len(cleaned) > MAX_QUANTITY_CHARS:
        raise InputError(file, key, f"a {dimension} of {len(cleaned)} characters is too long "
                         f"(at most {MAX_QUANTITY_CHARS})")
    powers = list(_POWER.finditer(cleaned))
    if len(powers) > MAX_POWER_OPERATORS:
        raise InputError(file, key, f"{text!r}: at most {MAX_POWER_OPERATORS} powers "
                         "('**' or '^') in one value")
    for m in powers:
        e = _SMALL_EXPONENT.match(cleaned, m.end())
        if e is None or int(e.group(1)) > MAX_POWER_EXPONENT:
            raise InputError(file, key, f"{text!r}: a power ('**' or '^') takes a plain number "
                             f"from -{MAX_POWER_EXPONENT} to {MAX_POWER_EXPONENT}")


def _in_range(value: float, text: str, dimension: str, si: str, file: str, key: str) -> float:
    """``value`` when finite and zero or within the magnitude bounds, else InputError."""
    if not math.isfinite(value):
        raise InputError(file, key, f"{text!r} is not a finite {dimension}")
    if value != 0.0 and not MIN_MAGNITUDE_SI <= abs(value) <= MAX_MAGNITUDE_SI:
        raise InputError(file, key, f"{text!r} ({value:.3g} {si}) is outside the range "
                         f"{MIN_MAGNITUDE_SI:g} to {MAX_MAGNITUDE_SI:g} {si}")
    return value


# ----------------------------------------------------------------------------------
# The common spellings ("3.3 uF", "25 mA", "1 Mohm") read without pint: importing pint
# and building its registry costs about a second, most of a quick command's time.
# Anything else (other units, compound expressions, inf/nan, odd spacing) goes to pint,
# which stays the authority; tests/test_units.py checks that both agree on every form
# accepted here.
# ----------------------------------------------------------------------------------
#: SI unit symbol -> dimension it measures (the symbols pint reads the same way)
_PLAIN_UNITS = {
    "V": "voltage", "A": "current", "W": "power", "VA": "power", "var": "power",
    "F": "capacitance", "ohm": "resistance", "H": "inductance", "Hz": "frequency",
    "s": "time", "J": "energy",
}
#: SI prefixes -> power of ten (no leading zeros in the number: pint reads "007 V" oddly) (pint: micro = 1e-6 etc.)
_PLAIN_PREFIXES = {"": 0, "p": -12, "n": -9, "u": -6, "m": -3, "k": 3, "M": 6, "G": 9}
_PLAIN = re.compile(
    r"([+-]?(?:[1-9]\d*\.?\d*|0?\.\d+|0\.?)(?:[eE][+-]?\d{1,3})?)( ?)"
    r"(" + "|".join(p for p in _PLAIN_PREFIXES if p) + r")?"
    r"(" + "|".join(sorted(_PLAIN_UNITS, key=len, reverse=True)) + r")"
)


def _plain_si(text: str, dimension: str) -> float | None:
    """``text`` in SI units when it is a plain ``number [prefix]unit`` of ``dimension``.

    None when it is anything else (then pint reads it, and explains any error).
    """
    m = _PLAIN.fullmatch(text)
    if m is None or _PLAIN_UNITS[m.group(4)] != dimension:
        return None
    if not m.group(2) and not m.group(3) and m.group(4) == "J":
        return None  # "4e6J" is a complex literal to pint's tokenizer: let pint say so
    value = float(m.group(1))
    exp = _PLAIN_PREFIXES[m.group(3) or ""]
    # pint scales by the prefix's factor 10**exp (a float); do the same, bit for bit
    return value * 10.0**exp if exp < 0 else value * float(10**exp)
