"""How figures and quantity names read on a screen or in Markdown (never in ``--json``).

- :func:`fmt`: a figure with fixed significant figures, an SI prefix on SI units (0.0000910 W
  -> ``91.0 µW``, 15000 ohm -> ``15.0 kΩ``) and thousands separators everywhere
  (``26,403 kWh``, ``3,640 units``);
- :func:`si_text`: the same with trailing zeros dropped (limit tables: ``100 nF``);
- :func:`quantity_label`: a person's name for a quantity key (``standby_p_w`` -> "standby
  power"); the key itself stays in ``--json``;
- :func:`humanize`: a sentence shared with ``--json`` (failures, stress notes, reasons) made
  readable: keys replaced by their labels, "15000.0 ohm" by "15 kΩ".

Symbols: the micro sign and the ohm sign as the SI Brochure writes them (µ, Ω) on screens and
in Markdown; :func:`use_unicode` (False) turns them into ASCII ``u`` and ``ohm`` for an
output that cannot encode them (the CLI decides from its console's encoding). Inputs
(design files) accept both spellings; ``--json`` keeps keys and plain numbers.

Owns: the number format and the labels of every rendering. Imports nothing of fleetpower (the
quick ``limits`` listing uses it without numpy or pandas).
"""

from __future__ import annotations

import math
import re

#: units that take an SI prefix (BIPM SI Brochure, 9th ed., table 7); others print as given
SI_UNITS = ("V", "A", "W", "VA", "var", "F", "H", "Hz", "s", "J", "ohm")
_SI_PREFIXES = ((1e9, "G"), (1e6, "M"), (1e3, "k"), (1.0, ""), (1e-3, "m"), (1e-6, "u"),
                (1e-9, "n"), (1e-12, "p"))
#: how the micro prefix and the ohm read: (micro, ohm); see :func:`use_unicode`
_SYMBOLS = {True: ("µ", "Ω"), False: ("u", "ohm")}
_symbols = _SYMBOLS[True]


def use_unicode(on: bool = True) -> None:
    """Write the micro sign and the ohm sign as µ and Ω (default) or as ASCII u and ohm."""
    global _symbols
    _symbols = _SYMBOLS[bool(on)]


def _shown(prefix: str, unit: str) -> str:
    """A prefixed SI unit as it reads: ("u", "ohm") -> "µΩ" (or "uohm" in ASCII)."""
    micro, ohm = _symbols
    return (micro if prefix == "u" else prefix) + (ohm if unit == "ohm" else unit)

#: a person's name for each quantity key met in limit tables, compliance rows and sentences
QUANTITY_LABELS = {
    "avg_active_eff_frac": "average active efficiency",
    "c_min_f": "capacitance above which it applies",
    "networked_standby_hina_p_w": "networked standby power (high network availability)",
    "networked_standby_p_w": "networked standby power",
    "no_load_p_w": "no-load input power",
    "off_p_w": "off-mode power",
    "standby_display_p_w": "standby power with a display",
    "standby_p_w": "standby power",
    "active_p_w": "active power",
    "t_discharge_s": "time to discharge",
    "tau_discharge_s": "discharge time constant",
    "tdd_pct": "total demand distortion",
    "thd_v_pct": "voltage THD",
    "thd_i_pct": "current THD",
    "v_h_individual_pct": "any single voltage harmonic",
    "v_threshold_v": "voltage the pins must fall below",
    "v_residual_v": "voltage left on the pins",
    "v_reservoir_min_v": "reservoir minimum voltage",
    "v_dc_min_v": "reservoir minimum voltage",
    "v_out_min_v": "output minimum voltage",
    "i_h_a": "harmonic currents",
    "i_rms_a": "rms current",
    "p_w": "real power",
    "s_va": "apparent power",
    "q1_var": "fundamental reactive power",
    "pf": "power factor",
}
_HARMONIC = re.compile(r"^i_h(\d+)_(a|pct)$")


def _prefixed(value: float, digits: int) -> tuple[float, str]:
    """(value / scale, prefix), the prefix chosen after rounding (999.9 V -> 1 kV)."""
    value = float(f"{value:.{digits}g}")
    scale, prefix = next(((k, p) for k, p in _SI_PREFIXES if abs(value) >= k * (1 - 1e-12)),
                         _SI_PREFIXES[-1])
    return value / scale, prefix


