"""One supply: from a validated design to waveforms, power quality, losses and stresses.

Data flows one way: :class:`~fleetpower.io.design_file.Design` -> parameter rows
(:func:`circuit_rows`) -> :func:`fleetpower.engine.solver.solve_periodic` -> per-state
:class:`StateResult` (waveform, :class:`~fleetpower.pq.ieee1459.PowerQuality`, loss budget)
-> :class:`UnitAnalysis` with stresses and warnings.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from .engine import layout as c
from .engine.devices import N_RECTIFIER, VT_V, diode_saturation_current_a, zener_knee
from .engine.solver import DEFAULT_SAMPLES_PER_CYCLE, solve_periodic
from .errors import InputError, suggest
from .io.design_file import ConverterOutput, Design
from .limits.tables import load_limit_set
from .pq.ieee1459 import PowerQuality, power_quality

#: Mains factor at which stresses are assessed (+10 % mains, common practice, no source)
STRESS_MAINS_FACTOR = 1.10
#: Limit sets whose plug-pin discharge rows the stress check applies (data/limits/)
DISCHARGE_SETS = ("iec62368-1-discharge", "iec60335-1-discharge")
#: Usual inrush-resistor range for droppers [ohm] (common practice, no source)
INRUSH_RESISTOR_RANGE_OHM = (10.0, 30.0)

NON_ISOLATION_CAUTION = (
    "NOT ISOLATED: a capacitive or resistive dropper connects its output directly to the "
    "mains. Every part of the circuit, the output and anything wired to it sits at mains "
    "potential and can kill. Enclose it fully, never connect it to earthed or "
    "user-touchable equipment, do not probe it with an earthed oscilloscope, and follow "
    "local electrical codes and licensed practice; this tool does not replace them."
)


# ----------------------------------------------------------------------------------
# design -> parameter rows
# ----------------------------------------------------------------------------------
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


#: magnetizing current as a multiple of the core-loss current when the no-load current is
#: not given (no-load power factor about 0.3 for small mains transformers, from memory)
DEFAULT_MAGNETIZING_TO_CORE_CURRENT = 3.0


def transformer_model(design: Design) -> dict[str, float]:
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


def circuit_rows(
    design: Design, state: str, mains_factor: float = 1.0, load_a: float | None = None
) -> tuple[np.ndarray, np.ndarray]:
    """Parameter row and initial guess for one (design, state, mains) case.

    Parameters
    ----------
    design : Design
    state : str
        Operating state (its load is taken from the design unless ``load_a`` is given).
    mains_factor : float
        Multiplier on the mains voltage (1.1 for the +10 % stress case) [-].
    load_a : float, optional
        Override of the output current [A] (used to search the largest deliverable load).

    Returns
    -------
    params : ndarray, shape (N_PARAMS,)
    x0 : ndarray, shape (4,)
    """
    parts, out, mains = design.parts, design.output, design.mains
    p = np.zeros(c.N_PARAMS)
    topo = {
        "capacitive-dropper": c.CAPACITIVE_DROPPER,
        "resistive-dropper": c.RESISTIVE_DROPPER,
        "rectifier-smps": c.RECTIFIER_SMPS,
        "mains-transformer": c.MAINS_TRANSFORMER,
    }[design.topology]
    p[c.P_NTURNS] = 1.0
    p[c.P_TOPO] = topo
    p[c.P_RECT] = c.BRIDGE if parts.rectifier == "bridge" else c.HALF_WAVE
    vpk = mains.voltage * math.sqrt(2.0) * mains_factor
    p[c.P_VPK] = vpk
    p[c.P_OMEGA] = 2.0 * math.pi * mains.frequency
    p[c.P_RSRC] = mains.source_resistance
    p[c.P_LSRC] = mains.source_inductance
    nvt = N_RECTIFIER * VT_V
    p[c.P_D_IS] = diode_saturation_current_a(
        parts.diode.forward_voltage, parts.diode.forward_test_current
    )
    p[c.P_D_NVT] = nvt
    x0 = np.zeros(c.N_STATES)
    if topo == c.RECTIFIER_SMPS:
        p[c.P_VO_MAX] = 1.05 * vpk
        p[c.P_RSER] = parts.series_resistance
        p[c.P_RB] = parts.bleeder_resistance
        p[c.P_CX] = parts.x_capacitance
        p[c.P_CO] = parts.bulk_capacitance
        p_out = design.load_power_w(state) if load_a is None else load_a * out.voltage
        p_in, eta = converter_input_power_w(out, p_out)
        p[c.P_PCONV] = p_in
        p[c.P_ETA] = eta
        p[c.P_UVLO] = out.undervoltage_lockout
        x0[c.S_VO] = 0.95 * vpk
        return p, x0
    # linear regulator (droppers and transformers)
    p[c.P_ILOAD] = design.load_current_a(state) if load_a is None else load_a
    p[c.P_IQ] = out.quiescent_current
    p[c.P_VOUT] = out.voltage
    p[c.P_VDO] = out.dropout
    p[c.P_CO] = parts.reservoir_capacitance
    vf = parts.diode.forward_voltage
    if topo == c.MAINS_TRANSFORMER:
        tr = transformer_model(design)
        p[c.P_NTURNS] = tr["turns_ratio"]
        p[c.P_RSER] = tr["winding_resistance_ohm"]
        p[c.P_LSRC] += parts.leakage_inductance
        p[c.P_LM] = tr["magnetizing_inductance_h"]
        p[c.P_RC] = tr["core_resistance_ohm"]
        p[c.P_VO_MAX] = 1.05 * vpk / p[c.P_NTURNS]
        v_sec_pk = vpk / tr["turns_ratio"]
        drops = 2 * vf if parts.rectifier == "bridge" else vf
        x0[c.S_VO] = max(0.9 * v_sec_pk - drops, 0.0)
        if parts.rectifier == "half-wave":
            # the diode at zero bias: consistent with a zero series current, which is the
            # initial state when leakage inductance makes the series current a state (the
            # solver would also get there from v_a = 0, in more limited Newton steps)
            x0[c.S_VA] = tr["turns_ratio"] * x0[c.S_VO]
        return p, x0
    p[c.P_RSER] = parts.series_resistance + (
        parts.dropper_resistance if topo == c.RESISTIVE_DROPPER else 0.0
    )
    if topo == c.CAPACITIVE_DROPPER:
        p[c.P_C1] = parts.series_capacitance
        p[c.P_RB] = parts.bleeder_resistance
    else:
        p[c.P_RB] = 1.0  # unused: row 0 reads v_c1 = 0
    vk, s = zener_knee(parts.zener_voltage, parts.zener_test_current, parts.zener_resistance)
    p[c.P_Z_VK], p[c.P_Z_S], p[c.P_Z_RZ] = vk, s, parts.zener_resistance
    p[c.P_ZF_IS] = p[c.P_D_IS]
    p[c.P_ZF_NVT] = nvt
    # the zener's voltage at the largest current the series branch can pass
    i_pk = vpk / max(p[c.P_RSER] + p[c.P_RSRC], 1e-3)
    if topo == c.CAPACITIVE_DROPPER:
        i_pk = min(i_pk, vpk * p[c.P_OMEGA] * p[c.P_C1])
    p[c.P_VO_MAX] = min(p[c.P_Z_VK] + 2.0 + p[c.P_Z_RZ] * i_pk, 1.05 * vpk)
    if p[c.P_RECT] == c.HALF_WAVE:
        x0[c.S_VO] = parts.zener_voltage - vf
        x0[c.S_VC1] = -parts.zener_voltage
    else:
        x0[c.S_VO] = parts.zener_voltage
        x0[c.S_VC1] = 0.0
    if topo != c.CAPACITIVE_DROPPER:
        x0[c.S_VC1] = 0.0
    return p, x0


# ----------------------------------------------------------------------------------
# results
# ----------------------------------------------------------------------------------
LOSS_LABELS = {
    "p_series_resistor_w": "series resistor",
    "p_bleeder_w": "bleeder",
    "p_zener_w": "zener",
    "p_rectifier_w": "rectifier",
    "p_regulator_pass_w": "regulator (pass element)",
    "p_regulator_quiescent_w": "regulator (quiescent)",
    "p_converter_w": "converter",
    "p_core_w": "transformer core",
}


@dataclass(frozen=True)
class Balance:
    """Energy balance of one state: input = delivered + losses (+ storage, ~0) [W]."""

    p_in_w: float
    delivered_w: float
    losses_w: float
    source_resistance_w: float
    storage_w: float

    @property
    def residual_w(self) -> float:
        return self.p_in_w - self.delivered_w - self.losses_w - self.source_resistance_w

    @property
    def residual_pct(self) -> float:
        return 100.0 * self.residual_w / self.p_in_w if self.p_in_w else 0.0


@dataclass(frozen=True)
class StateResult:
    """Periodic steady state of one (design, state) at one mains voltage."""

    state: str
    mains_factor: float
    load_a: float
    t_s: np.ndarray
    v_v: np.ndarray
    i_a: np.ndarray
    pq: PowerQuality
    losses_w: dict[str, float]
    balance: Balance
    v_dc_v: float
    v_dc_min_v: float
    ripple_v_pp: float
    i_dc_a: float  # mean current the load actually receives [A] (less than asked when the
    # regulator drops out)
    v_out_min_v: float
    i_zener_reverse_a: float
    p_zener_w: float
    p_series_resistor_w: float
    p_bleeder_w: float
    v_cap_peak_v: float
    v_cap_rms_v: float
    in_regulation: bool
    iterations: int

    def waveform(self) -> pd.DataFrame:
        """One cycle of source voltage [V] and line current [A]."""
        return pd.DataFrame({"t_s": self.t_s, "v_v": self.v_v, "i_a": self.i_a})


def _state_results(design, cases, sol) -> list[StateResult]:
    idx = {name: k for k, name in enumerate(c.PROBES)}
    results = []
    for b, (state, factor, load_a, _params) in enumerate(cases):
        pr = sol.probes[b]
        mean = pr.mean(axis=0)
        v = pr[:, idx["v_source_v"]]
        i = pr[:, idx["i_line_a"]]
        pq = power_quality(v, i)
        labels = dict(LOSS_LABELS)
        if design.topology == "resistive-dropper":
            labels["p_series_resistor_w"] = "dropper resistor"
        elif design.topology == "mains-transformer":
            labels["p_series_resistor_w"] = "transformer windings"
        losses = {
            labels[k]: float(mean[idx[k]])
            for k in c.LOSS_PROBES
            if abs(mean[idx[k]]) > 0.0 or k in ("p_series_resistor_w", "p_rectifier_w")
        }
        bal = Balance(
            p_in_w=pq.p_w,
            delivered_w=float(mean[idx["p_delivered_w"]]),
            losses_w=float(sum(losses.values())),
            source_resistance_w=float(mean[idx["p_source_resistance_w"]]),
            storage_w=float(sum(mean[idx[k]] for k in c.STORAGE_PROBES)),
        )
        vo = pr[:, idx["v_o_v"]]
        v_out = pr[:, idx["v_out_v"]]
        iz = pr[:, idx["i_zener_a"]]
        if design.has_linear_regulator:
            need = design.output.voltage + design.output.dropout
            ok = bool(vo.min() >= need - 1e-9)
            vcap = pr[:, idx["v_c1_v"]]
            v_cap_peak = float(np.max(np.abs(vcap)))
            v_cap_rms = float(np.sqrt(np.mean(vcap * vcap)))
        else:
            ok = bool(vo.min() >= design.output.undervoltage_lockout)
            v_cap_peak = float(np.max(np.abs(v)))
            v_cap_rms = float(np.sqrt(np.mean(v * v)))
        results.append(
            StateResult(
                state=state,
                mains_factor=factor,
                load_a=load_a,
                t_s=sol.t_s,
                v_v=v,
                i_a=i,
                pq=pq,
                losses_w=losses,
                balance=bal,
                v_dc_v=float(vo.mean()),
                v_dc_min_v=float(vo.min()),
                ripple_v_pp=float(vo.max() - vo.min()),
                i_dc_a=(load_a * float(np.mean(v_out)) / design.output.voltage
                        if design.has_linear_regulator else load_a),
                v_out_min_v=float(v_out.min()),
                i_zener_reverse_a=float(np.mean(np.clip(iz, 0.0, None))),
                p_zener_w=float(mean[idx["p_zener_w"]]),
                p_series_resistor_w=float(mean[idx["p_series_resistor_w"]]),
                p_bleeder_w=float(mean[idx["p_bleeder_w"]]),
                v_cap_peak_v=v_cap_peak,
                v_cap_rms_v=v_cap_rms,
                in_regulation=ok,
                iterations=int(sol.iterations[b]),
            )
        )
    return results


def simulate_cases(
    design: Design,
    cases: list[tuple[str, float, float | None]],
    samples_per_cycle: int = DEFAULT_SAMPLES_PER_CYCLE,
) -> list[StateResult]:
    """Solve (state, mains factor, output-current override or None) cases in one batch."""
    rows, x0s, full = [], [], []
    for state, factor, load in cases:
        if state not in design.states:
            raise InputError(
                design.source, "states", f"unknown state {state!r}{suggest(state, design.states)}"
            )
        p, x0 = circuit_rows(design, state, factor, load)
        load_a = design.load_current_a(state) if load is None else load
        full.append((state, factor, load_a, p))
        rows.append(p)
        x0s.append(x0)
    labels = [f"{design.name} / {s} at {f:.2f}x mains" for s, f, _, _ in full]
    sol = solve_periodic(np.array(rows), np.array(x0s), samples_per_cycle, labels)
    return _state_results(design, full, sol)


def simulate(
    design: Design,
    states: list[str] | None = None,
    mains_factors: tuple[float, ...] = (1.0,),
    samples_per_cycle: int = DEFAULT_SAMPLES_PER_CYCLE,
) -> list[StateResult]:
    """Simulate states of a design to periodic steady state, all in one batch.

    Parameters
    ----------
    design : Design
    states : list of str, optional
        States to simulate (default: all, in file order).
    mains_factors : tuple of float
        Mains voltage multipliers; every state is solved at each.
    samples_per_cycle : int
        Samples (and integration steps) per mains cycle.

    Returns
    -------
    list of StateResult
        Ordered by mains factor, then state.
    """
    states = list(design.states) if states is None else list(states)
    cases = [(s, f, None) for f in mains_factors for s in states]
    return simulate_cases(design, cases, samples_per_cycle)


# ----------------------------------------------------------------------------------
# deliverable current and the hand estimate
# ----------------------------------------------------------------------------------
def max_deliverable_current_a(
    design: Design, mains_factor: float = 1.0, rounds: int = 2, points: int = 12
) -> float:
    """Largest output current [A] a dropper sustains in regulation.

    Found by bracketing: each round solves ``points`` loads in one batch and narrows to
    the last load whose reservoir minimum stays above output voltage + dropout.
    """
    if not design.has_linear_regulator:
        raise ValueError("only linear-regulator supplies have a current limit set by their parts")
    state = next(iter(design.states))
    if design.topology == "mains-transformer":  # well beyond the nameplate rating
        hi = 3.0 * design.parts.rated_power / design.parts.secondary_voltage
    else:
        hi = 1.5 * max(charge_pump_limit_a(design), 1e-3)
    lo = 0.0
    for _ in range(rounds):
        loads = np.linspace(lo, hi, points)
        res = simulate_cases(design, [(state, mains_factor, float(x)) for x in loads])
        ok = np.array([r.in_regulation for r in res])
        if not ok[0]:
            return 0.0
        last = int(np.flatnonzero(ok)[-1])
        if last == points - 1:
            return float(loads[-1])
        lo, hi = float(loads[last]), float(loads[last + 1])
    return lo


def charge_pump_limit_a(design: Design) -> float:
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
    if design.topology == "capacitive-dropper":
        cap = parts.series_capacitance
        if parts.rectifier == "half-wave":
            return f * cap * max(2 * vpk - parts.zener_voltage - vf, 0.0)
        return 4 * f * cap * max(vpk - parts.zener_voltage - 2 * vf, 0.0)
    # resistive: average of the current through R while the node is clamped
    r = parts.dropper_resistance + parts.series_resistance
    vz = parts.zener_voltage
    theta = math.asin(min(vz / vpk, 1.0))
    mean_half = (2 * vpk * math.cos(theta) - vz * (math.pi - 2 * theta)) / (2 * math.pi * r)
    return mean_half * (1 if parts.rectifier == "half-wave" else 2)


@dataclass(frozen=True)
class HandEstimate:
    """The designer's quick estimate beside the simulated deliverable current."""

    xc_ohm: float
    i_cap_rms_a: float
    hand_estimate_a: float
    rule: str
    sine_average_a: float
    charge_pump_a: float
    simulated_max_a: float
    explanation: list[str]


