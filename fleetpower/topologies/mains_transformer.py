"""Mains transformer: a 50/60 Hz transformer in its approximate equivalent circuit, then a
rectifier, a reservoir and a linear regulator. Isolated.

Owns: its parts model, the equivalent circuit from datasheet figures, engine row and
stresses against the nameplate. Imports the engine and :mod:`.base` only.
"""

from __future__ import annotations

import math
from typing import Annotated, Literal

import numpy as np
from pydantic import Field

from ..engine import layout as L
from ..errors import InputError
from ..io.schema import (
    Capacitance,
    Current,
    DiodeSpec,
    Frequency,
    InductanceNN,
    LinearOutput,
    Power,
    Strict,
    Voltage,
)
from .base import (
    STRESS_MAINS_FACTOR,
    Stress,
    Topology,
    common_row,
    linear_regulator_row,
    rated,
    stress_condition,
)


class TransformerParts(Strict):
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
    #: nameplate primary rating; default the design file's ``[mains]``. The turns ratio,
    #: windings and core come from these, whatever mains the design is later put on
    primary_voltage: Voltage | None = None
    primary_frequency: Frequency | None = None


#: magnetizing current as a multiple of the core-loss current when the no-load current is
#: not given (no-load power factor about 0.3 for small mains transformers, from memory)
DEFAULT_MAGNETIZING_TO_CORE_CURRENT = 3.0


def winding_resistance_ohm(v_rated_v: float, s_rated_va: float, regulation: float,
                           x_leak_ohm: float = 0.0) -> float:
    r"""Series winding resistance [ohm, primary-referred] from a datasheet regulation.

    Parameters
    ----------
    v_rated_v : float
        Rated primary voltage [V rms]; the no-load secondary voltage referred to the
        primary equals it.
    s_rated_va : float
        Rated output [VA], delivered at full load.
    regulation : float
        Regulation as a fraction [-]: :math:`r = (U_{nl} - U_{fl}) / U_{fl}`.
    x_leak_ohm : float
        Leakage reactance [ohm, primary-referred] at the rated frequency.

    Returns
    -------
    float
        :math:`R_w` [ohm]; NaN when the leakage reactance alone drops more than ``r``.

    Notes
    -----
    Regulation is the rise of the secondary voltage from rated load to no load, relative
    to the full-load voltage, at rated VA into a resistive load (unity power factor).
    Referred to the primary, the full-load voltage is :math:`U_{fl} = V/(1 + r)` and the
    load :math:`R_L = U_{fl}^2 / S`. With the shunt branch on the source EMF the no-load
    voltage is V, and the series branch :math:`R_w + jX` in series with :math:`R_L`
    divides it: :math:`V / U_{fl} = |1 + (R_w + jX)/R_L| = 1 + r`, so

    .. math:: R_w = R_L \left(\sqrt{(1 + r)^2 - (X / R_L)^2} - 1\right),

    which for :math:`X = 0` is :math:`R_w = r R_L = r V^2 / ((1 + r)^2 S)`. (Dividing by
    the no-load voltage instead, :math:`R_w = r V^2 / S`, overstates the resistance by
    :math:`(1 + r)^2`: 56 % at r = 25 %.)

    References
    ----------
    .. [1] A. E. Fitzgerald, C. Kingsley, S. D. Umans, *Electric Machinery*, 6th ed.,
       ch. 2 (voltage regulation, (V_nl - V_fl) / V_fl at rated load; approximate
       equivalent circuit), from memory.
    .. [2] IEC 61558-1, definitions of rated and no-load output voltage of safety
       transformers (from memory).
    """
    r_load = (v_rated_v / (1.0 + regulation)) ** 2 / s_rated_va
    inner = (1.0 + regulation) ** 2 - (x_leak_ohm / r_load) ** 2
    if inner <= 1.0:
        return float("nan")
    return r_load * (math.sqrt(inner) - 1.0)


def rating(design) -> tuple[float, float]:
    """Nameplate primary voltage [V] and frequency [Hz] of a transformer design."""
    parts = design.parts
    return (parts.primary_voltage or design.mains.voltage,
            parts.primary_frequency or design.mains.frequency)


def transformer_model(design) -> dict[str, float]:
    r"""Equivalent-circuit values of a mains transformer from its datasheet figures.

    Notes
    -----
    Referred to the primary, at the *nameplate* rating (voltage V, frequency f, rating S;
    ``parts.primary_voltage`` / ``primary_frequency``, by default the design file's
    mains), so that the same part on other mains keeps its turns, windings and core:

    - turns ratio :math:`n = V / V_{2,oc}` (open-circuit secondary voltage);
    - winding resistance from the regulation r at rated VA into a resistive load, with
      r = (U_nl - U_fl) / U_fl: :func:`winding_resistance_ohm`;
    - core-loss resistance :math:`R_c = V^2 / P_0` from the no-load power;
    - magnetizing inductance :math:`L_m = V / (\omega I_m)` with
      :math:`I_m = \sqrt{I_0^2 - (P_0/V)^2}` from the no-load current (or
      :data:`DEFAULT_MAGNETIZING_TO_CORE_CURRENT` times the core-loss current).

    On other mains the secondary voltage is :math:`V_{site}/n` and the core loss
    :math:`V_{site}^2 / R_c` (a fixed core-loss resistance: loss with the square of the
    voltage, a departure from real iron, whose loss also depends on frequency). The
    magnetizing branch sits on the source EMF (the usual approximate equivalent
    circuit); the core does not saturate.

    References
    ----------
    .. [1] A. E. Fitzgerald, C. Kingsley, S. D. Umans, *Electric Machinery*, 6th ed.,
       ch. 2 (approximate equivalent circuit; open- and short-circuit tests; voltage
       regulation).
    """
    parts = design.parts
    v, f = rating(design)
    w = 2 * math.pi * f
    i_c = parts.no_load_power / v
    if parts.no_load_current is None:
        i_m = DEFAULT_MAGNETIZING_TO_CORE_CURRENT * i_c
    else:
        i_m = math.sqrt(parts.no_load_current**2 - i_c**2)
    return {
        "turns_ratio": v / parts.secondary_voltage,
        "winding_resistance_ohm": winding_resistance_ohm(
            v, parts.rated_power, parts.regulation_pct / 100.0, w * parts.leakage_inductance),
        "core_resistance_ohm": v * v / parts.no_load_power,
        "magnetizing_inductance_h": v / (w * i_m),
    }


