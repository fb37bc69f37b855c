"""Synthetic captures whose spectrum is known in closed form (independent of fleetpower).

The current is a bipolar trapezoidal pulse train: a positive trapezoid of height A,
width τ between its half-height points and rise = fall time τr, once per cycle, and its
negative copy half a cycle later (the line current of a capacitor-input rectifier, idealised).

Closed form (from memory; e.g. C. R. Paul, "Introduction to Electromagnetic Compatibility",
the spectrum of a periodic trapezoidal pulse train). A trapezoid is the convolution of a
rectangle of height A and width τ with a rectangle of unit area and width τr, so its
Fourier series coefficients are the product of two sincs:

    c_n = A (τ/T) sinc(n τ/T) sinc(n τr/T),     sinc(x) = sin(πx)/(πx)  (numpy.sinc),

for a pulse centred on t = 0. The negative copy at T/2 multiplies c_n by −e^{−jnπ}, which
doubles odd n and cancels even n. As a cosine series about the pulse centre t_c:

    i(t) = Σ_{n odd} 4 c_n cos(nω(t − t_c)),  rms phasor I_n = (4 c_n/√2) e^{−jnωt_c}.

The rms over a cycle, by integrating the square directly (plateau τ − τr at A², two ramps
of τr each contributing A² τr/3, twice per cycle):

    I_rms² = 2 A² (τ − τr/3) / T.

The voltage is a pure cosine, v(t) = √2 V cos(ωt + θ0), so P = V I_1 cos(θ_V − θ_I1) and
DPF = cos(θ_V − θ_I1) exactly.
"""

from __future__ import annotations

import functools
from dataclasses import dataclass

import numpy as np

#: orders summed when sampling the series (the tail beyond decays as 1/n², and the
#: terms above are below 1e-7 of the fundamental for the widths used here)
N_TERMS = 4000


@dataclass(frozen=True)
class Synthetic:
    t_s: np.ndarray
    v_v: np.ndarray
    i_a: np.ndarray
    #: exact rms current phasors, index = order (0..N_TERMS), phase relative to n·θ_V
    i_h_a: np.ndarray
    i_rms_a: float
    p_w: float
    dpf: float
    v_rms_v: float
    f1_hz: float


@functools.lru_cache(maxsize=32)  # deterministic; callers do not modify the arrays
def trapezoid_capture(
    f1_hz: float = 50.03,
    fs_hz: float = 23456.7,
    cycles: float = 10.37,
    theta0_rad: float = 1.234,
    v_rms_v: float = 230.0,
    a_a: float = 0.2,
    tau_frac: float = 0.1,
    rise_frac: float = 0.02,
    shift_frac: float = -0.03,
    band_limit_hz: float | None = None,
) -> Synthetic:
    """Sample a sinusoidal voltage and a bipolar trapezoidal current.

    ``tau_frac`` and ``rise_frac`` are τ/T and τr/T; ``shift_frac`` moves the pulse centre
    from the voltage peak by this fraction of a cycle (negative = leading, capacitive);
    sampling starts at t = 0 where the voltage phase is ``theta0_rad``. With
    ``band_limit_hz`` the orders at or above it are left out of the samples (an ideal
    anti-alias filter ahead of the converter); the exact phasors keep every order.
    """
    period = 1.0 / f1_hz
    omega = 2.0 * np.pi * f1_hz
    n = int(cycles * period * fs_hz)
    t = np.arange(n) / fs_hz
    v = np.sqrt(2.0) * v_rms_v * np.cos(omega * t + theta0_rad)
    t_c = (-theta0_rad / omega) % period + shift_frac * period  # pulse centre [s]
    orders = np.arange(1, N_TERMS + 1)
    c = a_a * tau_frac * np.sinc(orders * tau_frac) * np.sinc(orders * rise_frac)
    amp = np.where(orders % 2 == 1, 4.0 * c, 0.0)
    i = np.zeros(n)
    for h, a in zip(orders, amp, strict=True):
        if a != 0.0 and (band_limit_hz is None or h * f1_hz < band_limit_hz):
            i += a * np.cos(h * omega * (t - t_c))
    phasor = np.zeros(N_TERMS + 1, dtype=complex)
    # absolute phase −nωt_c, then referred to n·θ_V (θ_V = θ0)
    phasor[1:] = amp / np.sqrt(2.0) * np.exp(-1j * orders * (omega * t_c + theta0_rad))
    cos1 = float(np.cos(np.angle(phasor[1])))  # θ_V − θ_I1 = −arg(I1 referred)
    return Synthetic(
        t_s=t,
        v_v=v,
        i_a=i,
        i_h_a=phasor,
        i_rms_a=float(np.sqrt(2.0 * a_a**2 * (tau_frac - rise_frac / 3.0))),
        p_w=float(v_rms_v * abs(phasor[1]) * cos1),
        dpf=cos1,
        v_rms_v=v_rms_v,
        f1_hz=f1_hz,
    )
