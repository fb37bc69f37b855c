"""Capacitance loss of the series / X film capacitor in service, and what it costs a dropper.

Metallized-film capacitors across the line lose capacitance over years: every
self-healing clearing (after a surge, or where humidity has corroded the thin
metallization) removes a little electrode area. In a capacitive dropper the series
capacitor sets the current the supply can deliver, so the loss ends as a brown-out.

Model
-----
Loss linear in time, at a rate optionally accelerated by the voltage stress:

.. math:: C(y) = C_0 \\max(0,\\ 1 - r\\,y), \\qquad
          r = r_{ref} \\left(\\frac{V / V_R}{\\rho_{ref}}\\right)^{n}

with :math:`V` the applied rms voltage, :math:`V_R` the capacitor's ac rating,
:math:`\\rho_{ref}` the stress ratio at which :math:`r_{ref}` is stated and :math:`n` the
voltage-acceleration exponent. Without a rating the rate is :math:`r_{ref}` as stated.
"""

from __future__ import annotations

import numpy as np

#: capacitance loss per year of service of a metallized-film X2 / dropper capacitor at the
#: reference stress [fraction / year]. From memory, not checked against a published source:
#: the order of magnitude of reported field losses of X2 capacitors in continuous
#: across-the-line service indoors (a few percent over the first years); humid or
#: surge-prone sites are reported several times faster. Declare your own figure where
#: a supplier's life-test data exist.
DEFAULT_LOSS_PER_YEAR = 0.01
#: stress ratio applied / rated ac voltage at which DEFAULT_LOSS_PER_YEAR is stated:
#: 230 V on a 275 V ac X2 capacitor, the usual choice (common practice, no source)
REFERENCE_STRESS_RATIO = 230.0 / 275.0
#: exponent of the voltage-life power law of polypropylene film capacitors, life
#: proportional to (V_R / V)^n; from memory: exponents of 7 to 9 are quoted in makers'
#: application notes; the loss rate is taken as inversely proportional to life
DEFAULT_VOLTAGE_EXPONENT = 7.0


def loss_rate_per_year(
    loss_per_year: float = DEFAULT_LOSS_PER_YEAR,
    v_applied_v: float | None = None,
    v_rated_v: float | None = None,
    exponent: float = DEFAULT_VOLTAGE_EXPONENT,
    reference_ratio: float = REFERENCE_STRESS_RATIO,
) -> float:
    """Capacitance loss rate [1/year], accelerated by voltage stress when a rating is given.

    Parameters
    ----------
    loss_per_year : float
        Rate at the reference stress [1/year].
    v_applied_v : float, optional
        Applied rms voltage [V].
    v_rated_v : float, optional
        The capacitor's ac voltage rating [V]; with ``v_applied_v`` it switches on the
        acceleration.
    exponent : float
        Voltage-life power-law exponent [-].
    reference_ratio : float
        Stress ratio at which ``loss_per_year`` is stated [-].

    Returns
    -------
    float
        :math:`r = r_{ref} ((V/V_R)/\\rho_{ref})^n` [1/year].

    Notes
    -----
    The inverse power law of dielectric life under voltage stress,
    :math:`L \\propto V^{-n}`, gives a wear rate :math:`\\propto V^{n}`; the rate is
    normalised to the stated reference stress so that a design at the usual derating
    sees exactly the stated rate.

    References
    ----------
    .. [1] IEC 60384-14:2013, fixed capacitors for electromagnetic interference
       suppression and connection to the supply mains (the damp-heat and endurance
       tests a rating rests on); the exponent itself is from memory.
    """
    if loss_per_year < 0:
        raise ValueError("a capacitance loss rate cannot be negative")
    if v_applied_v is None or v_rated_v is None:
        return float(loss_per_year)
    ratio = (v_applied_v / v_rated_v) / reference_ratio
    return float(loss_per_year * ratio**exponent)


