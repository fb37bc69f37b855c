"""fleetpower.pq (spectrum, IEEE 1459) against closed-form Fourier series and IEEE 1459 definitions.

Sources of the expected values are named beside each check; "from memory" marks a
series recalled from the standard tables rather than looked up.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import tolerances as tol
from hypothesis import given, settings
from hypothesis import strategies as st

from fleetpower.pq import ieee1459 as ieee
from fleetpower.pq import spectrum as spec

N = 4096  # samples per period
THETA = 2.0 * np.pi * np.arange(N) / N


def test_half_wave_rectified_sine_series():
    """x = A max(sin t, 0) = A/pi + (A/2) sin t + sum_{n even} 2A/(pi(1-n^2)) cos(n t).

    Standard Fourier series tables (e.g. CRC Standard Mathematical Tables), from memory:
    DC A/pi, fundamental amplitude A/2 (a sine), even harmonics 2A/(pi(1-n^2)) as
    cosines, odd harmonics from 3 on zero.
    """
    a = 3.7
    x = a * np.maximum(np.sin(THETA), 0.0)
    ph = spec.phasors(x)
    assert ph[0].real == pytest.approx(a / math.pi, rel=tol.FFT_REL)
    # sin t = cos(t - 90 deg): rms phasor (A/2)/sqrt 2 at -90 deg (cosine reference)
    assert ph[1] == pytest.approx(a / 2 / math.sqrt(2) * np.exp(-0.5j * np.pi), rel=tol.FFT_REL)
    for n in range(2, 41, 2):
        expect = 2 * a / (math.pi * (1 - n * n)) / math.sqrt(2)  # real, negative: a cosine
        assert abs(ph[n] - expect) < tol.FFT_REL * a, n
    for n in range(3, 41, 2):
        assert abs(ph[n]) < tol.FFT_REL * a, n


def test_half_wave_rectified_current_against_its_voltage():
    """Through power_quality: phases relative to the voltage fundamental, DC reported."""
    a = 2.0
    v = 325.0 * np.sin(THETA)
    i = a * np.maximum(np.sin(THETA), 0.0)
    q = ieee.power_quality(v, i)
    # same handbook series as above; the fundamental is in phase with v
    assert q.i_h_a[1] == pytest.approx(a / 2 / math.sqrt(2), rel=tol.FFT_REL)
    assert q.i_dc_a == pytest.approx(a / math.pi, rel=tol.FFT_REL)
    assert q.dpf == pytest.approx(1.0, abs=tol.EXACT)
    # cos(n t) relative to a voltage at -90 deg: referred to n x (-90 deg) the phasor of
    # the n-th harmonic is 2A/(pi(1-n^2))/sqrt2 * e^{j n 90deg}: real for n = 2, 4, ...
    for n in (2, 4, 6, 8):
        expect = 2 * a / (math.pi * (1 - n * n)) / math.sqrt(2) * np.exp(0.5j * np.pi * n)
        assert abs(q.i_h_a[n] - expect) < tol.FFT_REL * a
    # P = mean(v i) = Vpk A / 4 (only the fundamental carries power: (Vpk/sqrt2)(A/2/sqrt2))
    assert q.p_w == pytest.approx(325.0 * a / 4.0, rel=tol.FFT_REL)
    # rms of a half-wave rectified sine is A/2 (standard tables, from memory)
    assert q.i_rms_a == pytest.approx(a / 2.0, rel=1e-12)


def test_square_wave_series_and_thd():
    """Square wave of amplitude A: odd harmonics 4A/(pi n) (sine terms), even zero.

    Standard Fourier series tables (e.g. CRC Standard Mathematical Tables), from memory.
    THD of the ideal square wave = sqrt(pi^2/8 - 1) = 48.3 % (from the same series:
    sum over odd n >= 3 of 1/n^2 = pi^2/8 - 1).
    """
    n_samp = 65536
    t = 2.0 * np.pi * (np.arange(n_samp) + 0.5) / n_samp  # no sample on a jump
    a = 1.5
    x = a * np.sign(np.sin(t))
    ph = spec.phasors(x)
    # half-sample offset: the sampled wave is a square wave delayed by half a sample
    shift = np.exp(-1j * np.arange(ph.shape[0]) * np.pi / n_samp)
    ph = ph * shift
    for n in range(1, 50, 2):
        expect = 4 * a / (math.pi * n) / math.sqrt(2) * np.exp(-0.5j * np.pi)
        assert abs(ph[n] - expect) < tol.SQUARE_REL * abs(expect) + 1e-12, n
    for n in range(2, 50, 2):
        assert abs(ph[n]) < 1e-9 * a, n
    thd_all = float(spec.thd_pct(ph, h_max=n_samp // 2 - 1))
    assert thd_all == pytest.approx(100 * math.sqrt(math.pi**2 / 8 - 1), rel=tol.SQUARE_REL)
    assert 100 * math.sqrt(math.pi**2 / 8 - 1) == pytest.approx(48.3, abs=0.05)
    # the default range stops at h = 50: the series summed to n = 49
    partial = 100 * math.sqrt(sum(1.0 / n**2 for n in range(3, 50, 2)))
    assert float(spec.thd_pct(ph)) == pytest.approx(partial, rel=tol.SQUARE_REL)
    assert partial < thd_all  # the truncated sum misses the tail


def test_resistive_load_has_unity_power_factors():
    # v and i = v/R in phase: PF = DPF = 1, THD = 0, Q1 = 0 (IEEE 1459 definitions)
    v = 230.0 * math.sqrt(2) * np.sin(THETA + 0.3)
    r = 47.0
    q = ieee.power_quality(v, v / r)
    assert q.pf == pytest.approx(1.0, abs=tol.EXACT)
    assert q.dpf == pytest.approx(1.0, abs=tol.EXACT)
    assert q.thd_i_pct == pytest.approx(0.0, abs=tol.EXACT)
    assert q.thd_v_pct == pytest.approx(0.0, abs=tol.EXACT)
    assert q.q1_var == pytest.approx(0.0, abs=tol.EXACT * q.s_va)
    assert q.p_w == pytest.approx(230.0**2 / r, rel=1e-12)  # P = V^2/R


def test_capacitor_current_is_reactive_and_negative_q():
    """i = C dv/dt leads v by 90 deg: P = 0, PF = 0, Q1 = -V^2 w C (IEEE 1459 sign)."""
    vrms, f, cap = 120.0, 60.0, 3.3e-6
    w = 2 * math.pi * f
    v = vrms * math.sqrt(2) * np.sin(THETA)
    i = cap * w * vrms * math.sqrt(2) * np.cos(THETA)
    q = ieee.power_quality(v, i)
    assert q.pf == pytest.approx(0.0, abs=tol.EXACT)
    assert q.dpf == pytest.approx(0.0, abs=tol.EXACT)
    assert q.q1_var < 0.0
    # Q = V^2 / X_C with X_C = 1/(w C) (circuit theory)
    assert q.q1_var == pytest.approx(-(vrms**2) * w * cap, rel=1e-12)
    # leading current: +90 deg relative to the voltage fundamental
    table = q.harmonics()
    assert table.loc[table.h == 1, "phase_deg"].iloc[0] == pytest.approx(90.0, abs=1e-9)


@pytest.mark.parametrize("phi", [0.0, 0.7, -2.1])
def test_phase_is_relative_to_voltage_fundamental(phi):
    """Shifting both waveforms in time leaves every reported phase unchanged."""
    v = 100.0 * np.cos(THETA + phi)
    i = 2.0 * np.cos(THETA + phi - math.radians(30)) + 0.5 * np.cos(3 * (THETA + phi) + 1.0)
    q = ieee.power_quality(v, i)
    ph = q.harmonics().set_index("h")["phase_deg"]
    assert ph[1] == pytest.approx(-30.0, abs=1e-9)  # lagging 30 deg
    assert ph[3] == pytest.approx(math.degrees(1.0), abs=1e-9)
    assert q.dpf == pytest.approx(math.cos(math.radians(30)), rel=1e-12)
    assert q.q1_var > 0.0  # lagging (inductive) current: Q1 > 0 (IEEE 1459 sign)


@settings(max_examples=60, deadline=None)
@given(
    dc=st.floats(-5, 5),
    amps=st.lists(st.floats(0, 10), min_size=1, max_size=50),
    phases=st.lists(st.floats(-math.pi, math.pi), min_size=50, max_size=50),
)
def test_parseval_for_band_limited_signals(dc, amps, phases):
    """Rms from samples = root-sum-square of the phasors incl. DC (Parseval's theorem)."""
    n = 1024
    th = 2 * np.pi * np.arange(n) / n
    x = dc + sum(a * np.cos(h * th + phases[h - 1]) for h, a in enumerate(amps, start=1))
    v = np.sin(th)
    q = ieee.power_quality(v, x)
    rms = math.sqrt(float(np.mean(x * x)))
    rss = math.sqrt(float(np.sum(np.abs(q.i_h_a) ** 2)))
    assert q.i_rms_a == pytest.approx(rms, rel=1e-12, abs=1e-12)
    assert rss == pytest.approx(rms, rel=1e-9, abs=1e-9)
    # each phasor's magnitude is its cosine's amplitude / sqrt 2 (definition of rms)
    mags = np.abs(q.i_h_a[1 : len(amps) + 1])
    assert np.allclose(mags, np.array(amps) / math.sqrt(2), rtol=1e-9, atol=1e-9)
    assert q.i_dc_a == pytest.approx(dc, abs=1e-9)


def test_an_order_at_rounding_level_has_no_phase():
    # A square wave has only odd orders, |I_h| = I_1 / h (closed-form Fourier series); its
    # even orders come out of the FFT at rounding level (~1e-16 of I1), whose angle is
    # arbitrary: the table gives those no phase (NaN; null in --json) and keeps the odd
    # orders' phases, down to the floor PHASE_FLOOR_OF_I1 (common practice, no source).
    n = 2048
    t = np.arange(n) / n
    i = np.where(t < 0.5, 1.0, -1.0)
    _, ih = spec.phasors_vs_voltage(np.sin(2 * np.pi * t), i)
    cols = spec.harmonic_columns(ih)
    odd = cols["h"] % 2 == 1
    assert np.all(np.isfinite(cols["phase_deg"][odd]))
    assert np.all(np.isnan(cols["phase_deg"][~odd]))
    assert np.all(cols["i_rms_a"][~odd] < 1e-12 * cols["i_rms_a"][0])
    # just above the floor an order keeps its phase; nothing at all: no phase anywhere
    ih2 = np.zeros(51, complex)
    ih2[1], ih2[3] = 1.0, 2e-9j
    assert spec.harmonic_columns(ih2)["phase_deg"][2] == pytest.approx(90.0)
    assert np.all(np.isnan(spec.harmonic_columns(np.zeros(51, complex))["phase_deg"]))
