"""Unit-bearing input: strings such as ``"3.3 uF"`` parsed with dimension checks (pint)."""

from __future__ import annotations

import functools

import pint

from .errors import InputError


@functools.lru_cache(maxsize=1)
def registry() -> pint.UnitRegistry:
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
    ureg = registry()
    cleaned = text.strip().replace("µ", "u").replace("μ", "u").replace("Ω", "ohm")
    try:
        q = ureg.Quantity(cleaned)
    except Exception as exc:  # pint raises several unrelated types here
        raise InputError(file, key, f"cannot read {text!r} as a {dimension}: {exc}") from None
    if not isinstance(q, pint.Quantity) or q.dimensionless:
        raise InputError(file, key, f"{text!r} has no unit; write it as \"{text} {si}\"")
    if q.dimensionality != ureg.Quantity(1, si).dimensionality:
        raise InputError(
            file, key, f"{text!r} is not a {dimension} (it has units of {q.units:~})"
        )
    value = float(q.to(si).magnitude)
    return value