def hand_estimate(design: Design, simulated_max_a: float) -> HandEstimate | None:
    """Compare the reactance rule of thumb with the waveform's deliverable current.

    Notes
    -----
    The rule of thumb takes the capacitor current as a sinusoid of rms value
    :math:`V/X_C` and half of it as the half-wave DC output. The mean of a half sine of
    peak :math:`\\sqrt{2} V/X_C` over a whole cycle is :math:`\\sqrt{2} V / (\\pi X_C)`,
    i.e. :math:`2\\sqrt{2}/\\pi = 0.900` of the rule; the clamp then takes
    :math:`(V_Z + V_F)` off the :math:`2V_{pk}` charge swing
    (:func:`charge_pump_limit_a`); series resistance, bleeder, ripple and regulator
    headroom account for the rest, which only the simulation gives.
    """
    if design.topology != "capacitive-dropper":
        return None
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
        f"{simulated_max_a * 1e3:.1f} mA simulated ({100 * (simulated_max_a / est - 1):+.1f} %)",
    ]
    return HandEstimate(xc, i_rms, est, rule, sine_avg, pump, simulated_max_a, lines)


# ----------------------------------------------------------------------------------
# stresses
# ----------------------------------------------------------------------------------
@dataclass(frozen=True)
class Stress:
    """One component stress against its rating."""

    item: str
    value: float
    unit: str
    limit: float | None
    verdict: str  # "pass" | "fail" | "unrated" | "note"
    condition: str
    note: str = ""

    @property
    def used_pct(self) -> float | None:
        return None if not self.limit else 100.0 * self.value / self.limit


