"""Rectifier and switch-mode converter: X capacitor and bleeder across the mains, series
(inrush) resistor, rectifier, bulk capacitor, a converter drawing its input power.

Owns: its parts model, the converter's input power, engine row, stresses and plug-pin
discharge. Imports the engine and :mod:`.base` only.
"""

from __future__ import annotations

import math
from typing import Literal

import numpy as np

from ..engine import layout as L
from ..errors import InputError
from ..io.schema import Capacitance, ConverterOutput, DiodeSpec, Power, Resistance, Strict, Voltage
from .base import (
    STRESS_MAINS_FACTOR,
    Discharge,
    Topology,
    capacitor_voltage,
    common_row,
    series_stresses,
    stress_condition,
)


class SmpsParts(Strict):
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


def converter_input_power_w(out: ConverterOutput, p_out_w: float) -> tuple[float, float]:
    """Converter input power [W] and efficiency [-] at output power ``p_out_w`` [W].

    The efficiency table (fraction of rated power, efficiency) is interpolated linearly
    and held constant beyond its ends. The input is never taken below the no-load input
    power plus the output power; at zero output it is the no-load input power.
    """
    if p_out_w <= 0:
        return out.no_load_input_power, 0.0
    table = sorted(out.efficiency)
    frac = np.array([t[0] for t in table])
    eta = np.array([t[1] for t in table])
    e = float(np.interp(p_out_w / out.rated_power, frac, eta))
    p_in = max(p_out_w / e, out.no_load_input_power + p_out_w)
    return p_in, p_out_w / p_in


class RectifierSmps(Topology):
    name = "rectifier-smps"
    code = L.RECTIFIER_SMPS
    parts_model = SmpsParts
    output_model = ConverterOutput

    def check(self, design):
        out, file = design.output, design.source
        for k, (frac, eta) in enumerate(out.efficiency):
            if not (0 < frac <= 1.5 and 0 < eta <= 1):
                raise InputError(
                    file, f"output.efficiency[{k}]",
                    "each entry is [fraction_of_rated (0..1.5], efficiency (0..1]]",
                )
        if out.undervoltage_lockout >= design.mains.voltage * 2**0.5:
            raise InputError(file, "output.undervoltage_lockout",
                             "is above the mains peak voltage")

    def is_isolated(self, design):
        return True if design.isolated is None else design.isolated

    def engine_row(self, design, state, mains_factor, load_a):
        parts, out = design.parts, design.output
        p = common_row(self, design, mains_factor)
        vpk = p[L.P_VPK]
        p[L.P_VO_MAX] = 1.05 * vpk
        p[L.P_RSER] = parts.series_resistance
        p[L.P_RB] = parts.bleeder_resistance
        p[L.P_CX] = parts.x_capacitance
        p[L.P_CO] = parts.bulk_capacitance
        p_out = design.load_power_w(state) if load_a is None else load_a * out.voltage
        p[L.P_PCONV], p[L.P_ETA] = converter_input_power_w(out, p_out)
        p[L.P_UVLO] = out.undervoltage_lockout
        x0 = np.zeros(L.N_STATES)
        x0[L.S_VO] = 0.95 * vpk
        return p, x0

    def stresses(self, design, stressed):
        parts = design.parts
        v_cap = design.mains.voltage * math.sqrt(2) * STRESS_MAINS_FACTOR
        front = capacitor_voltage("X capacitor", v_cap, v_cap / math.sqrt(2),
                                  parts.x_capacitor_voltage_rating,
                                  parts.x_capacitor_rating_type, stress_condition())
        return series_stresses(
            design, stressed,
            r_inrush=parts.series_resistance + design.mains.source_resistance,
            cap=parts.x_capacitance, rb=parts.bleeder_resistance, v_cap=v_cap,
            resistor_name="series resistor dissipation",
            resistor_rating=parts.series_resistor_power_rating, inrush_minimum=False,
            front=front)

    def deliverable_ceiling_a(self, design):
        # searched up to 1.5 times the rated output; a result at the bound means "at least"
        return 1.5 * design.output.rated_power / design.output.voltage

    def discharge(self, design, stresses):
        v0 = design.mains.voltage * 2**0.5 * STRESS_MAINS_FACTOR
        return Discharge(design.parts.x_capacitance, design.parts.bleeder_resistance, v0)


TOPOLOGY = RectifierSmps()
