"""Brute-force reference model of fleetpower's circuits, for acceptance tests and benchmarks.

Written from the physical description of the topologies (the docstrings of
:mod:`fleetpower.engine.circuits`, :mod:`fleetpower.engine.devices` and, for the transformer, of
``fleetpower.topologies.mains_transformer.transformer_model``), **not** from the engine's code:
nothing here imports ``fleetpower.engine.circuits``, ``fleetpower.engine.solver`` or
``fleetpower.simulate``. Only the datasheet-to-model helpers of :mod:`fleetpower.engine.devices`
(``diode_saturation_current_a``, ``zener_knee`` and the physical constants) are used,
because they define what a datasheet figure means; the device currents themselves are
written again below.

Method
------
The circuit is an ODE in its capacitor voltages only. The node between the series
branch and the rectifier (``a``) has no capacitance, so at every right-hand-side call
its voltage is solved from Kirchhoff's current law with :func:`scipy.optimize.brentq`.
The KCL residual ``g(v_a)`` is strictly decreasing with slope at most ``-1/R`` (R = the
total series resistance), so one evaluation at a guess ``x0`` gives a guaranteed
bracket ``[x0, x0 + R g(x0)]``. The ODE is integrated from t = 0 with scipy's Radau
(implicit Runge-Kutta, order 5) one mains cycle at a time, from a physically estimated
initial state, until the line current stops changing from one cycle to the next; the
last cycle is then sampled uniformly and analysed with :mod:`numpy.fft` directly.

Mains transformer (approximate equivalent circuit referred to the primary; Fitzgerald,
Kingsley & Umans, *Electric Machinery*, ch. 2): the magnetizing inductance L_m and the
core-loss resistance R_c sit on the source EMF ``v_s``, so their currents are known in
closed form (the steady-state current of an inductor on a sine, ``-Vpk/(w L_m) cos wt``,
and ``v_s/R_c``); the winding resistance R_w (plus the source's) carries the branch
current to node ``a`` on the primary of an ideal n:1 transformer, whose secondary
``v_a/n`` feeds the rectifier and whose primary current is the rectifier's ``/ n``. The
equivalent-circuit values are derived here again from the datasheet figures
(:func:`transformer_equivalent`). The KCL residual at ``a`` then has slope
``-1/R - g_rect/n^2``, still at most ``-1/R``, so the bracket above holds.

Source and leakage inductance are not modelled (every design used with this module has
none): asking for them raises ``NotImplementedError``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
from scipy.integrate import solve_ivp
from scipy.optimize import brentq

from fleetpower.engine.devices import N_RECTIFIER, VT_V, diode_saturation_current_a, zener_knee

#: Current above which the reference's Shockley exponential is continued by its tangent
#: [A]. Only a bracket end of the root search can get there (it keeps exp() finite);
#: every solution stays far below it.
_EXP_GUARD_A = 1.0e4


# ----------------------------------------------------------------------------------------
# devices (scalar, plain Python)
# ----------------------------------------------------------------------------------------
def shockley(v: float, i_s: float, nvt: float) -> tuple[float, float]:
    """Diode current [A] and its derivative [A/V] at junction voltage ``v`` [V]."""
    u = v / nvt
    u_max = math.log(_EXP_GUARD_A / i_s)
    if u > u_max:
        e = math.exp(u_max)
        return i_s * (e * (1.0 + u - u_max) - 1.0), i_s * e / nvt
    return i_s * math.expm1(u), i_s * math.exp(u) / nvt


def zener_reverse(v: float, vk: float, s: float, rz: float) -> tuple[float, float]:
    """Softplus breakdown current [A] (and derivative) of a zener reverse-biased by ``v``."""
    u = (v - vk) / s
    if u > 0.0:
        sp = u + math.log1p(math.exp(-u))
        sig = 1.0 / (1.0 + math.exp(-u))
    else:
        e = math.exp(u)
        sp = math.log1p(e)
        sig = e / (1.0 + e)
    return s / rz * sp, sig / rz


# ----------------------------------------------------------------------------------------
# model parameters, taken from the design's physical figures
# ----------------------------------------------------------------------------------------
#: magnetizing current as a multiple of the core-loss current when a transformer's
#: no-load current is not given: the design format's stated default (a no-load power
#: factor of about 1/sqrt(10) = 0.32 for small mains transformers, from memory)
MAGNETIZING_TO_CORE_CURRENT_DEFAULT = 3.0


def transformer_equivalent(design) -> dict[str, float]:
    """Primary-referred equivalent circuit of a mains transformer from its datasheet.

    Open-circuit test figures give the shunt branch: the no-load power P0 is all core
    loss at rated voltage V, so R_c = V^2 / P0; the no-load current I0 is the phasor sum
    of the in-phase core-loss current P0/V and the quadrature magnetizing current, so
    I_m = sqrt(I0^2 - (P0/V)^2) and L_m = V / (w I_m). The turns ratio is V over the
    open-circuit secondary voltage. The regulation r = (U_nl - U_fl) / U_fl is taken at
    rated VA into a resistive load: referred to the primary the full-load voltage is
    U_fl = V / (1 + r), the load R_L = U_fl^2 / S, and the series branch R_w + jX (X the
    leakage reactance) with R_L divides V: (1 + r)^2 = (1 + R_w/R_L)^2 + (X/R_L)^2, so
    R_w = R_L (sqrt((1 + r)^2 - (X/R_L)^2) - 1) (Fitzgerald, Kingsley & Umans, Electric
    Machinery, ch. 2: approximate equivalent circuit, open- and short-circuit tests,
    voltage regulation). Everything at the nameplate rating (parts.primary_voltage and
    primary_frequency), whatever mains the design is on.
    """
    parts = design.parts
    v, freq = parts.primary_voltage, parts.primary_frequency
    omega = 2.0 * math.pi * freq
    i_core = parts.no_load_power / v
    if parts.no_load_current is None:
        i_mag = MAGNETIZING_TO_CORE_CURRENT_DEFAULT * i_core
    else:
        i_mag = math.sqrt(parts.no_load_current**2 - i_core**2)
    r = parts.regulation_pct / 100.0
    r_load = (v / (1.0 + r)) ** 2 / parts.rated_power
    x_leak = omega * parts.leakage_inductance
    return {
        "turns_ratio": v / parts.secondary_voltage,
        "winding_resistance_ohm": r_load * (math.sqrt((1.0 + r) ** 2 - (x_leak / r_load) ** 2)
                                            - 1.0),
        "core_resistance_ohm": v**2 / parts.no_load_power,
        "magnetizing_inductance_h": v / (omega * i_mag),
    }


def converter_input_power(design, state: str) -> float:
    """Converter input power [W] at a state's output power, from the design's table.

    The efficiency table (fraction of rated power, efficiency) is read by linear
    interpolation, held at its end values outside; the input never falls below the
    no-load input power plus the output power (the model the design format specifies).
    """
    out = design.output
    p_out = design.load_power_w(state)
    if p_out <= 0.0:
        return out.no_load_input_power
    pts = sorted(out.efficiency)
    eta = float(np.interp(p_out / out.rated_power, [a for a, _ in pts], [b for _, b in pts]))
    return max(p_out / eta, out.no_load_input_power + p_out)


@dataclass
class Circuit:
    """Physical parameters of one (design, state) case, SI units."""

    topology: str
    bridge: bool
    vpk: float
    omega: float
    r_series: float  # series / dropper resistor(s) of the supply [ohm]
    r_source: float  # mains source resistance [ohm]
    c1: float = 0.0  # series (dropper) capacitor [F]
    r_bleed: float = math.inf  # bleeder (across C1, or across the mains for an SMPS) [ohm]
    c_out: float = 0.0  # reservoir / bulk capacitor [F]
    c_x: float = 0.0  # X capacitor across the mains [F]
    d_is: float = 0.0
    d_nvt: float = 0.0
    z_vk: float = 0.0
    z_s: float = 1.0
    z_rz: float = 1.0
    i_load: float = 0.0  # regulator output current [A]
    i_q: float = 0.0  # regulator quiescent current [A]
    v_out: float = 0.0  # regulated output [V]
    v_dropout: float = 0.0
    p_conv: float = 0.0  # converter input power [W]
    p_out: float = 0.0  # converter output power [W]
    uvlo: float = 0.0
    vf: float = 0.7  # datasheet forward voltage, for the initial-state estimate [V]
    vz: float = 0.0  # datasheet zener voltage, for the initial-state estimate [V]
    n_turns: float = 1.0  # transformer turns ratio primary:secondary (1: none)
    l_m: float = math.inf  # magnetizing inductance, primary side [H]
    r_c: float = math.inf  # core-loss resistance, primary side [ohm]

    @property
    def period(self) -> float:
        return 2.0 * math.pi / self.omega

    @property
    def r_total(self) -> float:
        return self.r_series + self.r_source

    @property
    def has_c1(self) -> bool:
        return self.topology == "capacitive-dropper"

    @property
    def has_zener(self) -> bool:
        return self.topology in ("capacitive-dropper", "resistive-dropper")

    @property
    def transformer(self) -> bool:
        return self.topology == "mains-transformer"

    def shunt_current(self, t):
        """Current [A] of the branches on the source EMF (X capacitor and bleeder of an
        SMPS; magnetizing and core-loss branch of a transformer); 0 otherwise."""
        vs = self.vpk * np.sin(self.omega * t)
        if self.topology == "rectifier-smps":
            return self.c_x * self.vpk * self.omega * np.cos(self.omega * t) + vs / self.r_bleed
        if self.transformer:
            # L_m di/dt = Vpk sin(wt): the periodic solution is -Vpk/(w L_m) cos(wt)
            return -self.vpk / (self.omega * self.l_m) * np.cos(self.omega * t) + vs / self.r_c
        return 0.0 * vs


def circuit_from_design(design, state: str, load_a: float | None = None) -> Circuit:
    """Translate a validated design and one of its states into :class:`Circuit`."""
    parts, mains, out = design.parts, design.mains, design.output
    d_is = diode_saturation_current_a(parts.diode.forward_voltage, parts.diode.forward_test_current)
    ckt = Circuit(
        topology=design.topology,
        bridge=parts.rectifier == "bridge",
        vpk=math.sqrt(2.0) * mains.voltage,
        omega=2.0 * math.pi * mains.frequency,
        r_series=getattr(parts, "series_resistance", 0.0),
        r_source=mains.source_resistance,
        d_is=d_is,
        d_nvt=N_RECTIFIER * VT_V,
        vf=parts.diode.forward_voltage,
    )
    if mains.source_inductance > 0.0:
        raise NotImplementedError("the reference model has no source inductance")
    if design.topology == "rectifier-smps":
        ckt.r_bleed = parts.bleeder_resistance
        ckt.c_x = parts.x_capacitance
        ckt.c_out = parts.bulk_capacitance
        ckt.p_conv = converter_input_power(design, state)
        ckt.p_out = design.load_power_w(state)
        ckt.uvlo = out.undervoltage_lockout
        return ckt
    if design.topology == "mains-transformer":
        if parts.leakage_inductance > 0.0:
            raise NotImplementedError("the reference model has no leakage inductance")
        tr = transformer_equivalent(design)
        ckt.n_turns = tr["turns_ratio"]
        ckt.r_series = tr["winding_resistance_ohm"]
        ckt.l_m = tr["magnetizing_inductance_h"]
        ckt.r_c = tr["core_resistance_ohm"]
        ckt.c_out = parts.reservoir_capacitance
        ckt.i_load = design.load_current_a(state) if load_a is None else load_a
        ckt.i_q = out.quiescent_current
        ckt.v_out = out.voltage
        ckt.v_dropout = out.dropout
        return ckt
    if design.topology == "resistive-dropper":
        ckt.r_series = parts.series_resistance + parts.dropper_resistance
    else:
        ckt.c1 = parts.series_capacitance
        ckt.r_bleed = parts.bleeder_resistance
    ckt.c_out = parts.reservoir_capacitance
    ckt.z_vk, ckt.z_s = zener_knee(
        parts.zener_voltage, parts.zener_test_current, parts.zener_resistance
    )
    ckt.z_rz = parts.zener_resistance
    ckt.vz = parts.zener_voltage
    ckt.i_load = design.load_current_a(state) if load_a is None else load_a
    ckt.i_q = out.quiescent_current
    ckt.v_out = out.voltage
    ckt.v_dropout = out.dropout
    return ckt


# ----------------------------------------------------------------------------------------
# circuit equations
# ----------------------------------------------------------------------------------------
def zener_current(ckt: Circuit, v: float) -> tuple[float, float]:
    """Zener current [A] (cathode at ``v`` against anode) and d/dv: breakdown - forward."""
    ib, db = zener_reverse(v, ckt.z_vk, ckt.z_s, ckt.z_rz)
    i_f, df = shockley(-v, ckt.d_is, ckt.d_nvt)
    return ib - i_f, db + df


def rectifier_currents(ckt: Circuit, va: float, vo: float):
    """Currents [A] of the rectifier at input ``va`` and output ``vo``.

    Returns (current into the rectifier from node a, its d/dva, current delivered to the
    output capacitor, list of (junction voltage, current) of every diode).
    A bridge path is two equal diodes in series, each seeing half the path voltage.
    """
    if ckt.bridge:
        i1, d1 = shockley(0.5 * (va - vo), ckt.d_is, ckt.d_nvt)
        i2, d2 = shockley(0.5 * (-va - vo), ckt.d_is, ckt.d_nvt)
        diodes = [(0.5 * (va - vo), i1)] * 2 + [(0.5 * (-va - vo), i2)] * 2
        return i1 - i2, 0.5 * (d1 + d2), i1 + i2, diodes
    i_d, dd = shockley(va - vo, ckt.d_is, ckt.d_nvt)
    return i_d, dd, i_d, [(va - vo, i_d)]


def load_current(ckt: Circuit, vo: float) -> float:
    """Current [A] the regulator or converter draws from the output capacitor."""
    if ckt.topology == "rectifier-smps":
        # constant input power above the undervoltage lockout, with the smooth turn-on
        # the engine's documentation specifies (tanh over 2 % of UVLO + 0.5 V)
        gate = 0.5 * (1.0 + math.tanh((vo - ckt.uvlo) / (0.02 * ckt.uvlo + 0.5)))
        return ckt.p_conv * gate / vo if vo > 0.0 else 0.0
    # linear regulator: constant current (load + quiescent) whatever its input
    return ckt.i_load + ckt.i_q


class Model:
    """Right-hand side of the ODE, with the algebraic node solved at every call."""

    def __init__(self, ckt: Circuit):
        self.ckt = ckt
        self._va_guess = 0.0
        self.rhs_calls = 0
        self.root_evals = 0

    def unpack(self, y):
        if self.ckt.has_c1:
            return float(y[0]), float(y[1])
        return 0.0, float(y[0])

    def kcl_slope(self, va: float, vs: float, vc1: float, vo: float) -> tuple[float, float]:
        """KCL residual at node a [A] (current in from the series branch less the current
        leaving into rectifier and zener) and its derivative d/dva [A/V] (< -1/R)."""
        ckt = self.ckt
        self.root_evals += 1
        n = ckt.n_turns
        i_s = (vs - vc1 - va) / ckt.r_total
        # the rectifier sees v_a / n; its current appears on the primary divided by n
        i_rect, d_rect, _, _ = rectifier_currents(ckt, va / n, vo)
        out = i_s - i_rect / n
        slope = -1.0 / ckt.r_total - d_rect / (n * n)
        if ckt.has_zener and not ckt.bridge:
            iz, dz = zener_current(ckt, va)
            out -= iz
            slope -= dz
        return out, slope

    def kcl(self, va: float, vs: float, vc1: float, vo: float) -> float:
        return self.kcl_slope(va, vs, vc1, vo)[0]

    def node_voltage(self, t: float, vc1: float, vo: float) -> float:
        """Solve KCL at node a for v_a [V] (brentq on a guaranteed bracket)."""
        ckt = self.ckt
        vs = ckt.vpk * math.sin(ckt.omega * t)
        x0 = self._va_guess
        g0 = self.kcl(x0, vs, vc1, vo)
        if g0 == 0.0:
            return x0
        # g is decreasing with slope <= -1/R, so g(x0 + R g0) <= 0 <= g0 (or the reverse);
        # where g is linear there, rounding can leave it a hair on g0's side: widen then
        step = ckt.r_total * g0
        for _ in range(60):
            x1 = x0 + step
            g1 = self.kcl(x1, vs, vc1, vo)
            if g1 == 0.0:
                self._va_guess = x1
                return x1
            if (g1 > 0.0) != (g0 > 0.0):
                break
            step *= 2.0
        else:
            raise RuntimeError("no bracket for the node voltage")
        lo, hi = (x0, x1) if g0 > 0.0 else (x1, x0)
        va = brentq(self.kcl, lo, hi, args=(vs, vc1, vo), xtol=1e-15, rtol=1e-15, maxiter=200)
        # one Newton step polishes brentq's answer to the rounding level of the residual,
        # so the right-hand side is a smooth function of the state (Radau's Newton
        # iteration at rtol 1e-9 stalls on a noisy one)
        g, dg = self.kcl_slope(va, vs, vc1, vo)
        step = -g / dg
        if lo <= va + step <= hi:
            va += step
        self._va_guess = va
        return va

    def rhs(self, t, y):
        self.rhs_calls += 1
        ckt = self.ckt
        vc1, vo = self.unpack(y)
        va = self.node_voltage(t, vc1, vo)
        vs = ckt.vpk * math.sin(ckt.omega * t)
        i_s = (vs - vc1 - va) / ckt.r_total
        _, _, i_dc, _ = rectifier_currents(ckt, va / ckt.n_turns, vo)
        i_out = i_dc - load_current(ckt, vo)
        if ckt.has_zener and ckt.bridge:
            i_out -= zener_current(ckt, vo)[0]
        dvo = i_out / ckt.c_out
        if ckt.has_c1:
            return [(i_s - vc1 / ckt.r_bleed) / ckt.c1, dvo]
        return [dvo]

    def jac(self, t, y):
        """Jacobian of :meth:`rhs` by central differences with a fixed step.

        Supplied to Radau instead of its adaptive finite differences: where a column is
        exactly zero (a reverse-biased diode makes dv_o/dt independent of v_o), the
        adaptive scheme keeps enlarging its probe until it switches the diode on, and
        the resulting wrong Jacobian stalls the Newton iteration.
        """
        y = np.asarray(y, dtype=float)
        n = y.shape[0]
        out = np.empty((n, n))
        for j in range(n):
            d = 1e-6 * max(abs(y[j]), 1.0)
            yp, ym = y.copy(), y.copy()
            yp[j] += d
            ym[j] -= d
            out[:, j] = (np.asarray(self.rhs(t, yp)) - np.asarray(self.rhs(t, ym))) / (2.0 * d)
        return out

    def _transformer_reservoir_estimate(self) -> float:
        """Reservoir voltage [V] of a transformer supply at t = 0, estimated.

        Secondary-referred, the source is E sin(wt) (E = Vpk/n) behind R' = R/n^2, less
        the diode drops D (datasheet Vf each). With the reservoir held at V the diodes
        conduct for theta in [alpha, pi - alpha], sin(alpha) = V/E, per conducting
        half-cycle, and deliver on average
        I(V) = k [2 E cos(alpha) - V (pi - 2 alpha)] / (2 pi R'), k = 1 (half-wave) or
        2 (bridge); V solves I(V) = load current. At t = 0 the reservoir has fed the
        load since the end of the last conduction, about T/4 (bridge) or 3T/4 ago.
        """
        ckt = self.ckt
        n = ckt.n_turns
        e = ckt.vpk / n - (2.0 if ckt.bridge else 1.0) * ckt.vf
        r2 = ckt.r_total / (n * n)
        k = 2.0 if ckt.bridge else 1.0
        i_load = ckt.i_load + ckt.i_q

        def excess(v):
            alpha = math.asin(min(v / e, 1.0))
            return (
                k * (2 * e * math.cos(alpha) - v * (math.pi - 2 * alpha)) / (2 * math.pi * r2)
                - i_load
            )

        if e <= 0.0:
            return 0.0
        v = e if excess(e) >= 0.0 else brentq(excess, 0.0, e, xtol=1e-9)
        t_since = ckt.period / 4.0 if ckt.bridge else 0.75 * ckt.period
        return max(v - 0.5 * i_load * t_since / ckt.c_out, 0.0)

    def initial_state(self) -> np.ndarray:
        """A physical estimate of the steady state at t = 0 (source voltage zero, rising).

        Dropper: the node is clamped (half-wave between -Vf and Vz, bridge at
        +-(Vz + 2 Vf)); at t = 0 the positive clamp already conducts, so the series
        capacitor sits at -(clamp voltage) and the reservoir just below the zener
        voltage. SMPS: the bulk capacitor was charged to the crest less two diode drops
        at the last (negative) crest, T/4 ago, and has fed the constant power since:
        v^2 = V0^2 - 2 P (T/4) / C.
        """
        ckt = self.ckt
        if ckt.transformer:
            return np.array([self._transformer_reservoir_estimate()])
        if ckt.topology == "rectifier-smps":
            v0 = ckt.vpk - (2.0 if ckt.bridge else 1.0) * ckt.vf
            t_since = ckt.period / 4.0 if ckt.bridge else 0.75 * ckt.period
            vo = math.sqrt(max(v0 * v0 - 2.0 * ckt.p_conv * t_since / ckt.c_out, ckt.uvlo**2))
            return np.array([vo])
        if ckt.bridge:
            clamp, vo = ckt.vz + 2.0 * ckt.vf, ckt.vz
        else:
            clamp, vo = ckt.vz, ckt.vz - ckt.vf
        if ckt.has_c1:
            # while clamped, v_c1 follows v_s less the clamp, so the capacitor carries
            # C1 dv_s/dt = C1 w Vpk at t = 0, which also drops across the series resistance
            i0 = ckt.c1 * ckt.omega * ckt.vpk
            return np.array([-clamp - ckt.r_total * i0, vo])
        return np.array([vo])


# ----------------------------------------------------------------------------------------
# brute-force steady state
# ----------------------------------------------------------------------------------------
@dataclass
class ReferenceResult:
    """The reference's last cycle and its power quantities (consumer sign)."""

    t_s: np.ndarray  # sample times within the cycle [s]
    v_v: np.ndarray  # voltage at the supply's terminals [V]
    i_a: np.ndarray  # line current [A]
    v_o_v: np.ndarray  # reservoir / bulk voltage [V]
    p_w: float
    i_rms_a: float
    i_dc_a: float
    i_h_a: np.ndarray  # complex rms phasors, index = order, phase relative to V1
    delivered_w: float
    losses_w: dict[str, float] = field(default_factory=dict)
    source_resistance_w: float = 0.0
    cycles: int = 0
    cycle_change: float = math.inf  # max|i_N - i_N-1| / max|i_N| of the last two cycles
    rhs_calls: int = 0

    @property
    def i1_rms_a(self) -> float:
        return float(abs(self.i_h_a[1]))


def rms_phasors(x: np.ndarray) -> np.ndarray:
    """Rms phasors (cosine reference, t = 0 at the first sample) of one uniform period.

    numpy's rfft gives c_h = (n/2) A e^{j phi} for A cos(h w t + phi), hence the
    sqrt(2)/n scaling; index 0 is the mean (numpy.fft documentation conventions).
    """
    n = x.shape[-1]
    c = np.fft.rfft(x) / n
    out = np.sqrt(2.0) * c
    out[0] = c[0].real
    return out


def _sample_cycle(model: Model, sol, t0: float, n: int):
    ckt = model.ckt
    t = t0 + np.arange(n) * (ckt.period / n)
    y = sol.sol(t)
    vs = ckt.vpk * np.sin(ckt.omega * t)
    va = np.empty(n)
    for k in range(n):
        vc1, vo = model.unpack(y[:, k])
        va[k] = model.node_voltage(t[k], vc1, vo)
    if ckt.has_c1:
        vc1 = y[0]
        vo = y[1]
    else:
        vc1 = np.zeros(n)
        vo = y[0]
    i_s = (vs - vc1 - va) / ckt.r_total
    i_line = i_s + ckt.shunt_current(t)
    return t, vs, i_s, i_line, va, vc1, vo


def simulate_reference(
    design,
    state: str,
    *,
    samples: int = 4096,
    rtol: float = 1e-9,
    atol: float | None = None,
    max_step_fraction: float = 1.0 / 200.0,
    min_cycles: int = 3,
    max_cycles: int = 80,
    cycle_tol: float = 1e-5,
    load_a: float | None = None,
) -> ReferenceResult:
    """Integrate one (design, state) from t = 0 until periodic and analyse the last cycle.

    Cycles are integrated one at a time (``Radau``, ``rtol``/``atol``, ``max_step`` =
    ``max_step_fraction`` x period; ``atol`` defaults to 1e-9 of the source peak, in
    volts, for every state). Stops once the line current of two successive
    cycles differs by less than ``cycle_tol`` of its peak, and the geometric tail of the
    remaining change (estimated from the last two changes) is below it too.

    Raises
    ------
    RuntimeError
        If the integrator fails or the line current has not settled in ``max_cycles``.
    """
    ckt = circuit_from_design(design, state, load_a)
    model = Model(ckt)
    period = ckt.period
    if atol is None:
        atol = 1e-9 * ckt.vpk
    y = model.initial_state()
    model._va_guess = 0.0
    prev_i = None
    prev_change = math.inf
    change = math.inf
    cycles = 0
    sample = None
    for k in range(max_cycles):
        t0 = k * period
        sol = solve_ivp(
            model.rhs,
            (t0, t0 + period),
            y,
            method="Radau",
            jac=model.jac,
            rtol=rtol,
            atol=atol,
            max_step=max_step_fraction * period,
            dense_output=True,
        )
        if not sol.success:
            raise RuntimeError(f"Radau failed in cycle {k}: {sol.message}")
        cycles = k + 1
        sample = _sample_cycle(model, sol, t0, samples)
        i_line = sample[3]
        y = sol.y[:, -1]
        if prev_i is not None:
            change = float(np.max(np.abs(i_line - prev_i)) / np.max(np.abs(i_line)))
            ratio = change / prev_change if prev_change > 0 else 1.0
            tail = change * ratio / (1.0 - ratio) if ratio < 1.0 else math.inf
            if (
                cycles >= min_cycles
                and change < cycle_tol
                and (tail < cycle_tol or change < 1e-3 * cycle_tol)
            ):
                break
            prev_change = change
        prev_i = i_line
    else:
        raise RuntimeError(
            f"reference not periodic after {max_cycles} cycles (change {change:.2e})"
        )

    t, vs, i_s, i_line, va, vc1, vo = sample
    ih = rms_phasors(i_line)
    # the source is V sin(wt) = V cos(wt - pi/2): its phasor angle is -pi/2, and the
    # h-th harmonic is referred to h times it
    ih = ih * np.exp(1j * 0.5 * np.pi * np.arange(ih.shape[0]))

    losses: dict[str, float] = {}
    if ckt.transformer:
        losses["transformer windings"] = float(np.mean(ckt.r_series * i_s**2))
        losses["transformer core"] = float(np.mean(vs**2 / ckt.r_c))
    else:
        losses["series resistor"] = float(np.mean(ckt.r_series * i_s**2))
    p_src = float(np.mean(ckt.r_source * i_s**2))
    if ckt.topology == "rectifier-smps":
        losses["bleeder"] = float(np.mean(vs**2 / ckt.r_bleed))
    elif ckt.has_c1:
        losses["bleeder"] = float(np.mean(vc1**2 / ckt.r_bleed))
    p_rect = np.zeros(len(t))
    p_zener = np.zeros(len(t))
    for k in range(len(t)):
        _, _, _, diodes = rectifier_currents(ckt, va[k] / ckt.n_turns, vo[k])
        p_rect[k] = sum(v * i for v, i in diodes)
        if ckt.has_zener:
            vz_node = vo[k] if ckt.bridge else va[k]
            p_zener[k] = vz_node * zener_current(ckt, vz_node)[0]
    losses["rectifier"] = float(np.mean(p_rect))
    if ckt.topology == "rectifier-smps":
        i_conv = np.array([load_current(ckt, v) for v in vo])
        p_conv = float(np.mean(vo * i_conv))
        delivered = p_conv * ckt.p_out / ckt.p_conv if ckt.p_conv > 0 else 0.0
        losses["converter"] = p_conv - delivered
    else:
        if ckt.has_zener:
            losses["zener"] = float(np.mean(p_zener))
        v_reg = np.minimum(ckt.v_out, np.maximum(vo - ckt.v_dropout, 0.0))
        delivered = float(np.mean(v_reg * ckt.i_load))
        losses["regulator (pass element)"] = float(np.mean((vo - v_reg) * ckt.i_load))
        losses["regulator (quiescent)"] = float(np.mean(vo * ckt.i_q))

    # measured at the supply's terminals: the EMF less the drop across the mains' source
    # resistance, which carries the rectifier branch's current (Ohm's law; IEEE 1459-2010
    # defines P as the mean of v i at the point where v and i are measured)
    v_term = vs - ckt.r_source * i_s
    return ReferenceResult(
        t_s=t - t[0],
        v_v=v_term,
        i_a=i_line,
        v_o_v=vo,
        p_w=float(np.mean(v_term * i_line)),
        i_rms_a=float(np.sqrt(np.mean(i_line**2))),
        i_dc_a=float(np.mean(i_line)),
        i_h_a=ih,
        delivered_w=float(delivered),
        losses_w=losses,
        source_resistance_w=p_src,
        cycles=cycles,
        cycle_change=change,
        rhs_calls=model.rhs_calls,
    )


# ----------------------------------------------------------------------------------------
# the designs the acceptance tests and the benchmark use
# ----------------------------------------------------------------------------------------
def _dropper_output(**kw) -> dict:
    return {
        "voltage": "5 V",
        "regulator": "linear",
        "quiescent_current": "5 mA",
        "dropout": "2 V",
        **kw,
    }


DESIGN_TABLES: dict[str, dict] = {
    # the shipped example's circuit: 120 V / 60 Hz, 3.3 uF half-wave dropper
    "dropper-half-wave": {
        "name": "reference: 3.3 uF half-wave dropper",
        "topology": "capacitive-dropper",
        "mains": {"voltage": "120 V", "frequency": "60 Hz"},
        "parts": {
            "series_capacitance": "3.3 uF",
            "series_resistance": "22 ohm",
            "bleeder_resistance": "1 Mohm",
            "zener_voltage": "12 V",
            "rectifier": "half-wave",
            "reservoir_capacitance": "470 uF",
        },
        "output": _dropper_output(),
        "states": {"active": "20 mA", "idle": "2 mA"},
    },
    # 230 V / 50 Hz bridge dropper on a mains with some source resistance
    "dropper-bridge": {
        "name": "reference: 0.47 uF bridge dropper",
        "topology": "capacitive-dropper",
        "mains": {"voltage": "230 V", "frequency": "50 Hz", "source_resistance": "0.4 ohm"},
        "parts": {
            "series_capacitance": "0.47 uF",
            "series_resistance": "47 ohm",
            "bleeder_resistance": "470 kohm",
            "zener_voltage": "15 V",
            "rectifier": "bridge",
            "reservoir_capacitance": "220 uF",
        },
        "output": _dropper_output(quiescent_current="2 mA"),
        "states": {"active": "15 mA", "idle": "1 mA"},
    },
    # 230 V / 50 Hz half-wave resistive dropper (draws DC from the mains)
    "resistive-half-wave": {
        "name": "reference: 10 kohm half-wave resistive dropper",
        "topology": "resistive-dropper",
        "mains": {"voltage": "230 V", "frequency": "50 Hz"},
        "parts": {
            "dropper_resistance": "10 kohm",
            "series_resistance": "10 ohm",
            "zener_voltage": "12 V",
            "rectifier": "half-wave",
            "reservoir_capacitance": "220 uF",
        },
        "output": _dropper_output(quiescent_current="1 mA"),
        "states": {"active": "5 mA"},
    },
    # 230 V / 50 Hz bridge + bulk capacitor + switch-mode converter
    "smps-bridge": {
        "name": "reference: 5 W switch-mode supply",
        "topology": "rectifier-smps",
        "mains": {"voltage": "230 V", "frequency": "50 Hz"},
        "parts": {
            "x_capacitance": "100 nF",
            "bleeder_resistance": "1 Mohm",
            "series_resistance": "10 ohm",
            "bulk_capacitance": "10 uF",
            "rectifier": "bridge",
        },
        "output": {
            "voltage": "5 V",
            "rated_power": "5 W",
            "no_load_input_power": "0.08 W",
            "efficiency": [[0.25, 0.72], [0.5, 0.78], [0.75, 0.80], [1.0, 0.80]],
            "undervoltage_lockout": "80 V",
        },
        "states": {"active": "3 W", "idle": "0.3 W"},
    },
}


def example_table(name: str) -> dict:
    """The parsed table of a bundled example file (``examples/<name>.toml``)."""
    import tomllib

    from fleetpower._resources import examples_dir

    return tomllib.loads((examples_dir() / f"{name}.toml").read_text(encoding="utf-8"))


#: the shipped 230 V / 50 Hz, 1.5 VA transformer example (bridge), and a half-wave variant
#: of it (which draws a DC current from the mains through the ideal transformer)
TRANSFORMER_EXAMPLE = "desk-sensor-transformer-230"


def _transformer_table(key: str) -> dict:
    table = example_table(TRANSFORMER_EXAMPLE)
    if key == "transformer-half-wave":
        table["name"] = "reference: 1.5 VA transformer, half-wave"
        table["parts"]["rectifier"] = "half-wave"
        table["states"] = {"active": table["states"]["active"]}
        table.pop("standby_state", None)  # its one state is not a standby
    return table


TRANSFORMER_KEYS = ("transformer-bridge", "transformer-half-wave")


#: every (circuit, state) the engine is checked against here: the reference tests
#: (tests/test_engine_reference.py) and the accuracy-per-cost measurement
#: (benchmarks/bench_accuracy.py) use this one list, so the accuracy setting is chosen on
#: exactly the circuits the tests hold the engine to
REFERENCE_CASES = [
    ("dropper-half-wave", "active"),
    ("dropper-half-wave", "idle"),
    ("dropper-bridge", "active"),
    ("dropper-bridge", "idle"),
    ("resistive-half-wave", "active"),
    ("smps-bridge", "active"),
    ("smps-bridge", "idle"),
    ("transformer-bridge", "active"),
    ("transformer-bridge", "idle"),
    ("transformer-half-wave", "active"),
]


def design(key: str):
    """A validated :class:`fleetpower.io.design_file.Design` of :data:`DESIGN_TABLES` (or of
    :data:`TRANSFORMER_KEYS`, built from the bundled transformer example)."""
    from fleetpower.io.design_file import design_from_dict

    table = _transformer_table(key) if key in TRANSFORMER_KEYS else DESIGN_TABLES[key]
    return design_from_dict(table, file=f"<reference {key}>")
