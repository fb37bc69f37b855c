"""Resistive dropper: mains -> dropper resistor -> zener clamp and rectifier -> reservoir
-> linear regulator. NOT isolated.

Owns: its parts model, engine row, stresses and the clamp-limited mean current. Imports
the engine and :mod:`.base` only.
"""

from __future__ import annotations

import math
from typing import Literal

from ..engine import layout as L
from ..io.schema import (
    Capacitance,
    Current,
    DiodeSpec,
    LinearOutput,
    Power,
    Resistance,
    ResistanceNN,
    Strict,
    Voltage,
)
from ._zener_clamp import check_output_below_zener, zener_clamp_row
from .base import Topology, common_row, linear_regulator_row, series_stresses


class ResistiveDropperParts(Strict):
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


def clamp_limit_a(design) -> float:
    """Mean current [A] through the dropper while the node is clamped at the zener voltage.

    Notes
    -----
    The resistor conducts into the clamp while :math:`v_s > V_Z`, i.e. for
    :math:`\\theta < \\omega t < \\pi - \\theta` with :math:`\\sin\\theta = V_Z/V_{pk}`; the
    mean over a cycle of :math:`(V_{pk}\\sin\\omega t - V_Z)/R` there is
    :math:`(2V_{pk}\\cos\\theta - V_Z(\\pi - 2\\theta)) / (2\\pi R)`, doubled by a bridge.
    """
    parts, mains = design.parts, design.mains
    vpk = mains.voltage * math.sqrt(2.0)
    r = parts.dropper_resistance + parts.series_resistance
    vz = parts.zener_voltage
    theta = math.asin(min(vz / vpk, 1.0))
    mean_half = (2 * vpk * math.cos(theta) - vz * (math.pi - 2 * theta)) / (2 * math.pi * r)
    return mean_half * (1 if parts.rectifier == "half-wave" else 2)


class ResistiveDropper(Topology):
    name = "resistive-dropper"
    code = L.RESISTIVE_DROPPER
    parts_model = ResistiveDropperParts
    output_model = LinearOutput
    is_dropper = True
    series_resistor_label = "dropper resistor"

    def check(self, design):
        check_output_below_zener(design)

    def engine_row(self, design, state, mains_factor, load_a):
        parts = design.parts
        p = common_row(self, design, mains_factor)
        linear_regulator_row(p, design, state, load_a)
        p[L.P_RSER] = parts.series_resistance + parts.dropper_resistance
        p[L.P_RB] = 1.0  # unused: row 0 reads v_c1 = 0
        return p, zener_clamp_row(p, parts, None)

    def stresses(self, design, stressed):
        parts = design.parts
        return series_stresses(
            design, stressed,
            r_inrush=parts.series_resistance + design.mains.source_resistance
            + parts.dropper_resistance,
            cap=None, rb=None, v_cap=0.0, resistor_name="dropper resistor dissipation",
            resistor_rating=parts.dropper_power_rating, inrush_minimum=False, front=[])

    def deliverable_ceiling_a(self, design):
        return 1.5 * max(clamp_limit_a(design), 1e-3)


TOPOLOGY = ResistiveDropper()
