"""Capacitive dropper: mains -> series resistor -> X capacitor (bleeder across it) ->
zener clamp and rectifier -> reservoir -> linear regulator. NOT isolated.

Owns: its parts model, engine row, stresses, plug-pin discharge, the charge-pump limit
and the reactance rule of thumb. Imports the engine and :mod:`.base` only.
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
    Strict,
    Voltage,
)
from ._zener_clamp import zener_clamp_row
from .base import (
    STRESS_MAINS_FACTOR,
    Discharge,
    HandEstimate,
    Topology,
    capacitor_voltage,
    common_row,
    linear_regulator_row,
    series_stresses,
    stress_condition,
)


class CapacitiveDropperParts(Strict):
    series_capacitance: Capacitance
    series_resistance: Resistance
    bleeder_resistance: Resistance
    zener_voltage: Voltage
    rectifier: Literal["half-wave", "bridge"]
    reservoir_capacitance: Capacitance
    capacitor_voltage_rating: Voltage | None = None
    capacitor_rating_type: Literal["ac", "dc"] = "ac"
    zener_power_rating: Power | None = None
    zener_resistance: Resistance = 7.0
    zener_test_current: Current = 0.020
    series_resistor_power_rating: Power | None = None
    bleeder_power_rating: Power | None = None
    diode: DiodeSpec = DiodeSpec()


def charge_pump_limit_a(design) -> float:
    """Ideal average current [A] the series capacitor can pump into the clamp.

    Notes
    -----
    With the node clamped between :math:`-V_F` and :math:`V_Z` (half-wave), the series
    capacitor's voltage swings between :math:`-(V_{pk} - V_F)` and
    :math:`V_{pk} - V_Z`, so each cycle moves a charge
    :math:`C (2V_{pk} - V_Z - V_F)` through the forward path:
    :math:`I = f C (2 V_{pk} - V_Z - V_F)`. A bridge delivers both half-cycles with the
    node clamped at :math:`\\pm(V_Z + 2V_F)`: :math:`I = 4 f C (V_{pk} - V_Z - 2V_F)`.
    Series resistance, bleeder and ripple lower the real figure further.
    """
    parts, mains = design.parts, design.mains
    vpk = mains.voltage * math.sqrt(2.0)
    f = mains.frequency
    vf = parts.diode.forward_voltage
    cap = parts.series_capacitance
    if parts.rectifier == "half-wave":
        return f * cap * max(2 * vpk - parts.zener_voltage - vf, 0.0)
    return 4 * f * cap * max(vpk - parts.zener_voltage - 2 * vf, 0.0)


class CapacitiveDropper(Topology):
    name = "capacitive-dropper"
    code = L.CAPACITIVE_DROPPER
    parts_model = CapacitiveDropperParts
    output_model = LinearOutput
    is_dropper = True
    always_report_deliverable = True

    def check(self, design):
        from ._zener_clamp import check_output_below_zener

        check_output_below_zener(design)

    def engine_row(self, design, state, mains_factor, load_a):
        parts = design.parts
        p = common_row(self, design, mains_factor)
        linear_regulator_row(p, design, state, load_a)
        p[L.P_RSER] = parts.series_resistance
        p[L.P_C1] = parts.series_capacitance
        p[L.P_RB] = parts.bleeder_resistance
        x0 = zener_clamp_row(p, parts, p[L.P_VPK] * p[L.P_OMEGA] * p[L.P_C1])
        x0[L.S_VC1] = -parts.zener_voltage if parts.rectifier == "half-wave" else 0.0
        return p, x0

    def stresses(self, design, stressed):
        parts = design.parts
        v_cap = max(r.v_cap_peak_v for r in stressed)
        v_rms = max(r.v_cap_rms_v for r in stressed)
        front = capacitor_voltage("series capacitor", v_cap, v_rms,
                                  parts.capacitor_voltage_rating,
                                  parts.capacitor_rating_type, stress_condition(),
                                  "an X2-class part is usual for a series dropper capacitor")
        return series_stresses(
            design, stressed,
            r_inrush=parts.series_resistance + design.mains.source_resistance,
            cap=parts.series_capacitance, rb=parts.bleeder_resistance, v_cap=v_cap,
            resistor_name="series resistor dissipation",
            resistor_rating=parts.series_resistor_power_rating, inrush_minimum=True,
            front=front)

    def discharge(self, design, stresses):
        v0 = next((s.value for s in stresses if s.item.startswith("series capacitor")), None)
        if v0 is None:
            return None
        return Discharge(design.parts.series_capacitance, design.parts.bleeder_resistance, v0)

    def deliverable_ceiling_a(self, design):
        return 1.5 * max(charge_pump_limit_a(design), 1e-3)

    def hand_estimate(self, design, simulated_max_a):
        """Compare the reactance rule of thumb with the waveform's deliverable current.

        Notes
        -----
        The rule of thumb takes the capacitor current as a sinusoid of rms value
        :math:`V/X_C` and half of it as the half-wave DC output. The mean of a half sine
        of peak :math:`\\sqrt{2} V/X_C` over a whole cycle is :math:`\\sqrt{2} V/(\\pi X_C)`,
        i.e. :math:`2\\sqrt{2}/\\pi = 0.900` of the rule; the clamp then takes
        :math:`(V_Z + V_F)` off the :math:`2V_{pk}` charge swing
        (:func:`charge_pump_limit_a`); series resistance, bleeder, ripple and regulator
        headroom account for the rest, which only the simulation gives.
        """
        parts, mains = design.parts, design.mains
        xc = 1.0 / (2 * math.pi * mains.frequency * parts.series_capacitance)
        i_rms = mains.voltage / xc
        half = parts.rectifier == "half-wave"
        est = 0.5 * i_rms if half else i_rms
        rule = "half-wave: I_dc = V/(2 Xc)" if half else "bridge: I_dc = V/Xc"
        sine_avg = (math.sqrt(2) / math.pi if half else 2 * math.sqrt(2) / math.pi) * i_rms
        pump = charge_pump_limit_a(design)
        if half:
            sine_text = "the mean of a half-wave rectified sine is Ipk/pi, not Irms/2"
            clamp_text = "the clamp takes Vz + Vf off the capacitor's 2 Vpk charge swing"
        else:
            sine_text = "the mean of a full-wave rectified sine is 2 Ipk/pi = 0.90 Irms, not Irms"
            clamp_text = "the output voltage and two diode drops come off the charge swing"
        lines = [
            f"{sine_text}: {sine_avg * 1e3:.1f} mA ({100 * (sine_avg / est - 1):+.1f} %)",
            f"{clamp_text}: {pump * 1e3:.1f} mA ({100 * (pump / est - 1):+.1f} %)",
            f"series resistor, bleeder, ripple and regulator headroom: "
            f"{simulated_max_a * 1e3:.1f} mA simulated "
            f"({100 * (simulated_max_a / est - 1):+.1f} %)",
        ]
        return HandEstimate(xc, i_rms, est, rule, sine_avg, pump, simulated_max_a, lines)


TOPOLOGY = CapacitiveDropper()
__all__ = ["TOPOLOGY", "CapacitiveDropperParts", "charge_pump_limit_a", "STRESS_MAINS_FACTOR"]
