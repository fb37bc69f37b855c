"""Power-quality quantities of a periodic voltage/current pair (IEEE 1459), by FFT.

Conventions (stated once for the whole project, see DEVELOPERS.md):

- consumer sign: current into the supply is positive, so P > 0 is drawn from the mains;
- voltages are line-to-neutral;
- phasors are complex rms values with a cosine reference,
  :math:`x(t) = \\sum_h \\sqrt{2}\\,|X_h| \\cos(h\\omega t + \\arg X_h)`;
- harmonic phase angles are reported relative to the voltage fundamental:
  ``phase_deg[h] = arg I_h - h * arg V_1`` (so a leading fundamental current has a
  positive phase);
- Q1 follows IEEE 1459: :math:`Q_1 = V_1 I_1 \\sin(\\theta_{V1} - \\theta_{I1})`,
  negative for a capacitive (leading) load.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

#: highest harmonic order reported and used for THD (IEC 61000-3-2 / IEEE 519 go to 40 / 50)
H_MAX = 50


def phasors(x: np.ndarray) -> np.ndarray:
    """Complex rms phasors of every harmonic of samples spanning whole periods.

    Parameters
    ----------
    x : ndarray, shape (..., n)
        Uniform samples over exactly one period (the last axis).

    Returns
    -------
    ndarray of complex, shape (..., n // 2 + 1)
        Index h is the h-th harmonic's rms phasor (cosine reference); index 0 is the
        DC value (real).

    Notes
    -----
    With :math:`c_h = \\sum_k x_k e^{-j 2\\pi h k / n}` (numpy's ``rfft``), a cosine of
    amplitude :math:`A` and phase :math:`\\varphi` gives :math:`c_h = (n/2) A e^{j\\varphi}`,
    so the rms phasor is :math:`\\sqrt{2}\\, c_h / n`; the DC term is :math:`c_0/n`.
    The Nyquist bin (n even) would also need halving; it is never reported.
    """
    x = np.asarray(x, dtype=float)
    n = x.shape[-1]
    c = np.fft.rfft(x, axis=-1) / n
    out = c * np.sqrt(2.0)
    out[..., 0] = c[..., 0].real
    return out


def phasors_vs_voltage(v_v: np.ndarray, i_a: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Voltage and current phasors of every order, referred to the voltage fundamental.

    Order h is rotated by ``-h * arg V_1``, the convention of this module (a leading
    fundamental current then has a positive angle).

    Returns
    -------
    v_h_v, i_h_a : ndarray of complex, shape (n // 2 + 1,)
        Rms phasors [V], [A]; index = harmonic order.
    """
    vh = phasors(v_v)
    ih = phasors(i_a)
    ref = np.angle(vh[1]) if abs(vh[1]) > 0 else 0.0
    rot = np.exp(-1j * ref * np.arange(vh.shape[-1]))
    return vh * rot, ih * rot


@dataclass(frozen=True)
class PowerQuality:
    """IEEE 1459 quantities of one voltage/current pair (all rms values).

    Attributes
    ----------
    v_rms_v, i_rms_a : float
        Rms voltage [V] and current [A].
    i_peak_a : float
        Largest absolute current sample [A].
    crest_factor : float
        i_peak_a / i_rms_a [-].
    p_w : float
        Active power, the mean of v·i [W].
    s_va : float
        Apparent power V·I [VA].
    n_var : float
        Non-active power sqrt(S² − P²) [var] (IEEE 1459 N).
    v1_rms_v, i1_rms_a : float
        Fundamental rms voltage [V] and current [A].
    p1_w, q1_var, s1_va : float
        Fundamental active [W], reactive [var] (negative = capacitive) and apparent [VA]
        power.
    d_i_var : float
        Current distortion power V1·I_H [var], I_H the rms of all non-fundamental current.
    pf : float
        True power factor P/S [-].
    dpf : float
        Displacement power factor P1/S1 = cos(θ1) [-].
    thd_i_pct, thd_v_pct : float
        Total harmonic distortion of current and voltage over h = 2..H_MAX, % of the
        fundamental.
    i_dc_a : float
        DC component of the current [A] (a half-wave rectifier without a series
        capacitor draws one).
    i_h_a : ndarray of complex, shape (H_MAX + 1,)
        Current phasors, index = harmonic order, phase relative to h·arg(V1).
    v_h_v : ndarray of complex, shape (H_MAX + 1,)
        Voltage phasors, same reference.
    """

    v_rms_v: float
    i_rms_a: float
    i_peak_a: float
    crest_factor: float
    p_w: float
    s_va: float
    n_var: float
    v1_rms_v: float
    i1_rms_a: float
    p1_w: float
    q1_var: float
    s1_va: float
    d_i_var: float
    pf: float
    dpf: float
    thd_i_pct: float
    thd_v_pct: float
    i_dc_a: float
    i_h_a: np.ndarray
    v_h_v: np.ndarray

    def harmonics(self) -> pd.DataFrame:
        """Harmonic table h = 1..H_MAX: rms current [A], % of fundamental, phase [deg]."""
        return harmonic_table(self.i_h_a)


def harmonic_table(i_h_a: np.ndarray) -> pd.DataFrame:
    """Tabulate current phasors (index = order) for h = 1..H_MAX."""
    i_h_a = np.asarray(i_h_a)
    h = np.arange(1, min(H_MAX, i_h_a.shape[-1] - 1) + 1)
    mag = np.abs(i_h_a[h])
    i1 = mag[0]
    pct = 100.0 * mag / i1 if i1 > 0 else np.zeros_like(mag)
    return pd.DataFrame(
        {
            "h": h,
            "i_rms_a": mag,
            "pct_of_fundamental": pct,
            "phase_deg": np.degrees(np.angle(i_h_a[h])),
        }
    )


def thd_pct(x_h: np.ndarray, h_max: int = H_MAX) -> np.ndarray:
    """THD [%] of phasor spectra (index = order): 100·sqrt(Σ_{h=2..h_max} |X_h|²)/|X_1|.

    References
    ----------
    .. [1] IEEE Std 1459-2010, clause 3.1.2.1 (THD), and IEC 61000-4-7 for the
       harmonic-group range; the sum here stops at ``h_max`` = 50.
    """
    x_h = np.asarray(x_h)
    mag2 = np.abs(x_h[..., 2 : h_max + 1]) ** 2
    fund = np.abs(x_h[..., 1])
    with np.errstate(divide="ignore", invalid="ignore"):
        out = 100.0 * np.sqrt(mag2.sum(axis=-1)) / fund
    return np.where(fund > 0, out, 0.0)


def power_quality(v_v: np.ndarray, i_a: np.ndarray) -> PowerQuality:
    """IEEE 1459 power quantities of one period of uniformly sampled v and i.

    Parameters
    ----------
    v_v : ndarray, shape (n,)
        Line-to-neutral voltage samples over exactly one period [V].
    i_a : ndarray, shape (n,)
        Line current samples, consumer sign [A].

    Returns
    -------
    PowerQuality

    Notes
    -----
    P is the mean of the instantaneous power; V and I are rms values of the samples
    (Parseval: identical to the root-sum-square of all phasors). The fundamental
    quantities use the h = 1 phasors: :math:`P_1 = V_1 I_1 \\cos\\theta_1`,
    :math:`Q_1 = V_1 I_1 \\sin\\theta_1` with :math:`\\theta_1 = \\theta_{V1} - \\theta_{I1}`.
    The current distortion power is :math:`D_I = V_1 I_H` with
    :math:`I_H = \\sqrt{I^2 - I_1^2}` (which includes any DC).

    References
    ----------
    .. [1] IEEE Std 1459-2010, "IEEE Standard Definitions for the Measurement of
       Electric Power Quantities Under Sinusoidal, Nonsinusoidal, Balanced, or
       Unbalanced Conditions", clauses 3.2.2 (single-phase nonsinusoidal).
    """
    v = np.asarray(v_v, dtype=float)
    i = np.asarray(i_a, dtype=float)
    if v.shape != i.shape or v.ndim != 1:
        raise ValueError("v_v and i_a must be 1-D arrays of equal length")
    if not (np.all(np.isfinite(v)) and np.all(np.isfinite(i))):
        raise ValueError("voltage or current samples contain NaN or infinity")
    vh, ih = phasors_vs_voltage(v, i)
    vh, ih = vh[: H_MAX + 1], ih[: H_MAX + 1]
    v_rms = float(np.sqrt(np.mean(v * v)))
    i_rms = float(np.sqrt(np.mean(i * i)))
    i_peak = float(np.max(np.abs(i)))
    p = float(np.mean(v * i))
    s = v_rms * i_rms
    v1 = float(abs(vh[1]))
    i1 = float(abs(ih[1]))
    s1c = vh[1] * np.conj(ih[1])  # P1 + j Q1 with Q1 = V1 I1 sin(θV − θI)
    p1 = float(s1c.real)
    q1 = float(s1c.imag)
    s1 = v1 * i1
    i_h_rms = float(np.sqrt(max(i_rms * i_rms - i1 * i1, 0.0)))
    return PowerQuality(
        v_rms_v=v_rms,
        i_rms_a=i_rms,
        i_peak_a=i_peak,
        crest_factor=i_peak / i_rms if i_rms > 0 else 0.0,
        p_w=p,
        s_va=s,
        n_var=float(np.sqrt(max(s * s - p * p, 0.0))),
        v1_rms_v=v1,
        i1_rms_a=i1,
        p1_w=p1,
        q1_var=q1,
        s1_va=s1,
        d_i_var=v1 * i_h_rms,
        pf=p / s if s > 0 else 1.0,
        dpf=p1 / s1 if s1 > 0 else 1.0,
        thd_i_pct=float(thd_pct(ih)),
        thd_v_pct=float(thd_pct(vh)),
        i_dc_a=float(ih[0].real),
        i_h_a=ih,
        v_h_v=vh,
    )
