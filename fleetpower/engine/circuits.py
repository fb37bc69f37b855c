"""Circuit equations of the supported topologies, as one compiled residual function.

All topologies share one four-unknown layout so the solver is written once:

====  ==========  ===========================================  ======================
row   unknown     equation                                      mass (coefficient of d/dt)
====  ==========  ===========================================  ======================
0     v_c1 [V]    series capacitor: C1 dv/dt = i_s - v/R_b       C1 (0 if no capacitor)
1     v_o [V]     reservoir / bulk: C_o dv/dt = i_dc - i_load    C_o
2     v_a [V]     rectifier input node, KCL (algebraic)          0
3     i_s [A]     series branch: L di/dt = v_s - R i - v_c1 - v_a  L_src (0 = algebraic)
====  ==========  ===========================================  ======================

Rows with zero mass are algebraic: the integrator enforces them at every time point.
Where a topology has no series capacitor, row 0 reads ``v_c1 = 0``.

Topologies
----------
capacitive-dropper, half-wave
    mains -> R_series -> C1 (bleeder R_b across it) -> node a; zener from a to neutral
    (breakdown when a is positive, forward when negative); diode a -> reservoir C_o;
    linear regulator drawing ``i_load + i_q`` from C_o while in regulation (below its
    dropout headroom the load is taken as the resistance V_out/I_load, so an overloaded
    supply settles at a collapsed output instead of having no steady state).
capacitive-dropper, bridge
    mains -> R_series -> C1 || R_b -> bridge input (a, neutral); bridge output on C_o with
    the zener across C_o; regulator as above.
resistive-dropper
    as the capacitive dropper with C1 replaced by a short (R_series includes the dropper).
rectifier-smps
    X capacitor C_x and its bleeder across the mains (their currents are computed from
    the source voltage); R_series -> rectifier -> bulk C_o; the converter draws a power
    ``p_conv`` from C_o above its undervoltage lockout.

mains-transformer
    a 50/60 Hz transformer in its approximate equivalent circuit referred to the primary:
    the magnetizing inductance L_m and core-loss resistance R_c on the source EMF (their
    currents computed from it), then the winding resistance (primary plus secondary
    referred, R_series) and leakage inductance (L_src row) in series, and an ideal n:1
    transformer: the rectifier sees v_a / n and reflects its current as i / n. No
    saturation, no zener; a linear regulator after the reservoir.

Owns: the residual, its Jacobian, the mass vector and the probes of every circuit
family. The parameter, state and probe indices live in :mod:`fleetpower.engine.layout`
(never literal positions here); the residual keeps one integer branch on the engine
row's topology code. May import only :mod:`fleetpower.engine`; knows nothing of design
files, topology modules, limits or reports.

Conventions: consumer sign (current into the supply positive), source voltage
``v_s = V_pk sin(omega t)``, node voltages to neutral.

Departure: the source impedance (``R_src``, ``L_src``) is placed in series with the
rectifier branch only; the X capacitor and its bleeder see the source EMF. Their
current (tens of mA) through a sub-ohm source impedance changes the terminal voltage
by less than 1e-4 of the mains, while making the X capacitor a state would add a time
constant of nanoseconds that a mains-cycle integrator should not have to resolve.

Measurement point: the probe ``v_terminal_v`` is the voltage at the supply's terminals,
``v_s - R_src i_s - L_mains di_s/dt`` (the EMF less the drop across the mains' own
impedance; a transformer's leakage, also in the ``L_src`` row, is inside the supply), and
``i_line_a`` is the current into the supply, shunt branches included. Power quality is
computed from these two, so P is what the supply draws at its terminals; the loss in the
source resistance (``p_source_resistance_w``) is the mains', reported beside it. By the
departure above the shunt branches' current does not pass the source impedance, so
``mean(v_terminal i_line)`` and the supply's own books differ by the mean of that drop
times the shunt current, of order R_src I_s I_shunt (a few 1e-4 W for a 0.4 ohm source).
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit

from .devices import diode_iv, softplus_sigmoid, zener_breakdown_iv
from .layout import (
    CAPACITIVE_DROPPER,
    HALF_WAVE,
    MAINS_TRANSFORMER,
    N_STATES,
    P_C1,
    P_CO,
    P_CX,
    P_D_IS,
    P_D_NVT,
    P_ETA,
    P_ILOAD,
    P_IQ,
    P_LM,
    P_LMAINS,
    P_LSRC,
    P_NTURNS,
    P_OMEGA,
    P_PCONV,
    P_RB,
    P_RC,
    P_RECT,
    P_RSER,
    P_RSRC,
    P_TOPO,
    P_UVLO,
    P_VDO,
    P_VOUT,
    P_VPK,
    P_Z_RZ,
    P_Z_S,
    P_Z_VK,
    P_ZF_IS,
    P_ZF_NVT,
    PR_I_LINE,
    PR_I_ZENER,
    PR_P_BLEEDER,
    PR_P_CONVERTER,
    PR_P_CORE,
    PR_P_DELIVERED,
    PR_P_RECTIFIER,
    PR_P_REG_PASS,
    PR_P_REG_QUIESCENT,
    PR_P_SERIES,
    PR_P_SOURCE_R,
    PR_P_STORE_C1,
    PR_P_STORE_CX,
    PR_P_STORE_L,
    PR_P_STORE_LM,
    PR_P_STORE_RESERVOIR,
    PR_P_ZENER,
    PR_V_C1,
    PR_V_O,
    PR_V_OUT,
    PR_V_SOURCE,
    PR_V_TERMINAL,
    RECTIFIER_SMPS,
    RESISTIVE_DROPPER,
    S_IS,
    S_VA,
    S_VC1,
    S_VO,
)

#: regulator turn-on width at zero input voltage [V] (keeps the sink passive near 0 V)
REG_SOFT_V = 0.1
#: relative knee width of the regulator's dropout transition
REG_KNEE = 0.005


@njit(cache=True)
def mass_vector(p, m):
    """Fill ``m`` with the coefficients of d/dt of each row."""
    topo = int(p[P_TOPO])
    m[S_VC1] = p[P_C1] if topo == CAPACITIVE_DROPPER else 0.0
    m[S_VO] = p[P_CO]
    m[S_VA] = 0.0
    m[S_IS] = p[P_LSRC]


@njit(cache=True, inline="always")
def _load_iv(vo, p):
    """Current [A] drawn from the reservoir by the regulator or the converter, and its
    conductance d i / d v_o [S]."""
    if int(p[P_TOPO]) == RECTIFIER_SMPS:
        uvlo = p[P_UVLO]
        width = 0.02 * uvlo + 0.5
        th = math.tanh((vo - uvlo) / width)
        gate = 0.5 * (1.0 + th)
        dgate = 0.5 * (1.0 - th * th) / width
        den = vo * vo + 1.0
        i = p[P_PCONV] * gate * vo / den
        return i, p[P_PCONV] * (dgate * vo / den + gate * (1.0 - vo * vo) / (den * den))
    share, dshare = _regulator_share_and_slope(vo, p)
    th = math.tanh(vo / REG_SOFT_V)
    i = p[P_ILOAD] * share + p[P_IQ] * th
    return i, p[P_ILOAD] * dshare + p[P_IQ] * (1.0 - th * th) / REG_SOFT_V


@njit(cache=True, inline="always")
def _regulator_share_and_slope(vo, p):
    """:func:`regulator_share` and its derivative d share / d v_o [1/V]."""
    u = (vo - p[P_VDO]) / p[P_VOUT]
    s = REG_KNEE
    sp1, sg1 = softplus_sigmoid(u / s)
    sp2, sg2 = softplus_sigmoid((u - 1.0) / s)
    return s * (sp1 - sp2), (sg1 - sg2) / p[P_VOUT]


@njit(cache=True, inline="always")
def regulator_share(vo, p):
    """Fraction of the set output voltage (and so of the load current) the regulator holds.

    A smooth ``clip((v_o - dropout) / V_out, 0, 1)``: 1 in regulation; below the dropout
    headroom the output follows the input less the dropout and the load, taken as the
    resistance V_out / I_load, draws proportionally less. Knee width 0.5 % of V_out.
    """
    return _regulator_share_and_slope(vo, p)[0]


@njit(cache=True, inline="always")
def _zener_iv(v, p):
    """Current [A] into a zener whose cathode is at ``v`` [V] against its anode, and its
    conductance [S]."""
    ib, gb = zener_breakdown_iv(v, p[P_Z_VK], p[P_Z_S], p[P_Z_RZ])
    i_f, g_f = diode_iv(-v, p[P_ZF_IS], p[P_ZF_NVT])
    return ib - i_f, gb + g_f


@njit(cache=True)
def evaluate(x, t, p, f, jac):
    """Right-hand sides ``f`` of all rows at state ``x``, time ``t`` [s], and their
    analytic Jacobian d f / d x into ``jac`` (4 x 4), at once: a device's current and
    conductance share one exponential (the solver needs both at every Newton iteration).
    """
    topo = int(p[P_TOPO])
    rect = int(p[P_RECT])
    vc1 = x[S_VC1]
    vo = x[S_VO]
    va = x[S_VA]
    i_s = x[S_IS]
    vs = p[P_VPK] * math.sin(p[P_OMEGA] * t)
    for i in range(N_STATES):
        for j in range(N_STATES):
            jac[i, j] = 0.0

    if topo == CAPACITIVE_DROPPER:
        f[S_VC1] = i_s - vc1 / p[P_RB]
        jac[S_VC1, S_VC1] = -1.0 / p[P_RB]
        jac[S_VC1, S_IS] = 1.0
    else:
        f[S_VC1] = -vc1
        jac[S_VC1, S_VC1] = -1.0
    i_load, g_load = _load_iv(vo, p)
    n = p[P_NTURNS]
    vr = va / n  # rectifier input voltage (the secondary's, for a transformer)
    zener = topo == CAPACITIVE_DROPPER or topo == RESISTIVE_DROPPER
    jac[S_VA, S_IS] = 1.0
    if rect == HALF_WAVE:
        i_d, gd = diode_iv(vr - vo, p[P_D_IS], p[P_D_NVT])
        f[S_VO] = i_d - i_load
        f[S_VA] = i_s - i_d / n
        jac[S_VO, S_VA] = gd / n
        jac[S_VO, S_VO] = -gd - g_load
        jac[S_VA, S_VO] = gd / n
        jac[S_VA, S_VA] = -gd / (n * n)
        if zener:
            iz, gz = _zener_iv(va, p)
            f[S_VA] -= iz
            jac[S_VA, S_VA] -= gz
    else:
        i1, g1 = diode_iv(0.5 * (vr - vo), p[P_D_IS], p[P_D_NVT])
        i2, g2 = diode_iv(0.5 * (-vr - vo), p[P_D_IS], p[P_D_NVT])
        g1 *= 0.5
        g2 *= 0.5
        f[S_VO] = i1 + i2 - i_load
        f[S_VA] = i_s - (i1 - i2) / n
        jac[S_VO, S_VA] = (g1 - g2) / n
        jac[S_VO, S_VO] = -g1 - g2 - g_load
        jac[S_VA, S_VA] = -(g1 + g2) / (n * n)
        jac[S_VA, S_VO] = (g1 - g2) / n
        if zener:
            iz, gz = _zener_iv(vo, p)
            f[S_VO] -= iz
            jac[S_VO, S_VO] -= gz
    f[S_IS] = vs - (p[P_RSER] + p[P_RSRC]) * i_s - vc1 - va
    jac[S_IS, S_IS] = -(p[P_RSER] + p[P_RSRC])
    jac[S_IS, S_VC1] = -1.0
    jac[S_IS, S_VA] = -1.0


@njit(cache=True)
def residual(x, t, p, f):
    """Right-hand sides ``f`` of all rows at state ``x``, time ``t`` [s] (:func:`evaluate`)."""
    evaluate(x, t, p, f, np.empty((N_STATES, N_STATES)))


@njit(cache=True)
def jacobian(x, t, p, jac):
    """Analytic Jacobian d f / d x of :func:`residual` into ``jac`` (4 x 4)."""
    evaluate(x, t, p, np.empty(N_STATES), jac)


@njit(cache=True)
def probes(x, t, p, out, k):
    """Record the instantaneous quantities named in :data:`PROBES` at sample ``k`` of
    ``out`` (N_PROBES, n): ``out[j, k]`` is probe j. Probes a circuit family does not
    have are left as they are (the caller zeroes ``out`` once per cycle)."""
    topo = int(p[P_TOPO])
    rect = int(p[P_RECT])
    vc1 = x[S_VC1]
    vo = x[S_VO]
    va = x[S_VA]
    i_s = x[S_IS]
    w = p[P_OMEGA]
    vs = p[P_VPK] * math.sin(w * t)

    i_line = i_s
    if topo == RECTIFIER_SMPS:
        i_x = p[P_CX] * p[P_VPK] * w * math.cos(w * t)
        i_bl = vs / p[P_RB]
        i_line = i_s + i_x + i_bl
        out[PR_P_BLEEDER, k] = vs * i_bl
        out[PR_P_STORE_CX, k] = vs * i_x
    elif topo == MAINS_TRANSFORMER:
        i_m = -p[P_VPK] / (w * p[P_LM]) * math.cos(w * t)
        i_c = vs / p[P_RC]
        i_line = i_s + i_m + i_c
        out[PR_P_CORE, k] = vs * i_c
        out[PR_P_STORE_LM, k] = vs * i_m
    elif topo == CAPACITIVE_DROPPER:
        out[PR_P_BLEEDER, k] = vc1 * vc1 / p[P_RB]
        out[PR_P_STORE_C1, k] = vc1 * (i_s - vc1 / p[P_RB])
    out[PR_I_LINE, k] = i_line
    out[PR_V_SOURCE, k] = vs
    # the series row's L di/dt (the residual's f[S_IS]; zero when L_src = 0)
    l_di_dt = vs - (p[P_RSER] + p[P_RSRC]) * i_s - vc1 - va
    # the supply's terminals: the source EMF less the drop across the mains' own source
    # impedance (R_src, and the mains' share of the series inductance, whose voltage is
    # that share of the row's L di/dt; the rest is leakage inside the supply)
    v_term = vs - p[P_RSRC] * i_s
    if p[P_LSRC] > 0.0:
        v_term -= p[P_LMAINS] / p[P_LSRC] * l_di_dt
    out[PR_V_TERMINAL, k] = v_term
    out[PR_P_SERIES, k] = p[P_RSER] * i_s * i_s
    out[PR_P_SOURCE_R, k] = p[P_RSRC] * i_s * i_s
    out[PR_P_STORE_L, k] = l_di_dt * i_s if p[P_LSRC] > 0.0 else 0.0

    if topo == RECTIFIER_SMPS:
        i_load = _load_iv(vo, p)[0]
    else:  # as _load_iv, with the share and the soft turn-on kept for the losses below
        share = regulator_share(vo, p)
        soft_on = math.tanh(vo / REG_SOFT_V)
        i_load = p[P_ILOAD] * share + p[P_IQ] * soft_on
    n = p[P_NTURNS]
    vr = va / n
    zener = topo == CAPACITIVE_DROPPER or topo == RESISTIVE_DROPPER
    if rect == HALF_WAVE:
        i_d = diode_iv(vr - vo, p[P_D_IS], p[P_D_NVT])[0]
        i_reservoir = i_d - i_load
        out[PR_P_RECTIFIER, k] = (vr - vo) * i_d
        if zener:
            iz = _zener_iv(va, p)[0]
            out[PR_P_ZENER, k] = va * iz
            out[PR_I_ZENER, k] = iz
    else:
        i1 = diode_iv(0.5 * (vr - vo), p[P_D_IS], p[P_D_NVT])[0]
        i2 = diode_iv(0.5 * (-vr - vo), p[P_D_IS], p[P_D_NVT])[0]
        i_reservoir = i1 + i2 - i_load
        out[PR_P_RECTIFIER, k] = (vr - vo) * i1 + (-vr - vo) * i2
        if zener:
            iz = _zener_iv(vo, p)[0]
            i_reservoir -= iz
            out[PR_P_ZENER, k] = vo * iz
            out[PR_I_ZENER, k] = iz
    out[PR_P_STORE_RESERVOIR, k] = vo * i_reservoir  # v_o C_o dv_o/dt

    p_load = vo * i_load
    if topo == RECTIFIER_SMPS:
        out[PR_P_DELIVERED, k] = p[P_ETA] * p_load
        out[PR_P_CONVERTER, k] = p_load - out[PR_P_DELIVERED, k]
        out[PR_V_OUT, k] = vo
    else:
        v_out = p[P_VOUT] * share
        out[PR_P_DELIVERED, k] = v_out * p[P_ILOAD] * share
        out[PR_P_REG_QUIESCENT, k] = vo * p[P_IQ] * soft_on
        out[PR_P_REG_PASS, k] = p_load - out[PR_P_DELIVERED, k] - out[PR_P_REG_QUIESCENT, k]
        out[PR_V_OUT, k] = v_out
    out[PR_V_C1, k] = vc1
    out[PR_V_O, k] = vo