class MainsTransformer(Topology):
    name = "mains-transformer"
    code = L.MAINS_TRANSFORMER
    parts_model = TransformerParts
    output_model = LinearOutput
    dc_bias_reason = "a DC bias saturates a real transformer's core, which the model does not"
    series_resistor_label = "transformer windings"
    extra_loss_labels = {"p_core_w": "transformer core"}

    def complete(self, design):
        """The nameplate rating defaults to the design file's own mains."""
        parts = design.parts
        if parts.primary_voltage is not None and parts.primary_frequency is not None:
            return design
        v, f = rating(design)
        return design.model_copy(update={"parts": parts.model_copy(
            update={"primary_voltage": v, "primary_frequency": f})})

    def check(self, design):
        parts, out, file = design.parts, design.output, design.source
        v, f = rating(design)
        if parts.no_load_current is not None and \
                parts.no_load_current <= parts.no_load_power / v:
            raise InputError(file, "parts.no_load_current",
                             "must exceed the core-loss current no_load_power / voltage")
        if out.voltage >= parts.secondary_voltage * 2**0.5:
            raise InputError(file, "output.voltage", "is above the secondary's peak voltage")
        x = 2 * math.pi * f * parts.leakage_inductance
        if math.isnan(winding_resistance_ohm(v, parts.rated_power,
                                             parts.regulation_pct / 100.0, x)):
            raise InputError(file, "parts.leakage_inductance",
                             f"its reactance ({x:.0f} ohm) alone drops more than the "
                             f"{parts.regulation_pct:g} % regulation at rated load")

    def is_isolated(self, design):
        return True

    def engine_row(self, design, state, mains_factor, load_a):
        parts = design.parts
        p = common_row(self, design, mains_factor)
        linear_regulator_row(p, design, state, load_a)
        vpk = p[L.P_VPK]
        tr = transformer_model(design)
        p[L.P_NTURNS] = tr["turns_ratio"]
        p[L.P_RSER] = tr["winding_resistance_ohm"]
        p[L.P_LSRC] += parts.leakage_inductance
        p[L.P_LM] = tr["magnetizing_inductance_h"]
        p[L.P_RC] = tr["core_resistance_ohm"]
        p[L.P_VO_MAX] = 1.05 * vpk / p[L.P_NTURNS]
        vf = parts.diode.forward_voltage
        x0 = np.zeros(L.N_STATES)
        v_sec_pk = vpk / tr["turns_ratio"]
        drops = 2 * vf if parts.rectifier == "bridge" else vf
        x0[L.S_VO] = max(0.9 * v_sec_pk - drops, 0.0)
        if parts.rectifier == "half-wave":
            # the diode at zero bias: consistent with a zero series current, which is the
            # initial state when leakage inductance makes the series current a state (the
            # solver would also get there from v_a = 0, in more limited Newton steps)
            x0[L.S_VA] = tr["turns_ratio"] * x0[L.S_VO]
        return p, x0

    def stresses(self, design, stressed):
        """Loading of a mains transformer against its nameplate, at +10 % mains."""
        parts = design.parts
        r_w = transformer_model(design)["winding_resistance_ohm"]
        # winding current from the winding loss (I = sqrt(P / R)), times the rated
        # (nameplate) voltage: the load the windings carry, which the nameplate VA limits
        s_load = max(rating(design)[0] * math.sqrt(r.p_series_resistor_w / r_w)
                     for r in stressed)
        return [
            rated("transformer load (winding current x rated voltage)", s_load, "VA",
                  parts.rated_power, stress_condition(), "against the nameplate VA"),
            Stress("inrush peak, winding-limited", design.mains.voltage * math.sqrt(2)
                   * STRESS_MAINS_FACTOR / r_w, "A", None, "note",
                   f"Vpk x {STRESS_MAINS_FACTOR:.2f} / winding resistance",
                   "a lower bound: magnetizing inrush from core saturation (not modelled) "
                   "can be far higher"),
        ]

    def deliverable_ceiling_a(self, design):
        # well beyond the nameplate rating
        return 3.0 * design.parts.rated_power / design.parts.secondary_voltage


TOPOLOGY = MainsTransformer()