def _rated(item, value, unit, rating, condition, note="") -> Stress:
    if rating is None:
        return Stress(item, value, unit, None, "unrated", condition, note or "no rating given")
    return Stress(item, value, unit, rating, "pass" if value <= rating else "fail", condition,
                  note)


def _capacitor_voltage(name, v_peak, v_rms, rating, kind, cond, note=""):
    """Peak and rms voltage of a capacitor; the one its rating is stated in is checked.

    Safety (X/Y) capacitors are rated in V AC rms (``kind = "ac"``, the default); a
    DC-rated film part (``"dc"``) is checked against the peak.
    """
    peak = Stress(f"{name} peak voltage", v_peak, "V", None, "note", cond,
                  "compared with a DC rating" if kind == "dc" else "")
    rms = Stress(f"{name} rms voltage", v_rms, "V", None, "note", cond, "")
    if kind == "dc":
        peak = _rated(f"{name} peak voltage", v_peak, "V", rating, cond,
                      (note + "; " if note else "") + "rating read as DC")
    else:
        rms = _rated(f"{name} rms voltage", v_rms, "V", rating, cond,
                     (note + "; " if note else "") + "rating read as AC rms")
    return [peak, rms]


def discharge_time_s(v0_v: float, v_th_v: float, r_ohm: float, c_f: float) -> float:
    """Time [s] for an RC discharge from ``v0_v`` to fall below ``v_th_v``: RC ln(V0/Vth)."""
    return 0.0 if v0_v <= v_th_v else r_ohm * c_f * math.log(v0_v / v_th_v)


