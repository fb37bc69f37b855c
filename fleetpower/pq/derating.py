"""Derating for distorted currents: TDD, K-factor, harmonic loss factor, conductor loading.

Owns: the figures that say how much harder a distorted current works a transformer or a
conductor than a sinusoid of the same rms. Conventions as in :mod:`fleetpower.pq.polyphase`.
May import the rest of ``pq`` only; nothing else of fleetpower.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .spectrum import harmonic_content


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
    return 100.0 * harmonic_content(i_h_a) / i_l_a


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


#: orders above the summed range are "material" when they would raise K by more than
#: this [%]: K-factor ratings go in steps (K-4, K-9, K-13, K-20), so a few per cent does not
#: move a rating (common practice, no source)
K_MATERIAL_PCT = 5.0


@dataclass(frozen=True)
class KFactorSum:
    """A K-factor with the range of orders it sums and what lies above that range.

    Attributes
    ----------
    k_factor : float
        ``K`` summed over orders 1..h_max, referred to the rms of those orders [-].
    h_max : int
        Highest order summed [-].
    h_available : int
        Highest order in the spectrum given [-].
    above_energy_pct : float
        Share of the squared rms (orders >= 1) carried by orders above ``h_max`` [%].
    above_k_pct : float
        How much the orders above ``h_max`` (up to ``h_available``) would raise K [%].
    material : bool
        ``above_k_pct`` exceeds :data:`K_MATERIAL_PCT`: the figure understates K.
    """

    k_factor: float
    h_max: int
    h_available: int
    above_energy_pct: float
    above_k_pct: float
    material: bool


def k_factor_to_order(i_h_a, h_max: int = 50,
                      material_pct: float = K_MATERIAL_PCT) -> KFactorSum:
    """K-factor summed to a stated order, and whether the spectrum above it matters.

    Parameters
    ----------
    i_h_a : array_like of complex, shape (H + 1,)
        Harmonic phasors [A rms], index 0 = DC, possibly beyond ``h_max``.
    h_max : int
        Highest order summed [-] (the limit tables stop at 50).
    material_pct : float
        Threshold on ``above_k_pct`` [%].

    Returns
    -------
    KFactorSum

    Notes
    -----
    ``K_h = sum_{1..h} I_n^2 n^2 / sum_{1..h} I_n^2`` (see :func:`k_factor`). Because each
    order weighs ``n^2``, orders above 50 that carry well under 1 % of the energy can still
    change K by tens of per cent (a square wave's 1/n spectrum makes K grow without bound
    with the order summed). ``above_k_pct = 100 (K_H - K_h) / K_h`` with H the highest order
    given, and ``above_energy_pct = 100 sum_{n>h} I_n^2 / sum_{n>=1} I_n^2``.

    References
    ----------
    .. [1] UL 1561 / UL 1562, definition of K-factor (from memory).
    .. [2] IEEE Std C57.110-2018 (harmonic loss factor; sums to the highest significant
       order).
    """
    i_h_a = np.asarray(i_h_a, dtype=complex)
    h_avail = i_h_a.shape[-1] - 1
    h = min(int(h_max), h_avail)
    mag2 = np.abs(i_h_a[1:]) ** 2
    total = float(np.sum(mag2))
    if total <= 0:
        return KFactorSum(0.0, h, h_avail, 0.0, 0.0, False)
    k_h = float(k_factor(i_h_a[: h + 1])) if np.sum(mag2[:h]) > 0 else 0.0
    k_all = float(k_factor(i_h_a))
    above_e = 100.0 * float(np.sum(mag2[h:])) / total
    above_k = 100.0 * (k_all - k_h) / k_h if k_h > 0 else (0.0 if k_all == 0 else np.inf)
    return KFactorSum(k_h, h, h_avail, above_e, float(above_k),
                      bool(above_k > material_pct))


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


__all__ = ["tdd_pct", "k_factor", "K_MATERIAL_PCT", "KFactorSum", "k_factor_to_order", "harmonic_loss_factor", "harmonic_loss_factor_stray",
           "ConductorLoading", "conductor_loading"]
