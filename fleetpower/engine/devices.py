"""Smooth semiconductor models, as scalar functions the compiled engine calls.

Every model is continuous with a continuous first derivative, so the Newton iterations
of the implicit integrator converge; each is fitted to the figures a datasheet gives.

Notes
-----
Rectifier diode (Shockley):

.. math:: i_D(v) = I_S\\,(e^{v / n V_T} - 1)

with :math:`V_T = kT/q` at 25 °C and emission coefficient :math:`n = 1.8`, typical of
silicon rectifiers of the 1N400x kind (from memory). :math:`I_S` is chosen so the diode
drops ``vf_v`` at ``if_a`` (by default 0.7 V at 20 mA, "about 0.7 V at tens of mA",
common practice, no source). The dynamic resistance follows as :math:`n V_T / i`. Above
100 A the exponential is continued by its tangent, a guard for Newton iterates only
(SPICE does the same, Nagel 1975); no converged solution reaches it.

Zener breakdown (reverse direction), a softplus knee with an ohmic tail:

.. math:: i_Z(v) = \\frac{s}{r_Z}\\,\\ln\\!\\left(1 + e^{(v - V_K)/s}\\right)

Far above the knee :math:`di_Z/dv \\to 1/r_Z` (the datasheet's dynamic resistance); the
knee width is :math:`s = I_{ZT} r_Z / 5` and :math:`V_K` is set so that
:math:`i_Z(V_Z) = I_{ZT}` exactly, i.e. ``zener_voltage`` means what a datasheet means:
the breakdown voltage at the test current. At :math:`I_{ZT}` the slope is
:math:`\\sigma(5)/r_Z = 0.993/r_Z`. The zener's forward direction is a rectifier diode.

References
----------
.. [1] W. Shockley, "The theory of p-n junctions in semiconductors and p-n junction
   transistors", Bell System Technical Journal 28 (1949) 435-489.
.. [2] L. W. Nagel, "SPICE2: A computer program to simulate semiconductor circuits",
   Memo ERL-M520, UC Berkeley, 1975 (junction-voltage limiting).
"""

from __future__ import annotations

import math

from numba import njit

#: Boltzmann constant over electron charge [V/K]
K_OVER_Q_V_PER_K = 8.617333262e-5
#: Junction temperature the models are fitted at [K]
T_REF_K = 298.15
#: Thermal voltage at T_REF_K [V]
VT_V = K_OVER_Q_V_PER_K * T_REF_K
#: Emission coefficient of a silicon rectifier (from memory)
N_RECTIFIER = 1.8
#: Current above which the exponential is continued linearly (Newton guard) [A]
I_GUARD_A = 100.0
#: Knee width of the zener model as a fraction of I_ZT * r_Z
ZENER_KNEE_DIVISOR = 5.0


def diode_saturation_current_a(vf_v: float, if_a: float, n: float = N_RECTIFIER) -> float:
    """Saturation current [A] that makes a Shockley diode drop ``vf_v`` [V] at ``if_a`` [A]."""
    return if_a / math.expm1(vf_v / (n * VT_V))


def zener_knee(vz_v: float, izt_a: float, rz_ohm: float) -> tuple[float, float]:
    """Knee voltage ``vk_v`` [V] and width ``s_v`` [V] of the softplus zener model.

    Chosen so that the breakdown current at ``vz_v`` equals ``izt_a`` exactly.
    """
    s_v = izt_a * rz_ohm / ZENER_KNEE_DIVISOR
    u0 = math.log(math.expm1(ZENER_KNEE_DIVISOR))
    return vz_v - s_v * u0, s_v


@njit(cache=True, inline="always")
def diode_iv(v_v, is_a, nvt_v):
    """Shockley diode current [A] and conductance d i_D / d v [S] at junction voltage
    ``v_v`` [V], tangent-continued above :data:`I_GUARD_A`, from one exponential.

    ``e - 1`` stands for ``expm1(u)`` where it is exact to a couple of ulp (|u| > 0.7:
    ``e`` >= 2 or <= 0.5); nearer zero ``expm1`` is taken.
    """
    u = v_v / nvt_v
    e = math.exp(u)
    if is_a * e > I_GUARD_A:  # beyond the guard (an overflowed exponential included)
        u_max = math.log(I_GUARD_A / is_a)
        e_max = math.exp(u_max)
        return is_a * (e_max * (1.0 + u - u_max) - 1.0), is_a * e_max / nvt_v
    em1 = e - 1.0 if abs(u) > 0.7 else math.expm1(u)
    return is_a * em1, is_a * e / nvt_v


@njit(cache=True, inline="always")
def diode_current_a(v_v, is_a, nvt_v):
    """Shockley diode current [A] at junction voltage ``v_v`` [V] (:func:`diode_iv`)."""
    return diode_iv(v_v, is_a, nvt_v)[0]


@njit(cache=True, inline="always")
def diode_conductance_s(v_v, is_a, nvt_v):
    """d i_D / d v [S] of :func:`diode_current_a`."""
    return diode_iv(v_v, is_a, nvt_v)[1]


#: beyond this |u| the softplus and its slope take their limits exactly in double
#: precision (e^-|u| < 8.6e-17: ln(1 + e) rounds to e, u + e to u, 1 + e to 1)
SOFTPLUS_EXACT_LIMIT = 37.0


@njit(cache=True, inline="always")
def softplus_sigmoid(u):
    """ln(1 + e^u) and its derivative 1 / (1 + e^-u), without overflow, from one
    exponential (none far above the knee, where both are their limits u and 1 to the bit:
    a regulator in regulation, a zener well in breakdown)."""
    if u > SOFTPLUS_EXACT_LIMIT:
        return u, 1.0
    if u > 0.0:
        e = math.exp(-u)
        return u + math.log1p(e), 1.0 / (1.0 + e)
    e = math.exp(u)
    if u < -SOFTPLUS_EXACT_LIMIT:
        return e, e
    return math.log1p(e), e / (1.0 + e)


@njit(cache=True, inline="always")
def softplus(u):
    """ln(1 + e^u) without overflow."""
    return softplus_sigmoid(u)[0]


@njit(cache=True, inline="always")
def sigmoid(u):
    """d softplus / du = 1 / (1 + e^-u) without overflow."""
    return softplus_sigmoid(u)[1]


@njit(cache=True, inline="always")
def zener_breakdown_iv(v_v, vk_v, s_v, rz_ohm):
    """Reverse (breakdown) current [A] of a zener reverse-biased by ``v_v`` [V] (> 0) and
    its conductance d i_Z / d v [S], from one exponential."""
    sp, sg = softplus_sigmoid((v_v - vk_v) / s_v)
    return s_v / rz_ohm * sp, sg / rz_ohm


@njit(cache=True, inline="always")
def zener_breakdown_current_a(v_v, vk_v, s_v, rz_ohm):
    """Reverse (breakdown) current [A] of a zener reverse-biased by ``v_v`` [V] (> 0)."""
    return zener_breakdown_iv(v_v, vk_v, s_v, rz_ohm)[0]


@njit(cache=True, inline="always")
def zener_breakdown_conductance_s(v_v, vk_v, s_v, rz_ohm):
    """d i_Z / d v [S] of :func:`zener_breakdown_current_a`."""
    return zener_breakdown_iv(v_v, vk_v, s_v, rz_ohm)[1]