def capacitance_at_year_f(c0_f, years, rate_per_year: float = DEFAULT_LOSS_PER_YEAR):
    """Capacitance [F] after ``years`` of service.

    Parameters
    ----------
    c0_f : float or array_like
        Capacitance when new [F].
    years : float or array_like
        Years in service [year] (broadcast against ``c0_f``).
    rate_per_year : float
        Loss rate [1/year] (see :func:`loss_rate_per_year`).

    Returns
    -------
    numpy.ndarray or float
        :math:`C_0 \\max(0, 1 - r y)` [F].
    """
    years = np.asarray(years, dtype=float)
    if np.any(years < 0):
        raise ValueError("years in service cannot be negative")
    out = np.asarray(c0_f, dtype=float) * np.maximum(0.0, 1.0 - rate_per_year * years)
    return float(out) if out.ndim == 0 else out


def charge_pump_current_a(f_hz, c_f, v_pk_v, v_z_v, v_f_v):
    """Largest mean current [A] a half-wave capacitive dropper pumps into its clamp.

    Parameters
    ----------
    f_hz : float or array_like
        Mains frequency [Hz].
    c_f : float or array_like
        Series capacitance [F].
    v_pk_v : float or array_like
        Mains peak voltage [V].
    v_z_v : float or array_like
        Voltage the node is held at while current flows forward (the zener voltage) [V].
    v_f_v : float or array_like
        Forward drop of the clamp on the return half-cycle [V].

    Returns
    -------
    numpy.ndarray or float
        :math:`I = f C (2 V_{pk} - V_Z - V_F)` [A], zero where negative.

    Notes
    -----
    Circuit: the mains :math:`v_s = V_{pk}\\sin\\omega t` drives the series capacitor
    :math:`C` into node *a*; a zener from *a* to neutral breaks down at :math:`+V_Z` and
    conducts forward at :math:`-V_F`; a diode from *a* charges the reservoir.

    Assumptions: (i) ideal clamps, so while current flows forward the node sits at
    exactly :math:`+V_Z` and while it flows back at exactly :math:`-V_F`; (ii) the series
    resistance is negligible (:math:`\\omega C R_s \\ll 1`) and the bleeder across
    :math:`C` draws nothing (:math:`\\omega C R_b \\gg 1`); (iii) a sinusoidal,
    undistorted source; (iv) periodic steady state.

    With :math:`v_C = v_s - v_a`, follow one cycle from the negative peak, where the
    node is clamped at :math:`-V_F` and :math:`v_C = -(V_{pk} - V_F)`. As :math:`v_s`
    rises the current :math:`C\\,dv_C/dt` would flow forward, but the node first floats up
    (no current, :math:`v_C` constant) from :math:`-V_F` to :math:`+V_Z`, i.e. while
    :math:`v_s` rises by :math:`V_Z + V_F`. From then on the node is clamped at
    :math:`+V_Z` and forward current flows until the positive peak, where
    :math:`v_C = V_{pk} - V_Z`. After the peak the current would reverse, so the node
    floats down (from :math:`v_s = V_{pk}` to :math:`V_{pk} - V_Z - V_F`) to the reverse
    clamp, which then carries the return current to the negative peak, restoring
    :math:`v_C = -(V_{pk} - V_F)`. The charge moved forward per cycle is the capacitor's
    swing,

    .. math:: Q = C\\,[(V_{pk} - V_Z) - (-(V_{pk} - V_F))] = C (2 V_{pk} - V_Z - V_F),

    and the same charge returns through the reverse clamp (the capacitor's mean current
    is zero in steady state). The mean forward current is :math:`I = f Q`. It is shared
    between the zener and the load path; the load can take all of it only when the zener
    draws nothing, so :math:`f C (2V_{pk} - V_Z - V_F)` is the deliverable limit. It is
    linear in :math:`C`: a capacitance loss of x % costs x % of deliverable current.
    Series resistance, the bleeder and reservoir ripple lower the real figure.

    References
    ----------
    .. [1] Microchip Technology, AN954 "Transformerless Power Supplies: Resistive and
       Capacitive" (2004), the capacitive dropper's charge per half-cycle (from memory).
    """
    swing = np.maximum(2.0 * np.asarray(v_pk_v, float) - v_z_v - v_f_v, 0.0)
    out = np.asarray(f_hz, float) * np.asarray(c_f, float) * swing
    return float(out) if out.ndim == 0 else out
