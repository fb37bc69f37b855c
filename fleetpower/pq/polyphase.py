"""Polyphase sums: how the harmonic currents of many small units add up on a supply.

Owns: supply systems and their phase frames and rotations, phasor sums, the IEC 61000-3-6
summation, the neutral current, and spectrum <-> waveform / rms. Everything here is a pure
function on numpy arrays; nothing is cached or global. May import the rest of ``pq`` only;
nothing else of fleetpower.

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


__all__ = [
    "NeutralCurrent",
    "SummationResult",
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
]
