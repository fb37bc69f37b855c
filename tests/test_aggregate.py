"""Checks of fleetpower.pq (polyphase sums, derating) against closed-form results and outside references."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from fleetpower.pq import derating as der
from fleetpower.pq import ieee1459 as ieee
from fleetpower.pq import polyphase as poly
from fleetpower.pq import spectrum as spec

H = 50


def spectrum(**orders):
    """Spectrum of length H+1 from keyword orders, e.g. spectrum(h1=1, h3=0.5j)."""
    s = np.zeros(H + 1, dtype=complex)
    for key, value in orders.items():
        s[int(key[1:])] = value
    return s


def fft_phasors(wave, n_h):
    """Cosine-reference rms phasors of one sampled period, by numpy's FFT (the reference).

    For x(theta) = sqrt(2) |I| cos(h theta + phi), rfft gives X[h] = N/sqrt(2) I e^{j phi},
    so I_h = sqrt(2) X[h] / N; DC is X[0] / N (discrete Fourier series, common practice,
    no source).
    """
    x = np.fft.rfft(wave) / wave.size
    out = np.sqrt(2.0) * x[:n_h]
    out[0] = x[0].real
    return out


# --- rotation into the common frame ------------------------------------------------------


def test_rotation_angles_wye_and_split():
    # h-th harmonic on a phase at angle theta rotates by h*theta (brief's convention;
    # Dugan et al., Electrical Power Systems Quality, ch. 5, from memory).
    h = np.arange(4)
    assert np.allclose(poly.phase_rotation(h, "L2", "wye"), np.exp(-1j * h * 2 * np.pi / 3))
    assert np.allclose(poly.phase_rotation(h, "L3", "wye"), np.exp(+1j * h * 2 * np.pi / 3))
    assert np.allclose(poly.phase_rotation(h, "L2", "split"), [1, -1, 1, -1])
    assert np.allclose(poly.phase_rotation(h, "L1", "wye"), 1.0)
    with pytest.raises(ValueError):
        poly.phase_rotation(1, "L3", "split")


def test_rotation_equals_time_delay_of_waveform():
    # L2 of a wye lags L1 by T/3, so its waveform in the common frame is the own-frame
    # waveform delayed by a third of a period (definition of a 120 deg phase displacement,
    # common practice, no source). numpy roll is the reference.
    rng = np.random.default_rng(1)
    s = rng.normal(size=H + 1) + 1j * rng.normal(size=H + 1)
    s[0] = s[0].real
    n = 600
    own = poly.waveform_from_spectrum(s, n)
    l2 = poly.waveform_from_spectrum(poly.to_common_frame(s, "L2", "wye"), n)
    l3 = poly.waveform_from_spectrum(poly.to_common_frame(s, "L3", "wye"), n)
    assert np.allclose(l2, np.roll(own, n // 3))
    assert np.allclose(l3, np.roll(own, 2 * n // 3))


def test_waveform_against_numpy_fft_and_rms():
    # Round trip through numpy's FFT recovers the phasors; rms from samples equals
    # rms from spectrum (Parseval's theorem, any signals text, from memory).
    rng = np.random.default_rng(2)
    s = rng.normal(size=H + 1) + 1j * rng.normal(size=H + 1)
    s[0] = s[0].real
    wave = poly.waveform_from_spectrum(s, 1024)
    assert np.allclose(fft_phasors(wave, H + 1), s)
    assert np.isclose(np.sqrt(np.mean(wave**2)), poly.rms_from_spectrum(s))


def test_waveform_pure_cosine():
    # I1 = 1 A rms at 0 deg is sqrt(2) cos(theta) (cosine reference, IEEE 1459-2010).
    wave = poly.waveform_from_spectrum(spectrum(h1=1.0), 400)
    theta = 2 * np.pi * np.arange(400) / 400
    assert np.allclose(wave, np.sqrt(2) * np.cos(theta))


# --- neutral current ---------------------------------------------------------------------


def balanced(s):
    return {"L1": s, "L2": s, "L3": s}


def test_balanced_triplen_neutral_is_three_times_phase():
    # Triplen harmonics are zero-sequence and add in the neutral: I_N3 = 3 I_3
    # (Dugan et al., Electrical Power Systems Quality, ch. 5, from memory).
    i3_a = 0.4 * np.exp(1j * 0.7)
    out = poly.neutral_current(balanced(spectrum(h3=i3_a)), "wye")
    assert np.isclose(abs(out.i_h_a[3]), 3 * abs(i3_a))
    assert np.isclose(out.i_rms_a, 3 * abs(i3_a))


def test_balanced_fundamental_and_fifth_cancel():
    # Positive-sequence fundamental and negative-sequence 5th sum to zero in a balanced
    # wye (Dugan et al., ch. 5, from memory).
    out1 = poly.neutral_current(balanced(spectrum(h1=2.0 - 1.0j)), "wye")
    out5 = poly.neutral_current(balanced(spectrum(h5=0.3 + 0.2j)), "wye")
    assert out1.i_rms_a == pytest.approx(0.0, abs=1e-12)
    assert out5.i_rms_a == pytest.approx(0.0, abs=1e-12)


def test_balanced_mixed_spectrum_keeps_only_triplens():
    # Only orders 3, 9, 15, ... survive, each tripled (Dugan et al., ch. 5, from memory).
    rng = np.random.default_rng(3)
    s = np.zeros(H + 1, dtype=complex)
    s[1::2] = rng.normal(size=s[1::2].size) + 1j * rng.normal(size=s[1::2].size)
    out = poly.neutral_current(balanced(s), "wye")
    triplen = (np.arange(H + 1) % 3 == 0) & (np.arange(H + 1) > 0)
    assert np.allclose(out.i_h_a[triplen], 3 * s[triplen])
    assert np.allclose(out.i_h_a[~triplen], 0.0)


def test_unbalanced_fundamental_hand_case():
    # 2 units on L1, 1 on L2, none on L3, 1 A each at the fundamental:
    # |2 + 1 e^{-j120}| = |1.5 - j0.866| = sqrt(2.25 + 0.75) = sqrt(3) = 1.7321 (hand).
    unit = spectrum(h1=1.0)
    out = poly.neutral_current({"L1": poly.sum_phasors([unit], [2]), "L2": unit}, "wye")
    assert np.isclose(abs(out.i_h_a[1]), np.sqrt(3.0))
    assert np.isclose(abs(out.i_h_a[1]), 1.7320508, atol=1e-6)


def test_neutral_time_domain_equals_phasor_and_numpy_fft():
    # KCL at the star point: i_N(t) = i_1(t) + i_2(t) + i_3(t). Reference: waveforms
    # built in each phase's own frame, shifted by T/3 and 2T/3 (np.roll), summed, and
    # analysed with numpy's FFT.
    rng = np.random.default_rng(4)
    spectra = {}
    for p in ("L1", "L2", "L3"):
        s = rng.normal(size=H + 1) + 1j * rng.normal(size=H + 1)
        s[0] = s[0].real
        spectra[p] = s
    n = 1200
    shift = {"L1": 0, "L2": n // 3, "L3": 2 * n // 3}
    wave_n = sum(np.roll(poly.waveform_from_spectrum(s, n), shift[p]) for p, s in spectra.items())
    ref = fft_phasors(wave_n, H + 1)
    by_phasor = poly.neutral_current(spectra, "wye", method="phasor")
    by_time = poly.neutral_current(spectra, "wye", method="time", n_samples=n)
    assert np.allclose(by_phasor.i_h_a, ref)
    assert np.allclose(by_time.i_h_a, ref)
    assert np.isclose(by_phasor.i_rms_a, np.sqrt(np.mean(wave_n**2)))


def test_split_phase_neutral():
    # 120/240 V split phase: L2 = -L1. Equal half-wave-symmetric loads cancel in the
    # neutral; DC and even orders add (KCL with v_L2(t) = v_L1(t - T/2); common practice,
    # no source). Reference: np.roll by half a period.
    s = spectrum(h0=0.1, h1=1.0, h2=0.2j, h3=0.5 - 0.1j)
    out = poly.neutral_current({"L1": s, "L2": s}, "split")
    n = 400
    wave = poly.waveform_from_spectrum(s, n)
    ref = fft_phasors(wave + np.roll(wave, n // 2), H + 1)
    assert np.allclose(out.i_h_a, ref)
    assert np.isclose(out.i_h_a[0], 0.2)
    assert np.isclose(out.i_h_a[2], 0.4j)
    assert np.isclose(abs(out.i_h_a[1]), 0.0)
    assert np.isclose(abs(out.i_h_a[3]), 0.0)


def test_single_phase_neutral_is_line_current():
    # Two-wire circuit: the same current flows out and back (KCL).
    s = spectrum(h1=0.02 + 0.01j, h3=0.015, h5=-0.01j)
    out = poly.neutral_current({"L1": s}, "single")
    assert np.allclose(out.i_h_a, s)
    assert np.isclose(out.i_rms_a, np.sqrt(0.02**2 + 0.01**2 + 0.015**2 + 0.01**2))


# --- distortion indices ------------------------------------------------------------------

SPEC_K = spectrum(h1=1.0, h3=0.5j, h5=-0.2)


def test_thd_and_tdd_hand_case():
    # THD = 100 sqrt(0.25 + 0.04)/1 = 53.852 % (IEEE 519-2014 definition; hand).
    assert spec.thd_pct(SPEC_K) == pytest.approx(100 * np.sqrt(0.29))
    assert spec.thd_pct(SPEC_K) == pytest.approx(53.8516, abs=1e-4)
    # TDD with I_L = 2 A: half of the THD here (IEEE 519-2014 definition; hand).
    assert der.tdd_pct(SPEC_K, 2.0) == pytest.approx(26.9258, abs=1e-4)
    assert np.isnan(spec.thd_pct(spectrum(h3=1.0), no_fundamental=np.nan))
    # No fundamental: 0 % by default (the project's reporting convention, no source).
    assert spec.thd_pct(spectrum(h3=1.0)) == 0.0


def test_k_factor_hand_case():
    # UL 1561 / IEEE C57.110: K = sum I_h^2 h^2 / sum I_h^2
    # = (1 + 0.25*9 + 0.04*25) / (1 + 0.25 + 0.04) = 4.25 / 1.29 = 3.2946 (hand).
    assert der.k_factor(SPEC_K) == pytest.approx(4.25 / 1.29)
    assert der.k_factor(SPEC_K) == pytest.approx(3.2946, abs=1e-4)
    # Normalised to a rated current twice the rms: K scales by 1/4 (definition per unit
    # of rated current, UL 1562, from memory).
    i_r = 2 * poly.rms_from_spectrum(SPEC_K)
    assert der.k_factor(SPEC_K, i_r) == pytest.approx(4.25 / 1.29 / 4)


def test_harmonic_loss_factors_hand_case():
    # IEEE C57.110 F_HL = sum (I_h/I_1)^2 h^2 / sum (I_h/I_1)^2 = 4.25/1.29 (hand).
    assert der.harmonic_loss_factor(SPEC_K) == pytest.approx(3.2946, abs=1e-4)
    # F_HL-STR with exponent 0.8 (IEEE C57.110-2018, from memory):
    # (1 + 0.25*3^0.8 + 0.04*5^0.8)/1.29; 3^0.8 = 2.4082, 5^0.8 = 3.6239 (hand)
    # -> (1 + 0.60205 + 0.14496)/1.29 = 1.74701/1.29 = 1.35427.
    assert der.harmonic_loss_factor_stray(SPEC_K) == pytest.approx(1.35427, abs=1e-4)
    # A pure sinusoid has factor 1 (definition).
    assert der.harmonic_loss_factor(spectrum(h1=3.0)) == pytest.approx(1.0)


def test_k_factor_ignores_scale_and_phase():
    # K and F_HL are ratios of squared magnitudes: invariant under scaling and phase
    # shifts (follows from the IEEE C57.110 formula).
    scaled = 7.5 * SPEC_K * np.exp(1j * np.arange(H + 1))
    assert der.k_factor(scaled) == pytest.approx(der.k_factor(SPEC_K))
    assert der.harmonic_loss_factor(scaled) == pytest.approx(der.harmonic_loss_factor(SPEC_K))


# --- IEC 61000-3-6 summation law ---------------------------------------------------------


def test_iec_exponents():
    # alpha = 1 (h < 5), 1.4 (5..10), 2 (h > 10): IEC/TR 61000-3-6:2008, from memory.
    assert list(poly.iec61000_3_6_exponent([1, 3, 4, 5, 10, 11, 50])) == [1, 1, 1, 1.4, 1.4, 2, 2]


def test_iec_alpha_one_is_arithmetic_alpha_two_is_rss():
    a = spectrum(h3=0.3, h7=1.0, h13=0.6)
    b = spectrum(h3=0.4j, h7=1.0j, h13=-0.8)
    res = poly.sum_iec61000_3_6([a, b])
    # h = 3: alpha = 1 -> 0.3 + 0.4 = 0.7 (arithmetic sum, hand)
    assert res.i_h_a[3] == pytest.approx(0.7)
    # h = 13: alpha = 2 -> sqrt(0.36 + 0.64) = 1.0 (root-sum-square, hand)
    assert res.i_h_a[13] == pytest.approx(1.0)
    # h = 7: alpha = 1.4 -> (1 + 1)^(1/1.4) = 2^0.714286 = 1.64067 (hand)
    assert res.i_h_a[7] == pytest.approx(1.64067, abs=1e-5)
    assert "61000-3-6" in res.method


def test_iec_counts_coherent_and_independent():
    # Three identical units at h = 13 (alpha = 2): coherent 3*I; independent sqrt(3)*I
    # (law applied per source, IEC/TR 61000-3-6, from memory).
    u = spectrum(h13=0.5)
    assert poly.sum_iec61000_3_6([u], [3]).i_h_a[13] == pytest.approx(1.5)
    ind = poly.sum_iec61000_3_6([u], [3], units_of_a_design="independent")
    assert ind.i_h_a[13] == pytest.approx(0.5 * np.sqrt(3))


# --- powers ------------------------------------------------------------------------------


def test_leading_fleet_has_negative_q1():
    # S = V conj(I); a current leading the voltage gives Q < 0 (IEEE 1459-2010 sign,
    # capacitive reactive power negative; from memory). Capacitive dropper: 20 mA at +80 deg.
    v = spectrum(h1=230.0)
    unit = spectrum(h1=0.02 * np.exp(1j * np.deg2rad(80)), h3=0.002)
    fleet = poly.sum_phasors([unit, unit * 0.5], [1000, 400])
    s1 = ieee.complex_power_va(v, fleet)[1]
    assert s1.imag < 0
    # Hand: Q1 = -230 * 0.02 * sin(80 deg) * (1000 + 200) = -5436.1 var
    assert s1.imag == pytest.approx(-230 * 0.02 * np.sin(np.deg2rad(80)) * 1200)
    q_unit = ieee.complex_power_va(v, unit)[1].imag
    tot = ieee.power_totals(
        {"L1": 1.0, "L2": 1.0},
        {"L1": 500 * q_unit, "L2": 300 * q_unit},
        {"L1": 230.0, "L2": 230.0},
        {"L1": 1.0, "L2": 1.0},
    )
    assert tot.q1_var < 0


def test_power_totals_balanced_sinusoid_hand_case():
    # Balanced wye, 230 V, 10 A at PF 0.8 lagging, no neutral current:
    # P = 3*230*10*0.8 = 5520 W, Q1 = 3*230*10*0.6 = 4140 var, S = 6900 VA
    # (textbook three-phase power; IEEE 1459-2010 S_e = S for balanced sinusoidal).
    ph = ("L1", "L2", "L3")
    tot = ieee.power_totals(
        dict.fromkeys(ph, 1840.0),
        dict.fromkeys(ph, 1380.0),
        dict.fromkeys(ph, 230.0),
        dict.fromkeys(ph, 10.0),
        i_n_rms_a=0.0,
    )
    assert tot.p_w == pytest.approx(5520.0)
    assert tot.q1_var == pytest.approx(4140.0)
    assert tot.s_arith_va == pytest.approx(6900.0)
    assert tot.s_e_va == pytest.approx(6900.0)
    assert tot.pf_arith == pytest.approx(0.8)
    assert tot.dpf == pytest.approx(0.8)
    assert tot.per_phase.loc["L2", "pf"] == pytest.approx(0.8)


def test_effective_apparent_power_penalises_neutral():
    # IEEE 1459-2010 four-wire: I_e = sqrt((Ia^2+Ib^2+Ic^2+In^2)/3) (from memory).
    # Balanced triplen-rich load: Ia = Ib = Ic = 1 A, In = 1.5 A ->
    # I_e = sqrt((3 + 2.25)/3) = 1.3229 A, S_e = 3*230*1.3229 = 912.8 VA (hand).
    ph = ("L1", "L2", "L3")
    tot = ieee.power_totals(
        dict.fromkeys(ph, 150.0),
        dict.fromkeys(ph, 0.0),
        dict.fromkeys(ph, 230.0),
        dict.fromkeys(ph, 1.0),
        i_n_rms_a=1.5,
    )
    assert tot.s_e_va == pytest.approx(3 * 230 * np.sqrt(5.25 / 3))
    assert tot.s_e_va == pytest.approx(912.8, abs=0.1)
    assert tot.s_e_va > tot.s_arith_va
    assert tot.pf_e < tot.pf_arith


def test_conductor_loading():
    # used % = 100 I / rating; 80 % "high" threshold is common practice, no source.
    out = der.conductor_loading([5.0, 8.5, 12.0], 10.0)
    assert np.allclose(out.used_pct, [50.0, 85.0, 120.0])
    assert list(out.verdict) == ["ok", "high", "over"]


# --- conservation: fleet of N identical units = N x one unit -----------------------------

complex_values = st.complex_numbers(max_magnitude=10.0, allow_nan=False, allow_infinity=False)


@settings(max_examples=60, deadline=None)
@given(
    values=st.lists(complex_values, min_size=H + 1, max_size=H + 1),
    n=st.integers(min_value=1, max_value=5000),
    p_unit_w=st.floats(min_value=0.01, max_value=10.0),
    q_unit_var=st.floats(min_value=-10.0, max_value=10.0),
)
def test_fleet_equals_sum_of_units(values, n, p_unit_w, q_unit_var):
    # Conservation (KCL per harmonic, additivity of P and Q; IEEE 1459-2010, from memory):
    # N identical units draw N times one unit's phasors, P and Q1; rms scales by N,
    # shape factors (THD, K) are unchanged.
    unit = np.asarray(values, dtype=complex)
    unit[0] = unit[0].real
    unit[1] = unit[1] + 1.0  # keep a non-zero fundamental
    fleet = poly.sum_phasors([unit], [n])
    assert np.allclose(fleet, n * unit)
    few = min(n, 40)
    assert np.allclose(poly.sum_phasors([unit] * few), few * unit)
    assert np.isclose(poly.rms_from_spectrum(fleet), n * poly.rms_from_spectrum(unit))
    assert np.isclose(spec.thd_pct(fleet), spec.thd_pct(unit))
    assert np.isclose(der.k_factor(fleet), der.k_factor(unit))
    # Balanced wye: neutral of N per phase = N x neutral of one per phase.
    one = poly.neutral_current(balanced(unit), "wye")
    many = poly.neutral_current(balanced(fleet), "wye")
    assert np.allclose(many.i_h_a, n * one.i_h_a)
    # Totals: system P and Q1 = sum over phases of N units each.
    ph = ("L1", "L2", "L3")
    i_rms = float(poly.rms_from_spectrum(fleet))
    tot = ieee.power_totals(
        dict.fromkeys(ph, n * p_unit_w),
        dict.fromkeys(ph, n * q_unit_var),
        dict.fromkeys(ph, 230.0),
        dict.fromkeys(ph, i_rms),
        i_n_rms_a=many.i_rms_a,
    )
    assert tot.p_w == pytest.approx(3 * n * p_unit_w)
    assert tot.q1_var == pytest.approx(3 * n * q_unit_var, abs=1e-9 * n)
    assert tot.s_arith_va == pytest.approx(3 * 230.0 * n * float(poly.rms_from_spectrum(unit)))


def test_power_totals_single_and_split_apparent_power():
    # Single phase: S_e = V I (IEEE 1459-2010 single-phase definitions, from memory).
    # 230 V x 0.05 A = 11.5 VA; P = 2 W -> PF = 0.1739 (hand).
    one = ieee.power_totals({"L1": 2.0}, {"L1": -11.0}, {"L1": 230.0}, {"L1": 0.05}, system="single")
    assert one.s_e_va == pytest.approx(11.5)
    assert one.pf_arith == pytest.approx(2.0 / 11.5)
    # DPF = P1 / |P1 + jQ1| = 2 / sqrt(4 + 121) = 0.17889 (hand; IEEE 1459-2010 cos theta_1)
    assert one.dpf == pytest.approx(0.17889, abs=1e-5)
    # Split phase: IEEE 1459 gives no effective apparent power; reported as None.
    split = ieee.power_totals(
        {"L1": 1.0, "L2": 1.0},
        {"L1": 0.0, "L2": 0.0},
        {"L1": 120.0, "L2": 120.0},
        {"L1": 0.01, "L2": 0.01},
        system="split",
    )
    assert split.s_e_va is None
    assert np.isnan(split.pf_e)
    with pytest.raises(ValueError):
        poly.neutral_current({"L3": spectrum(h1=1.0)}, "split")
