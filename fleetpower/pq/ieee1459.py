"""IEEE 1459 power quantities: of one voltage/current pair, and of a polyphase system.

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

Owns: :class:`PowerQuality` and :func:`power_quality` (one sampled v/i pair),
:func:`complex_power_va`, :class:`PowerTotals` and :func:`power_totals` (per phase and
system totals). May import the rest of ``pq`` only; nothing else of fleetpower.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

from .._records import frozen
from .polyphase import system_phases
from .spectrum import H_MAX, harmonic_table, phasors, phasors_vs_voltage, thd_pct

if TYPE_CHECKING:  # pragma: no cover  (pandas is imported where a DataFrame is built)
    import pandas as pd


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


def power_quality_rows(v_v: np.ndarray, i_a: np.ndarray) -> list[PowerQuality]:
    """:func:`power_quality` of each row of a batch, with array operations over the batch.

    Parameters
    ----------
    v_v, i_a : ndarray, shape (batch, n)
        One period of voltage [V] and current [A] samples per row.

    Returns
    -------
    list of PowerQuality
        Row by row the figures of :func:`power_quality` (the same operations along each
        row, equal to rounding: checked in ``tests/test_analysis.py``) for a tenth of the
        per-call overhead: a spread solves thousands of short waveforms.

    Notes
    -----
    As :func:`power_quality`, whose Notes derive each quantity.

    References
    ----------
    .. [1] IEEE Std 1459-2010, clause 3.2.2, as in :func:`power_quality`.
    """
    v = np.asarray(v_v, dtype=float)
    i = np.asarray(i_a, dtype=float)
    if v.shape != i.shape or v.ndim != 2:
        raise ValueError("v_v and i_a must be 2-D arrays of equal shape")
    if not (np.all(np.isfinite(v)) and np.all(np.isfinite(i))):
        raise ValueError("voltage or current samples contain NaN or infinity")
    # the orders reported (0..H_MAX) only: the same values as every order, sliced
    vh = phasors(v, H_MAX)
    ih = phasors(i, H_MAX)
    ref = np.where(np.abs(vh[:, 1]) > 0, np.angle(vh[:, 1]), 0.0)
    rot = np.exp(-1j * ref[:, None] * np.arange(vh.shape[-1]))
    vh, ih = vh * rot, ih * rot
    v_rms = np.sqrt(np.mean(v * v, axis=-1))
    i_rms = np.sqrt(np.mean(i * i, axis=-1))
    i_peak = np.max(np.abs(i), axis=-1)
    p = np.mean(v * i, axis=-1)
    v1 = np.abs(vh[:, 1])
    i1 = np.abs(ih[:, 1])
    s1c = vh[:, 1] * np.conj(ih[:, 1])
    # the derived figures over the batch, each the same IEEE 754 operation as the scalar
    # path's (products, quotients and square roots are correctly rounded in both)
    s_va = v_rms * i_rms
    s1_va = v1 * i1
    i_h_rms = np.sqrt(np.maximum(i_rms * i_rms - i1 * i1, 0.0))
    has_i, has_s, has_s1 = i_rms > 0, s_va > 0, s1_va > 0
    crest = np.where(has_i, i_peak / np.where(has_i, i_rms, 1.0), 0.0)
    pf = np.where(has_s, p / np.where(has_s, s_va, 1.0), 1.0)
    dpf = np.where(has_s1, s1c.real / np.where(has_s1, s1_va, 1.0), 1.0)
    # per row in Python floats (lists: numpy's scalars cost a call each)
    columns = zip(v_rms.tolist(), i_rms.tolist(), i_peak.tolist(), crest.tolist(),
                  p.tolist(), s_va.tolist(), np.sqrt(np.maximum(s_va * s_va - p * p,
                                                                0.0)).tolist(),
                  v1.tolist(), i1.tolist(), s1c.real.tolist(), s1c.imag.tolist(),
                  s1_va.tolist(), (v1 * i_h_rms).tolist(), pf.tolist(), dpf.tolist(),
                  thd_pct(ih).tolist(), thd_pct(vh).tolist(), ih[:, 0].real.tolist(),
                  list(ih), list(vh), strict=True)
    out = []
    for (vr, ir, pk, cf, pw, s, n, v1b, i1b, p1, q1, s1, d_i, pf_b, dpf_b, thd_i, thd_v,
         i_dc, ih_b, vh_b) in columns:
        out.append(frozen(PowerQuality, dict(
            v_rms_v=vr, i_rms_a=ir, i_peak_a=pk, crest_factor=cf, p_w=pw, s_va=s,
            n_var=n, v1_rms_v=v1b, i1_rms_a=i1b, p1_w=p1, q1_var=q1, s1_va=s1,
            d_i_var=d_i, pf=pf_b, dpf=dpf_b, thd_i_pct=thd_i, thd_v_pct=thd_v,
            i_dc_a=i_dc, i_h_a=ih_b, v_h_v=vh_b)))
    return out


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
    import pandas as pd

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


__all__ = ["PowerQuality", "power_quality", "power_quality_rows", "complex_power_va", "PowerTotals", "power_totals"]