def discharge_rules() -> list[tuple[float, float, str]]:
    """(threshold [V], allowed time [s], source) of the shipped plug-pin discharge sets."""
    rules = []
    for name in DISCHARGE_SETS:
        df = load_limit_set(name)
        v_th = float(df.loc[df["quantity"] == "v_threshold_v", "limit"].iloc[0])
        row = df.loc[df["quantity"] == "t_discharge_s"].iloc[0]
        rules.append((v_th, float(row["limit"]),
                      f"{row['edition']} {row['clause']} ({row['provenance']})"))
    return rules


def _transformer_stresses(design: Design, stressed: list[StateResult], cond: str):
    """Loading of a mains transformer against its nameplate, at +10 % mains."""
    parts = design.parts
    r_w = transformer_model(design)["winding_resistance_ohm"]
    # winding current from the winding loss (I = sqrt(P / R)), times the rated voltage: the
    # load the windings carry, which is what the nameplate VA limits (it heats them)
    s_load = max(design.mains.voltage * math.sqrt(r.p_series_resistor_w / r_w) for r in stressed)
    return [
        _rated("transformer load (winding current x rated voltage)", s_load, "VA",
               parts.rated_power, cond, "against the nameplate VA"),
        Stress("inrush peak, winding-limited", design.mains.voltage * math.sqrt(2)
               * STRESS_MAINS_FACTOR / r_w, "A", None, "note",
               f"Vpk x {STRESS_MAINS_FACTOR:.2f} / winding resistance",
               "a lower bound: magnetizing inrush from core saturation (not modelled) "
               "can be far higher"),
    ]


