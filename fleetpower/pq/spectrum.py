"""Spectra of periodic signals: FFT phasors, the harmonic table, THD, and H_MAX.

Owns: the one highest reported order :data:`H_MAX`, the phasor convention (complex rms,
cosine reference, index = harmonic order, index 0 = DC), phasors referred to the voltage
fundamental, the one :func:`thd_pct`. Conventions as stated in :mod:`fleetpower.pq.ieee1459`.

Imports nothing of fleetpower (numpy only; pandas where a DataFrame is asked for).
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np

if TYPE_CHECKING:  # pragma: no cover  (pandas is imported where a DataFrame is built)
    import pandas as pd

#: highest harmonic order reported and used for THD (IEC 61000-3-2 / IEEE 519 go to 40 / 50)
H_MAX = 50


def phasors(x: np.ndarray, h_max: int | None = None) -> np.ndarray:
    """Complex rms phasors of every harmonic of samples spanning whole periods.

    Parameters
    ----------
    x : ndarray, shape (..., n)
        Uniform samples over exactly one period (the last axis).
    h_max : int, optional
        Highest order returned (default: every order, n // 2); the same values, fewer.

    Returns
    -------
    ndarray of complex, shape (..., n // 2 + 1) or (..., h_max + 1)
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
    c = np.fft.rfft(x, axis=-1)
    if h_max is not None:
        c = c[..., : h_max + 1]
    c = c / n
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


#: an order whose magnitude is below this fraction of the fundamental has no phase: it is
#: rounding (a simulated waveform's even orders come out near 1e-14 of I1, their angle
#: anything), not a current; far below any limit or report figure (common practice, no
#: source)
PHASE_FLOOR_OF_I1 = 1e-9


def harmonic_columns(i_h_a: np.ndarray) -> dict[str, np.ndarray]:
    """The columns of :func:`harmonic_table` as arrays (h = 1..H_MAX), without pandas.

    Keys ``h`` [-], ``i_rms_a`` [A], ``pct_of_fundamental`` [%] and ``phase_deg`` [deg];
    the phase is NaN (undefined) for an order below :data:`PHASE_FLOOR_OF_I1` of the
    fundamental (every order when there is no fundamental).
    """
    i_h_a = np.asarray(i_h_a)
    h = np.arange(1, min(H_MAX, i_h_a.shape[-1] - 1) + 1)
    mag = np.abs(i_h_a[h])
    i1 = mag[0]
    pct = 100.0 * mag / i1 if i1 > 0 else np.zeros_like(mag)
    phase = np.degrees(np.angle(i_h_a[h]))
    return {
        "h": h,
        "i_rms_a": mag,
        "pct_of_fundamental": pct,
        "phase_deg": np.where(mag > PHASE_FLOOR_OF_I1 * i1, phase, np.nan),
    }


def harmonic_table(i_h_a: np.ndarray) -> pd.DataFrame:
    """Tabulate current phasors (index = order) for h = 1..H_MAX."""
    import pandas as pd

    return pd.DataFrame(harmonic_columns(i_h_a))


def harmonic_content(x_h) -> np.ndarray:
    """Rms of the harmonics above the fundamental, sqrt(Σ_{h>=2} |X_h|²), of phasor spectra.

    Parameters
    ----------
    x_h : array_like of complex, shape (..., H + 1)
        Harmonic phasors [rms], index = order.

    Returns
    -------
    numpy.ndarray of float
        Same unit as ``x_h``; DC (index 0) and the fundamental are excluded.
    """
    x_h = np.asarray(x_h, dtype=complex)
    return np.sqrt(np.sum(np.abs(x_h[..., 2:]) ** 2, axis=-1))


def thd_pct(x_h, h_max: int | None = H_MAX, *, no_fundamental: float = 0.0) -> np.ndarray:
    """THD [%] of phasor spectra (index = order): 100·sqrt(Σ_{h=2..h_max} |X_h|²)/|X_1|.

    Parameters
    ----------
    x_h : array_like of complex, shape (..., H + 1)
        Harmonic phasors [rms] of a current or a voltage, index = order.
    h_max : int or None
        Highest order summed; default :data:`H_MAX`; ``None`` sums every order supplied.
    no_fundamental : float
        Value returned where the fundamental is zero: 0.0 (default; a unit that draws
        nothing reports no distortion) or ``numpy.nan`` (THD undefined, as the fleet
        physics states it).

    Returns
    -------
    numpy.ndarray of float
        THD [%].

    Notes
    -----
    DC (index 0) is excluded: it is not a harmonic.

    References
    ----------
    .. [1] IEEE Std 1459-2010, clause 3.1.2.1 (THD), and IEC 61000-4-7 for the
       harmonic-group range; the sum here stops at ``h_max`` = 50.
    .. [2] IEEE Std 519-2014, definitions (total harmonic distortion).
    """
    x_h = np.asarray(x_h, dtype=complex)
    if h_max is not None:
        x_h = x_h[..., : h_max + 1]
    num = harmonic_content(x_h)
    fund = np.abs(x_h[..., 1])
    with np.errstate(divide="ignore", invalid="ignore"):
        out = 100.0 * num / fund
    return np.where(fund > 0, out, no_fundamental)


__all__ = ["H_MAX", "phasors", "phasors_vs_voltage", "harmonic_columns", "harmonic_table",
           "harmonic_content", "thd_pct"]