def fmt(x: float | None, digits: int = 3, unit: str = "") -> str:
    """A figure with ``digits`` significant figures, an SI prefix and thousands separators.

    The prefix goes on the first word of ``unit`` when it is an SI unit (``"V p-p"`` ->
    ``"360 mV p-p"``); already prefixed or non-SI units (kW, kWh, EUR, %) are kept and only
    get thousands separators. ``None`` prints as an em dash; below 1e-9 prints as 0.
    """
    if x is None or x != x:
        return "—"
    if abs(x) < 1e-9:  # below any current or power the tool resolves
        return f"0 {unit}".rstrip()
    head, _, tail = unit.partition(" ")
    if head in SI_UNITS:
        x, prefix = _prefixed(x, digits)
        unit = _shown(prefix, head) + (f" {tail}" if tail else "")
    mag = math.floor(math.log10(abs(x)))
    dec = max(digits - 1 - mag, 0)
    return f"{x:,.{dec}f} {unit}".rstrip()


def si_text(value: float, unit: str, digits: int = 3) -> str:
    """``value`` with an SI prefix and at most ``digits`` significant figures (1e-07 F -> 100 nF).

    Only SI units take a prefix (V, A, W, VA, var, F, H, Hz, s, J, ohm); others print as
    they are. Trailing zeros are dropped.
    """
    if value != value:
        return ""
    if unit not in SI_UNITS or value == 0:
        return f"{value:.{digits}g} {_shown('', unit) if unit in SI_UNITS else unit}".strip()
    scaled, prefix = _prefixed(value, digits)
    return f"{scaled:.{digits}g} {_shown(prefix, unit)}"


def quantity_label(key: str, order: bool = False) -> str:
    """A person's name for a quantity key (``i_h3_a`` -> "harmonic current").

    ``order`` puts a harmonic's order in the name (``i_h3_a`` -> "harmonic 3 current",
    ``i_h3_pct`` -> "harmonic 3 (%)") where no column says it.
    """
    m = _HARMONIC.match(key)
    if m:
        if not order:
            return "harmonic current"
        return f"harmonic {m.group(1)} " + ("current" if m.group(2) == "a" else "(%)")
    return QUANTITY_LABELS.get(key, key.replace("_", " "))


_KEY = re.compile(r"\b(?:i_h\d+_(?:a|pct)|" + "|".join(
    sorted((re.escape(k) for k in QUANTITY_LABELS if "_" in k), key=len, reverse=True)) + r")\b")
_FIGURE = re.compile(r"(?<![\w.\-])(-?\d+(?:\.\d+)?) (" + "|".join(
    sorted(SI_UNITS, key=len, reverse=True)) + r")(?![\w])")


def humanize(text: str) -> str:
    """A sentence shared with ``--json`` made readable: quantity keys replaced by their
    labels, plain SI figures given a prefix ("series resistance 15000.0 ohm" -> "series
    resistance 15 kΩ"; a range "10-30 ohm" -> "10-30 Ω")."""
    text = _KEY.sub(lambda m: quantity_label(m.group(0), order=True), text)
    text = _FIGURE.sub(lambda m: si_text(float(m.group(1)), m.group(2)), text)
    return _OHM_AFTER_FIGURE.sub(" " + _symbols[1], text)


_OHM_AFTER_FIGURE = re.compile(r"(?<=\d) ohm\b")



_SUFFIX_UNITS = (("_pct", "%"), ("_var", "var"), ("_va", "VA"), ("_w", "W"), ("_a", "A"),
                 ("_v", "V"), ("_ohm", "ohm"), ("_f", "F"), ("_s", "s"), ("_hz", "Hz"),
                 ("_frac", ""))


def key_label_unit(key: str) -> tuple[str, str]:
    """(a person's label, the unit) of a ``<quantity>_<unit>`` key: ``loss_zener_w`` ->
    ("loss: zener", "W"), ``thd_i_pct`` -> ("current THD", "%"), ``pf`` -> ("power factor",
    "")."""
    unit = next((u for s, u in _SUFFIX_UNITS if key.endswith(s)), "")
    if key in QUANTITY_LABELS or _HARMONIC.match(key):
        return quantity_label(key, order=True), unit
    stem = next((key[: -len(s)] for s, _ in _SUFFIX_UNITS if key.endswith(s)), key)
    if stem.startswith("loss_"):
        return "loss: " + stem[5:].replace("_", " "), unit
    return stem.replace("_", " ").strip(), unit


__all__ = ["fmt", "si_text", "use_unicode", "quantity_label", "humanize", "key_label_unit", "QUANTITY_LABELS",
           "SI_UNITS"]