def stresses(design: Design, stressed: list[StateResult]) -> list[Stress]:
    """Component stresses from the states simulated at +10 % mains."""
    parts = design.parts
    cond = f"worst state at {STRESS_MAINS_FACTOR:.2f}x mains"
    vpk_hi = design.mains.voltage * math.sqrt(2) * STRESS_MAINS_FACTOR
    out: list[Stress] = []
    if design.topology == "mains-transformer":
        return _transformer_stresses(design, stressed, cond)
    r_inrush = parts.series_resistance + design.mains.source_resistance
    if design.topology == "resistive-dropper":
        r_inrush += parts.dropper_resistance
    if design.topology == "capacitive-dropper":
        v_cap = max(r.v_cap_peak_v for r in stressed)
        v_rms = max(r.v_cap_rms_v for r in stressed)
        out += _capacitor_voltage("series capacitor", v_cap, v_rms,
                                  parts.capacitor_voltage_rating,
                                  parts.capacitor_rating_type, cond,
                                  "an X2-class part is usual for a series dropper capacitor")
        cap, rb = parts.series_capacitance, parts.bleeder_resistance
    elif design.topology == "rectifier-smps":
        v_cap = vpk_hi
        out += _capacitor_voltage("X capacitor", v_cap, v_cap / math.sqrt(2),
                                  parts.x_capacitor_voltage_rating,
                                  parts.x_capacitor_rating_type, cond)
        cap, rb = parts.x_capacitance, parts.bleeder_resistance
    else:
        cap = rb = None
        v_cap = 0.0
    inrush = vpk_hi / r_inrush if r_inrush > 0 else math.inf
    lo, hi = INRUSH_RESISTOR_RANGE_OHM
    note = (f"series resistance {r_inrush:.1f} ohm; {lo:.0f}-{hi:.0f} ohm pulse-rated is usual"
            if design.is_dropper else f"series resistance {r_inrush:.1f} ohm")
    verdict = "note"
    if design.topology == "capacitive-dropper" and r_inrush < lo:
        verdict, note = "fail", note + " (below the usual minimum)"
    out.append(Stress("inrush peak if plugged in at the crest", inrush, "A", None, verdict,
                      f"Vpk x {STRESS_MAINS_FACTOR:.2f} / series resistance", note))
    if design.is_dropper:
        pz = max(r.p_zener_w for r in stressed)
        out.append(_rated("zener dissipation", pz, "W", parts.zener_power_rating, cond))
    pr = max(r.p_series_resistor_w for r in stressed)
    rating = (parts.dropper_power_rating if design.topology == "resistive-dropper"
              else parts.series_resistor_power_rating)
    name = "dropper resistor dissipation" if design.topology == "resistive-dropper" \
        else "series resistor dissipation"
    out.append(_rated(name, pr, "W", rating, cond))
    if cap is not None:
        pb = max(r.p_bleeder_w for r in stressed)
        out.append(_rated("bleeder dissipation", pb, "W", parts.bleeder_power_rating, cond))
        for v_th, t_max, source in discharge_rules():
            t = discharge_time_s(v_cap, v_th, rb, cap)
            out.append(Stress(f"discharge to {v_th:.0f} V after unplugging", t, "s", t_max,
                              "pass" if t <= t_max else "fail",
                              f"from {v_cap:.0f} V through the bleeder alone", source))
    return out


