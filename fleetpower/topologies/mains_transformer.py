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


#: magnetizing current as a multiple of the core-loss current when the no-load current is
#: not given (no-load power factor about 0.3 for small mains transformers, from memory)
DEFAULT_MAGNETIZING_TO_CORE_CURRENT = 3.0


def transformer_model(design) -> dict[str, float]:
    r"""Equivalent-circuit values of a mains transformer from its datasheet figures.

    Notes
    -----
    Referred to the primary (rated mains voltage V, frequency f, rating S):

    - turns ratio :math:`n = V / V_{2,oc}` (open-circuit secondary voltage);
    - winding resistance from the regulation r (no-load to full-load drop, resistive load):
      :math:`R_w = r\,V / I_{rated} = r\,V^2 / S`;
    - core-loss resistance :math:`R_c = V^2 / P_0` from the no-load power;
    - magnetizing inductance :math:`L_m = V / (\omega I_m)` with
      :math:`I_m = \sqrt{I_0^2 - (P_0/V)^2}` from the no-load current (or
      :data:`DEFAULT_MAGNETIZING_TO_CORE_CURRENT` times the core-loss current).

    The magnetizing branch sits on the source EMF (the usual approximate equivalent
    circuit); the core does not saturate.

    References
    ----------
    .. [1] A. E. Fitzgerald, C. Kingsley, S. D. Umans, *Electric Machinery*, 6th ed.,
       ch. 2 (approximate equivalent circuit; open- and short-circuit tests).
    """
    parts, v = design.parts, design.mains.voltage
    w = 2 * math.pi * design.mains.frequency
    i_c = parts.no_load_power / v
    if parts.no_load_current is None:
        i_m = DEFAULT_MAGNETIZING_TO_CORE_CURRENT * i_c
    else:
        i_m = math.sqrt(parts.no_load_current**2 - i_c**2)
    return {
        "turns_ratio": v / parts.secondary_voltage,
        "winding_resistance_ohm": parts.regulation_pct / 100.0 * v * v / parts.rated_power,
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

    def check(self, design):
        parts, out, file = design.parts, design.output, design.source
        if parts.no_load_current is not None and \
                parts.no_load_current <= parts.no_load_power / design.mains.voltage:
            raise InputError(file, "parts.no_load_current",
                             "must exceed the core-loss current no_load_power / voltage")
        if out.voltage >= parts.secondary_voltage * 2**0.5:
            raise InputError(file, "output.voltage", "is above the secondary's peak voltage")

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
        # voltage: the load the windings carry, which is what the nameplate VA limits
        s_load = max(design.mains.voltage * math.sqrt(r.p_series_resistor_w / r_w)
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
