"""Fleet aggregation physics: how the harmonic currents of many small units add up.

Everything here is a pure function on numpy arrays; nothing is cached or global.

Conventions
-----------
* **Consumer sign.** Active power ``P > 0`` is drawn from the mains. Reactive power follows
  the same load convention: ``S = V * conj(I)``, so an inductive (lagging) load has
  ``Q > 0`` and a capacitive (leading) load such as a capacitive dropper has ``Q < 0``.
* **Voltages** are line-to-neutral.
* **Phasors** are complex rms values with a cosine reference:
  ``i(t) = I_0 + sum_h sqrt(2) * Re(I_h * exp(j*h*w*t))``. A spectrum is a complex array
  indexed by harmonic order ``h = 0..H`` on its last axis; index 0 is the DC component,
  stored as a real value (its "rms" is the DC value itself, no sqrt(2)).
* **Own-phase frame.** A unit's spectrum, as the circuit engine returns it, is referred to the
  fundamental of the voltage of the phase it is connected to (that voltage has angle 0).
* **Common frame.** To add currents of different phases, every spectrum is rotated into the
  frame of phase L1. Phase angles of the supply voltages:

  ====================  =========================================
  system                phase fundamental angle
  ====================  =========================================
  ``"single"``          L1 0 deg
  ``"wye"``             L1 0 deg, L2 -120 deg, L3 +120 deg (= -240 deg)
  ``"split"``           L1 0 deg, L2 180 deg (120/240 V split phase)
  ====================  =========================================

  A voltage that lags by ``theta`` at the fundamental is the L1 waveform delayed by
  ``theta / w``; the h-th harmonic of anything locked to that voltage is then rotated by
  ``h * theta``. So a unit's h-th harmonic on L2 of a wye is multiplied by
  ``exp(j*h*(-120 deg))``, on L3 by ``exp(j*h*(+120 deg))``.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd

__all__ = [
    "NeutralCurrent",
    "SummationResult",
    "PowerTotals",
    "ConductorLoading",
    "phase_angle_deg",
    "system_phases",
    "phase_rotation",
    "to_common_frame",
    "sum_phasors",
    "iec61000_3_6_exponent",
    "sum_iec61000_3_6",
    "waveform_from_spectrum",
    "neutral_current",
    "rms_from_spectrum",
    "thd_pct",
    "tdd_pct",
    "k_factor",
    "harmonic_loss_factor",
    "harmonic_loss_factor_stray",
    "complex_power_va",
    "power_totals",
    "conductor_loading",
]


def system_phases(system: str) -> dict[str, float]:
    """Phase names of a supply system and their fundamental voltage angles.

    Parameters
    ----------
    system : {"single", "wye", "split"}
        Single-phase two-wire, three-phase four-wire wye, or 120/240 V split-phase.

    Returns
    -------
    dict of str to float
        Phase name -> fundamental angle of its line-to-neutral voltage in the common
        frame [deg].

    Raises
    ------
    ValueError
        On an unknown system name.
    """
    table = {
        "single": {"L1": 0.0},
        "wye": {"L1": 0.0, "L2": -120.0, "L3": 120.0},
        "split": {"L1": 0.0, "L2": 180.0},
    }
    try:
        return dict(table[system])
    except KeyError:
        raise ValueError(f"unknown system {system!r}; expected one of {sorted(table)}") from None


def phase_angle_deg(phase: str, system: str = "wye") -> float:
    """Fundamental angle of a phase voltage in the common (L1) frame.

    Parameters
    ----------
    phase : str
        ``"L1"``, ``"L2"`` or ``"L3"``.
    system : {"single", "wye", "split"}
        Supply system, see :func:`system_phases`.

    Returns
    -------
    float
        Angle [deg].
    """
    angles = system_phases(system)
    if phase not in angles:
        raise ValueError(f"phase {phase!r} does not exist in a {system!r} system")
    return angles[phase]


def phase_rotation(h, phase: str, system: str = "wye") -> np.ndarray:
    """Unit rotor that carries harmonic ``h`` of a phase into the common frame.

    Parameters
    ----------
    h : int or array_like of int
        Harmonic order(s) [-].
    phase : str
        Phase the unit is connected to.
    system : {"single", "wye", "split"}
        Supply system.

    Returns
    -------
    numpy.ndarray of complex
        ``exp(j * h * theta_phase)`` [-], same shape as ``h``.

    Notes
    -----
    If the phase voltage is ``v_p(t) = v_L1(t - tau)`` with ``w * tau = -theta_phase``, a
    current locked to it is the L1-frame current delayed by ``tau``. Delaying
    ``sqrt(2) Re(I_h exp(j h w t))`` by ``tau`` multiplies the phasor by
    ``exp(-j h w tau) = exp(j h theta_phase)``. The DC term (h = 0) is unchanged.

    References
    ----------
    .. [1] R. C. Dugan, M. F. McGranaghan, S. Santoso, H. W. Beaty, *Electrical Power
       Systems Quality*, 3rd ed., McGraw-Hill, 2012, ch. 5 (phase sequence of harmonics).
    """
    theta_rad = np.deg2rad(phase_angle_deg(phase, system))
    h_arr = np.asarray(h, dtype=float)
    return np.exp(1j * h_arr * theta_rad)


def to_common_frame(i_h_a, phase: str, system: str = "wye") -> np.ndarray:
    """Rotate a spectrum from its own phase's frame into the common (L1) frame.

    Parameters
    ----------
    i_h_a : array_like of complex, shape (..., H + 1)
        Harmonic current phasors [A rms] referred to the phase's own voltage fundamental,
        harmonic order on the last axis.
    phase : str
        Phase the spectrum belongs to.
    system : {"single", "wye", "split"}
        Supply system.

    Returns
    -------
    numpy.ndarray of complex, shape (..., H + 1)
        The same phasors referred to the L1 voltage fundamental [A rms].

    Notes
    -----
    ``I_h,common = I_h,own * exp(j h theta_phase)``; see :func:`phase_rotation`.

    References
    ----------
    .. [1] R. C. Dugan et al., *Electrical Power Systems Quality*, 3rd ed., 2012, ch. 5.
    """
    i_h_a = np.asarray(i_h_a, dtype=complex)
    h = np.arange(i_h_a.shape[-1])
    return i_h_a * phase_rotation(h, phase, system)


def sum_phasors(i_h_a_list: Sequence, counts=None) -> np.ndarray:
    """Coherent (phasor) sum of the spectra of a group of units in one frame.

    Parameters
    ----------
    i_h_a_list : sequence of array_like of complex, each shape (H + 1,)
        One spectrum per design/state [A rms], all in the same frame.
    counts : sequence of float, optional
        Number of units of each design/state [-]; default one each.

    Returns
    -------
    numpy.ndarray of complex, shape (H + 1,)
        ``sum_i counts_i * I_h,i`` [A rms].

    Notes
    -----
    Identical units driven by the same voltage draw the same current waveform, so they add
    as ``N * I_h``. Different designs keep their own phase angles and add as a complex
    sum (Kirchhoff's current law applied per harmonic frequency, exact for a stiff supply).

    References
    ----------
    .. [1] IEEE Std 1459-2010, *IEEE Standard Definitions for the Measurement of Electric
       Power Quantities Under Sinusoidal, Nonsinusoidal, Balanced, or Unbalanced
       Conditions* (phasor representation of harmonic components).
    """
    spectra = np.atleast_2d(np.asarray(i_h_a_list, dtype=complex))
    if counts is None:
        counts = np.ones(spectra.shape[0])
    counts = np.asarray(counts, dtype=float)
    if counts.shape != (spectra.shape[0],):
        raise ValueError("counts must give one number per spectrum")
    if np.any(counts < 0):
        raise ValueError("counts must not be negative")
    return np.tensordot(counts, spectra, axes=(0, 0))


def iec61000_3_6_exponent(h) -> np.ndarray:
    """Summation exponent alpha of the IEC 61000-3-6 general summation law.

    Parameters
    ----------
    h : int or array_like of int
        Harmonic order [-].

    Returns
    -------
    numpy.ndarray of float
        alpha = 1 for h < 5, 1.4 for 5 <= h <= 10, 2 for h > 10 [-].

    References
    ----------
    .. [1] IEC/TR 61000-3-6:2008, *Assessment of emission limits for the connection of
       distorting installations to MV, HV and EHV power systems*, clause on the summation
       law (table of exponents; values recalled from memory).
    """
    h = np.asarray(h, dtype=float)
    return np.where(h < 5, 1.0, np.where(h <= 10, 1.4, 2.0))


@dataclass(frozen=True)
class SummationResult:
    """Magnitudes from a summation law.

    Attributes
    ----------
    i_h_a : numpy.ndarray of float
        Summed harmonic current magnitudes [A rms]; no phase information.
    alpha : numpy.ndarray of float
        Exponent used at each order [-].
    method : str
        Label of the method, for reports.
    """

    i_h_a: np.ndarray
    alpha: np.ndarray
    method: str


def sum_iec61000_3_6(
    i_h_a_list: Sequence, counts=None, *, units_of_a_design: str = "coherent"
) -> SummationResult:
    """General summation law of IEC 61000-3-6 for harmonic current magnitudes.

    Parameters
    ----------
    i_h_a_list : sequence of array_like, each shape (H + 1,)
        Spectra of each design/state [A rms]; complex input is reduced to magnitudes.
    counts : sequence of float, optional
        Number of units of each design/state [-]; default one each.
    units_of_a_design : {"coherent", "independent"}
        ``"coherent"`` (default): units of one design add arithmetically (``N * |I_h|``,
        they are identical circuits on the same voltage), and the law is applied between
        designs. ``"independent"``: every unit is a separate source, giving
        ``N**(1/alpha) * |I_h|`` per design.

    Returns
    -------
    SummationResult
        Magnitudes [A rms], exponents and a method label.

    Notes
    -----
    ``I_h = (sum_i I_h,i ** alpha_h) ** (1 / alpha_h)`` with alpha from
    :func:`iec61000_3_6_exponent`. alpha = 1 is the arithmetic (worst-case, in-phase) sum;
    alpha = 2 is the root-sum-square of sources with random, uniformly distributed phase.
    The law produces magnitudes only. A neutral current cannot be built from it by phasor
    addition; anything derived from these magnitudes for the neutral is a magnitude rule,
    unlike :func:`neutral_current`, which is exact for known phasors.

    The ``"coherent"`` default departs from a literal reading of the standard, which treats
    each installation as a source; it is used because units of one design are not
    statistically independent.

    References
    ----------
    .. [1] IEC/TR 61000-3-6:2008, clause on the general summation law (from memory).
    """
    mags = np.abs(np.atleast_2d(np.asarray(i_h_a_list, dtype=complex)))
    if counts is None:
        counts = np.ones(mags.shape[0])
    counts = np.asarray(counts, dtype=float)
    if counts.shape != (mags.shape[0],):
        raise ValueError("counts must give one number per spectrum")
    if np.any(counts < 0):
        raise ValueError("counts must not be negative")
    alpha = iec61000_3_6_exponent(np.arange(mags.shape[-1]))
    if units_of_a_design == "coherent":
        terms = (counts[:, None] * mags) ** alpha
    elif units_of_a_design == "independent":
        terms = counts[:, None] * mags**alpha
    else:
        raise ValueError("units_of_a_design must be 'coherent' or 'independent'")
    total = terms.sum(axis=0) ** (1.0 / alpha)
    label = f"IEC 61000-3-6 summation law (alpha 1/1.4/2, units of a design {units_of_a_design})"
    return SummationResult(i_h_a=total, alpha=alpha, method=label)


def waveform_from_spectrum(i_h_a, n_samples: int = 1024) -> np.ndarray:
    """Samples of one fundamental period of the waveform described by a spectrum.

    Parameters
    ----------
    i_h_a : array_like of complex, shape (..., H + 1)
        Harmonic phasors [A rms], index 0 = DC (real).
    n_samples : int
        Samples per fundamental period; must exceed ``2 H`` to represent every order.

    Returns
    -------
    numpy.ndarray of float, shape (..., n_samples)
        ``i(theta_k)`` [A] at ``theta_k = 2 pi k / n_samples``, ``k = 0..n_samples-1``.

    Notes
    -----
    ``i(theta) = Re(I_0) + sum_{h>=1} sqrt(2) Re(I_h exp(j h theta))``, the cosine-reference
    rms phasor definition. Evaluated as an explicit sum of cosines, not by inverse FFT, so
    an FFT can serve as an independent check.

    References
    ----------
    .. [1] IEEE Std 1459-2010, clause 3.1 (nonsinusoidal waveforms as Fourier series).
    """
    i_h_a = np.asarray(i_h_a, dtype=complex)
    n_h = i_h_a.shape[-1]
    if n_samples <= 2 * (n_h - 1):
        raise ValueError(f"n_samples must exceed 2*H = {2 * (n_h - 1)}")
    theta = 2.0 * np.pi * np.arange(n_samples) / n_samples
    h = np.arange(1, n_h)
    rotors = np.exp(1j * np.outer(h, theta))  # (H, n)
    ac = np.sqrt(2.0) * np.real(i_h_a[..., 1:] @ rotors)
    return np.real(i_h_a[..., :1]) + ac


@dataclass(frozen=True)
class NeutralCurrent:
    """Neutral conductor current.

    Attributes
    ----------
    i_h_a : numpy.ndarray of complex
        Neutral harmonic phasors in the common (L1) frame [A rms].
    i_rms_a : float
        True rms of the neutral current [A].
    method : str
        ``"phasor"`` or ``"time"``.
    """

    i_h_a: np.ndarray
    i_rms_a: float
    method: str


def neutral_current(
    phase_spectra: Mapping[str, np.ndarray],
    system: str = "wye",
    *,
    method: str = "phasor",
    n_samples: int = 1200,
) -> NeutralCurrent:
    """Current in the neutral of a four-wire wye, split-phase or single-phase supply.

    Parameters
    ----------
    phase_spectra : mapping of str to array_like of complex, each shape (H + 1,)
        Total line current spectrum of each phase [A rms], each referred to its *own*
        phase voltage. Missing phases carry no current.
    system : {"single", "wye", "split"}
        Supply system.
    method : {"phasor", "time"}
        ``"phasor"``: per-harmonic phasor sum in the common frame. ``"time"``: build each
        phase waveform in the common frame, add the samples, and analyse the sum with an
        FFT. Both are exact for the harmonic orders represented.
    n_samples : int
        Samples per period for ``method="time"``.

    Returns
    -------
    NeutralCurrent
        Neutral phasors in the common frame [A rms] and neutral rms [A].

    Notes
    -----
    With line-to-neutral loads and the reference direction line -> load -> neutral,
    Kirchhoff's current law at the star point gives ``i_N(t) = sum_p i_p(t)``, hence
    per harmonic ``I_N,h = sum_p I_p,h exp(j h theta_p)``. For a balanced wye this leaves
    the triplen (zero-sequence) orders at three times one phase and cancels the others;
    for split-phase (L2 at 180 deg) odd orders of equal loads cancel and DC/even orders
    add. In a single-phase circuit the neutral carries the line current.
    No rule of thumb (such as "neutral = sqrt(3) x phase") is used.

    References
    ----------
    .. [1] R. C. Dugan et al., *Electrical Power Systems Quality*, 3rd ed., 2012, ch. 5
       (neutral currents in three-phase four-wire systems).
    .. [2] IEEE Std 1459-2010, clause 3.2 (four-wire systems).
    """
    phases = system_phases(system)
    unknown = set(phase_spectra) - set(phases)
    if unknown:
        raise ValueError(f"phases {sorted(unknown)} do not exist in a {system!r} system")
    if not phase_spectra:
        raise ValueError("no phase spectra given")
    common = [to_common_frame(s, p, system) for p, s in phase_spectra.items()]
    n_h = common[0].shape[-1]
    if method == "phasor":
        i_n_h_a = np.sum(common, axis=0)
    elif method == "time":
        wave_a = np.sum([waveform_from_spectrum(c, n_samples) for c in common], axis=0)
        x = np.fft.rfft(wave_a) / n_samples
        i_n_h_a = np.empty(n_h, dtype=complex)
        i_n_h_a[0] = x[0].real
        i_n_h_a[1:] = np.sqrt(2.0) * x[1:n_h]
    else:
        raise ValueError("method must be 'phasor' or 'time'")
    return NeutralCurrent(i_h_a=i_n_h_a, i_rms_a=float(rms_from_spectrum(i_n_h_a)), method=method)


def rms_from_spectrum(i_h_a) -> np.ndarray:
    """True rms from a harmonic spectrum.

    Parameters
    ----------
    i_h_a : array_like of complex, shape (..., H + 1)
        Harmonic phasors [A rms], index 0 = DC.

    Returns
    -------
    numpy.ndarray of float
        ``sqrt(I_0**2 + sum_{h>=1} |I_h|**2)`` [A].

    Notes
    -----
    Parseval's theorem: the cross terms of different orders average to zero over a period.

    References
    ----------
    .. [1] IEEE Std 1459-2010, clause 3.2.2 (rms of a nonsinusoidal current).
    """
    i_h_a = np.asarray(i_h_a, dtype=complex)
    return np.sqrt(np.sum(np.abs(i_h_a) ** 2, axis=-1))


def _harmonic_content_a(i_h_a) -> np.ndarray:
    """sqrt(sum_{h>=2} |I_h|^2) [A]."""
    i_h_a = np.asarray(i_h_a, dtype=complex)
    return np.sqrt(np.sum(np.abs(i_h_a[..., 2:]) ** 2, axis=-1))


def thd_pct(i_h_a) -> np.ndarray:
    """Total harmonic distortion of a current, relative to its fundamental.

    Parameters
    ----------
    i_h_a : array_like of complex, shape (..., H + 1)
        Harmonic phasors [A rms].

    Returns
    -------
    numpy.ndarray of float
        ``100 sqrt(sum_{h>=2} |I_h|^2) / |I_1|`` [%]; NaN where ``I_1 = 0``.

    Notes
    -----
    DC is excluded (it is not a harmonic). The sum runs to the highest order supplied (H).

    References
    ----------
    .. [1] IEEE Std 1459-2010, eq. for THD_I (from memory).
    .. [2] IEEE Std 519-2014, definitions (total harmonic distortion).
    """
    i_h_a = np.asarray(i_h_a, dtype=complex)
    i1_a = np.abs(i_h_a[..., 1])
    num = _harmonic_content_a(i_h_a)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(i1_a > 0, 100.0 * num / np.where(i1_a > 0, i1_a, 1.0), np.nan)


def tdd_pct(i_h_a, i_l_a) -> np.ndarray:
    """Total demand distortion (IEEE 519).

    Parameters
    ----------
    i_h_a : array_like of complex, shape (..., H + 1)
        Harmonic phasors [A rms].
    i_l_a : float or array_like
        Maximum demand load current (fundamental) at the point of common coupling [A].

    Returns
    -------
    numpy.ndarray of float
        ``100 sqrt(sum_{h>=2} |I_h|^2) / I_L`` [%].

    References
    ----------
    .. [1] IEEE Std 519-2014, *IEEE Recommended Practice and Requirements for Harmonic
       Control in Electric Power Systems*, definition of TDD.
    """
    i_l_a = np.asarray(i_l_a, dtype=float)
    if np.any(i_l_a <= 0):
        raise ValueError("i_l_a must be positive")
    return 100.0 * _harmonic_content_a(i_h_a) / i_l_a


def k_factor(i_h_a, i_r_a=None) -> np.ndarray:
    """K-factor of a load current (UL 1561 / UL 1562, IEEE C57.110).

    Parameters
    ----------
    i_h_a : array_like of complex, shape (..., H + 1)
        Harmonic phasors [A rms], index 0 = DC.
    i_r_a : float or array_like, optional
        Reference current [A rms]. Default: the rms of the spectrum (orders 1..H) itself.
        Pass the transformer's rated current to get the per-unit-of-rating form.

    Returns
    -------
    numpy.ndarray of float
        ``K = sum_{h>=1} (I_h / I_R)**2 h**2`` [-].

    Notes
    -----
    With ``I_R`` equal to the rms of the spectrum, ``K = sum I_h^2 h^2 / sum I_h^2``, which
    is numerically identical to :func:`harmonic_loss_factor`: the common factor
    ``1/I_1^2`` (IEEE F_HL) or ``1/I_rms^2`` (UL K) cancels in the ratio. The two differ
    in intent: the UL K-factor rates a transformer's ability to carry a distorted load and
    is often written per unit of *rated* current (then it scales with
    ``(I_rms / I_rated)**2``), whereas F_HL is a pure shape factor of the spectrum,
    independent of load level, used to derate a standard transformer.

    DC (h = 0) is excluded: it adds no eddy-current loss (h^2 = 0) and is a separate
    core-saturation matter; this is a recorded departure from including it in the rms.

    References
    ----------
    .. [1] UL 1561 / UL 1562, definition of K-factor (from memory).
    .. [2] IEEE Std C57.110-2018, *IEEE Recommended Practice for Establishing Liquid-Immersed
       and Dry-Type Power and Distribution Transformer Capability When Supplying
       Nonsinusoidal Load Currents*.
    """
    i_h_a = np.asarray(i_h_a, dtype=complex)
    mag2 = np.abs(i_h_a[..., 1:]) ** 2
    h = np.arange(1, i_h_a.shape[-1])
    ref2 = np.sum(mag2, axis=-1) if i_r_a is None else np.asarray(i_r_a, dtype=float) ** 2
    return np.sum(mag2 * h**2, axis=-1) / ref2


def _loss_factor(i_h_a, exponent: float) -> np.ndarray:
    i_h_a = np.asarray(i_h_a, dtype=complex)
    i1_a = np.abs(i_h_a[..., 1:2])
    if np.any(i1_a == 0):
        raise ValueError("the fundamental must be non-zero")
    ratio2 = (np.abs(i_h_a[..., 1:]) / i1_a) ** 2
    h = np.arange(1, i_h_a.shape[-1], dtype=float)
    return np.sum(ratio2 * h**exponent, axis=-1) / np.sum(ratio2, axis=-1)


def harmonic_loss_factor(i_h_a) -> np.ndarray:
    """Harmonic loss factor for winding eddy-current losses, F_HL (IEEE C57.110).

    Parameters
    ----------
    i_h_a : array_like of complex, shape (..., H + 1)
        Harmonic phasors [A rms]; the fundamental must be non-zero.

    Returns
    -------
    numpy.ndarray of float
        ``F_HL = sum_{h>=1} (I_h/I_1)^2 h^2 / sum_{h>=1} (I_h/I_1)^2`` [-].

    Notes
    -----
    Winding eddy-current loss grows with the square of current and of frequency, so
    ``P_EC = P_EC,R * sum (I_h/I_R)^2 h^2``; dividing by the rms-squared ratio gives a
    factor that depends only on the shape of the spectrum. Equal to :func:`k_factor` with
    the default reference; see its Notes.

    References
    ----------
    .. [1] IEEE Std C57.110-2018, harmonic loss factor for winding eddy currents.
    """
    return _loss_factor(i_h_a, 2.0)


def harmonic_loss_factor_stray(i_h_a) -> np.ndarray:
    """Harmonic loss factor for other stray losses, F_HL-STR (IEEE C57.110).

    Parameters
    ----------
    i_h_a : array_like of complex, shape (..., H + 1)
        Harmonic phasors [A rms]; the fundamental must be non-zero.

    Returns
    -------
    numpy.ndarray of float
        ``sum (I_h/I_1)^2 h^0.8 / sum (I_h/I_1)^2`` [-].

    Notes
    -----
    Other stray losses (clamps, tank, structural parts) rise more slowly with frequency;
    the standard uses the exponent 0.8 (value from memory).

    References
    ----------
    .. [1] IEEE Std C57.110-2018, harmonic loss factor for other stray losses.
    """
    return _loss_factor(i_h_a, 0.8)


def complex_power_va(v_h_v, i_h_a) -> np.ndarray:
    """Complex power of each harmonic order, consumer sign.

    Parameters
    ----------
    v_h_v : array_like of complex, shape (..., H + 1)
        Voltage phasors [V rms], line-to-neutral.
    i_h_a : array_like of complex, shape (..., H + 1)
        Current phasors in the same frame [A rms].

    Returns
    -------
    numpy.ndarray of complex
        ``S_h = V_h conj(I_h)`` [VA]: real part P_h [W], imaginary part Q_h [var]
        (negative for a leading, capacitive current). At h = 0 it is ``V_0 I_0``.

    References
    ----------
    .. [1] IEEE Std 1459-2010, clause 3.1.2 (fundamental active and reactive power,
       ``Q_1 = V_1 I_1 sin(theta_1)``, theta_1 = voltage angle minus current angle).
    """
    return np.asarray(v_h_v, dtype=complex) * np.conj(np.asarray(i_h_a, dtype=complex))


@dataclass(frozen=True)
class PowerTotals:
    """Per-phase and system power totals.

    Attributes
    ----------
    per_phase : pandas.DataFrame
        Index = phase; columns ``p_w``, ``p1_w``, ``q1_var``, ``s_va``, ``s1_va``,
        ``pf``, ``dpf``.
    p_w, p1_w, q1_var : float
        System active, fundamental active and fundamental reactive power [W], [W], [var].
    s_arith_va : float
        Arithmetic sum of phase apparent powers [VA].
    s1_vector_va : float
        ``|P1 + j Q1|`` of the system [VA].
    s_e_va : float or None
        IEEE 1459 effective apparent power [VA]; None where not defined.
    pf_arith, pf_e, dpf : float
        ``P / S_arith``, ``P / S_e`` (NaN if S_e is None) and ``P1 / S1`` [-].
    """

    per_phase: pd.DataFrame
    p_w: float
    p1_w: float
    q1_var: float
    s_arith_va: float
    s1_vector_va: float
    s_e_va: float | None
    pf_arith: float
    pf_e: float
    dpf: float


def _ratio(num: float, den: float) -> float:
    return float(num / den) if den > 0 else float("nan")


def power_totals(
    p_w: Mapping[str, float],
    q1_var: Mapping[str, float],
    v_rms_v: Mapping[str, float],
    i_rms_a: Mapping[str, float],
    *,
    p1_w: Mapping[str, float] | None = None,
    i_n_rms_a: float | None = None,
    system: str = "wye",
) -> PowerTotals:
    """Per-phase and whole-system P, Q1, S, PF and DPF of a fleet.

    Parameters
    ----------
    p_w : mapping of phase to float
        Active power of each phase [W] (sum over its units; consumer sign).
    q1_var : mapping of phase to float
        Fundamental reactive power of each phase [var] (capacitive negative).
    v_rms_v : mapping of phase to float
        Line-to-neutral rms voltage of each phase [V].
    i_rms_a : mapping of phase to float
        True rms line current of each phase [A].
    p1_w : mapping of phase to float, optional
        Fundamental active power [W]. Default ``p_w`` (exact for a sinusoidal supply,
        where harmonic active power is zero).
    i_n_rms_a : float, optional
        Neutral rms current [A] (from :func:`neutral_current`); needed for S_e of a wye.
    system : {"single", "wye", "split"}
        Supply system.

    Returns
    -------
    PowerTotals

    Notes
    -----
    Per phase: ``S = V_rms I_rms``, ``S_1 = |P_1 + j Q_1| = V_1 I_1``, ``PF = P / S``,
    ``DPF = P_1 / S_1 = cos(theta_1)``.

    System: ``S_arith = sum S_phase``. For a four-wire wye IEEE 1459 defines the
    effective current ``I_e = sqrt((I_a^2 + I_b^2 + I_c^2 + I_n^2) / 3)`` and
    ``S_e = 3 V_e I_e`` (clause 3.2.2.x, from memory; the neutral-to-line resistance
    ratio is taken as 1). Departure: the standard's V_e also uses line-to-line voltages;
    here ``V_e = sqrt((V_a^2 + V_b^2 + V_c^2) / 3)`` from line-to-neutral values, which is
    the same number for a balanced sinusoidal supply (a phase with no entry in ``v_rms_v``
    is given the mean square of the others; a phase missing from ``i_rms_a`` carries no
    current). For a single-phase system
    ``S_e = S``; for split-phase no S_e is given (None). System ``DPF = P1 / |P1 + j Q1|``
    from the summed fundamental powers.

    References
    ----------
    .. [1] IEEE Std 1459-2010, clauses 3.1 (single-phase) and 3.2 (three-phase),
       effective apparent power.
    """
    phases = list(p_w)
    known = system_phases(system)
    for p in phases:
        if p not in known:
            raise ValueError(f"phase {p!r} does not exist in a {system!r} system")
    p1 = p_w if p1_w is None else p1_w
    rows = {}
    for p in phases:
        s_va = float(v_rms_v[p]) * float(i_rms_a[p])
        s1_va = float(np.hypot(p1[p], q1_var[p]))
        rows[p] = {
            "p_w": float(p_w[p]),
            "p1_w": float(p1[p]),
            "q1_var": float(q1_var[p]),
            "s_va": s_va,
            "s1_va": s1_va,
            "pf": _ratio(p_w[p], s_va),
            "dpf": _ratio(p1[p], s1_va),
        }
    df = pd.DataFrame.from_dict(rows, orient="index")
    p_tot = float(df["p_w"].sum())
    p1_tot = float(df["p1_w"].sum())
    q1_tot = float(df["q1_var"].sum())
    s_arith = float(df["s_va"].sum())
    s1_vec = float(np.hypot(p1_tot, q1_tot))
    s_e: float | None
    if system == "single":
        s_e = s_arith
    elif system == "wye" and i_n_rms_a is not None:
        i_sq = [float(i_rms_a.get(p, 0.0)) ** 2 for p in known]
        v_sq = [float(v_rms_v[p]) ** 2 for p in known if p in v_rms_v]
        i_e = np.sqrt((sum(i_sq) + float(i_n_rms_a) ** 2) / 3.0)
        v_e = np.sqrt(np.mean(v_sq))
        s_e = float(3.0 * v_e * i_e)
    else:
        s_e = None
    return PowerTotals(
        per_phase=df,
        p_w=p_tot,
        p1_w=p1_tot,
        q1_var=q1_tot,
        s_arith_va=s_arith,
        s1_vector_va=s1_vec,
        s_e_va=s_e,
        pf_arith=_ratio(p_tot, s_arith),
        pf_e=_ratio(p_tot, s_e) if s_e is not None else float("nan"),
        dpf=_ratio(p1_tot, s1_vec),
    )


@dataclass(frozen=True)
class ConductorLoading:
    """Loading of a conductor.

    Attributes
    ----------
    used_pct : numpy.ndarray of float
        ``100 I_rms / rating`` [%].
    verdict : numpy.ndarray of str
        ``"ok"``, ``"high"`` (at or above ``high_pct``) or ``"over"`` (above 100 %).
    """

    used_pct: np.ndarray
    verdict: np.ndarray


def conductor_loading(i_rms_a, rating_a, *, high_pct: float = 80.0) -> ConductorLoading:
    """Percentage of a conductor's ampacity used, with a verdict.

    Parameters
    ----------
    i_rms_a : float or array_like
        True rms current in the conductor [A] (for a neutral, from :func:`neutral_current`).
    rating_a : float or array_like
        Ampacity of the conductor [A], positive.
    high_pct : float
        Threshold of the ``"high"`` verdict [%]. Default 80 % (the usual continuous-load
        margin; common practice, no source).

    Returns
    -------
    ConductorLoading

    Notes
    -----
    Heating follows the true rms, so the rms (all harmonics) is compared with the rating.
    """
    i_rms_a = np.asarray(i_rms_a, dtype=float)
    rating_a = np.asarray(rating_a, dtype=float)
    if np.any(rating_a <= 0):
        raise ValueError("rating_a must be positive")
    used = 100.0 * i_rms_a / rating_a
    verdict = np.where(used > 100.0, "over", np.where(used >= high_pct, "high", "ok"))
    return ConductorLoading(used_pct=used, verdict=verdict)