# ----------------------------------------------------------------------------------
# the whole unit
# ----------------------------------------------------------------------------------
@dataclass(frozen=True)
class UnitAnalysis:
    """Everything ``fleetpower unit`` reports for one design."""

    design: Design
    states: list[StateResult]
    stresses: list[Stress]
    warnings: list[str]
    caution: str | None
    max_deliverable_a: float | None
    hand: HandEstimate | None
    extra: dict = field(default_factory=dict)

    def summary(self) -> pd.DataFrame:
        """One row per state: the headline power-quality figures with units in names."""
        rows = []
        for r in self.states:
            q = r.pq
            rows.append({
                "state": r.state, "v_rms_v": q.v_rms_v, "i_rms_a": q.i_rms_a,
                "i_peak_a": q.i_peak_a, "crest_factor": q.crest_factor, "p_w": q.p_w,
                "s_va": q.s_va, "q1_var": q.q1_var, "dpf": q.dpf, "pf": q.pf,
                "thd_i_pct": q.thd_i_pct, "v_dc_v": r.v_dc_v, "ripple_v_pp": r.ripple_v_pp,
                "i_dc_a": r.i_dc_a,
            })
        return pd.DataFrame(rows)


def analyse_unit(design: Design, states: list[str] | None = None) -> UnitAnalysis:
    """Simulate, analyse and stress-check one design (the library behind ``fleetpower unit``).

    All requested states are solved at nominal mains and all states at +10 % mains (for
    stresses) in one batch.
    """
    chosen = list(design.states) if states is None else list(states)
    all_states = list(design.states)
    for s in chosen:
        if s not in design.states:
            raise InputError(design.source, "--state",
                             f"unknown state {s!r}{suggest(s, design.states)}")
    results = simulate(design, all_states, (1.0, STRESS_MAINS_FACTOR))
    nominal = [r for r in results if r.mains_factor == 1.0 and r.state in chosen]
    stressed = [r for r in results if r.mains_factor != 1.0]
    warnings: list[str] = []
    max_a = None
    hand = None
    if design.has_linear_regulator:
        if any(not r.in_regulation for r in nominal) or design.topology == "capacitive-dropper":
            max_a = max_deliverable_current_a(design)
        for r in nominal:
            if not r.in_regulation:
                warnings.append(
                    f"state '{r.state}': the reservoir falls to {r.v_dc_min_v:.2f} V, below "
                    f"output + dropout ({design.output.voltage + design.output.dropout:.2f} V);"
                    f" the supply cannot deliver {r.load_a * 1e3:.1f} mA — the largest "
                    f"load it holds in regulation is {max_a * 1e3:.1f} mA"
                )
        hand = hand_estimate(design, max_a) if max_a is not None else None
    else:
        for r in nominal:
            if not r.in_regulation:
                warnings.append(
                    f"state '{r.state}': the bulk capacitor falls to {r.v_dc_min_v:.1f} V, "
                    f"below the converter's lockout ({design.output.undervoltage_lockout:.1f} V)"
                )
    for r in nominal:
        if abs(r.pq.i_dc_a) > 1e-3 * max(r.pq.i_rms_a, 1e-12) and abs(r.pq.i_dc_a) > 1e-4:
            why = ("a DC bias saturates a real transformer's core, which the model does not"
                   if design.topology == "mains-transformer"
                   else "half-wave rectifier without a series capacitor")
            warnings.append(
                f"state '{r.state}': draws {r.pq.i_dc_a * 1e3:.2f} mA DC from the mains ({why})"
            )
        if abs(r.balance.residual_pct) > 0.5:
            warnings.append(
                f"state '{r.state}': energy balance closes only to {r.balance.residual_pct:.2f} %"
            )
    st = stresses(design, stressed)
    for s in st:
        if s.verdict == "fail":
            warnings.append(f"stress: {s.item} {s.value:.3g} {s.unit} fails ({s.note or s.condition})")
    return UnitAnalysis(
        design=design,
        states=nominal,
        stresses=st,
        warnings=warnings,
        caution=None if design.is_isolated else NON_ISOLATION_CAUTION,
        max_deliverable_a=max_a,
        hand=hand,
    )
