"""Capacitor ageing and the charge-pump closed form, against hand algebra.

Sources beside each check. The engine-level acceptance (deliverable current falls with
capacitance as the closed form predicts, within 2 %) needs the batch path through
simulate and lands with the spread verb.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from fleetpower.spread.ageing import (
    DEFAULT_LOSS_PER_YEAR,
    capacitance_at_year_f,
    charge_pump_current_a,
    loss_rate_per_year,
)


def test_charge_pump_worked_example():
    # Worked by hand: 230 V, 50 Hz, 470 nF, V_Z = 10 V, V_F = 0.7 V
    # Vpk = 325.27 V; swing = 2 * 325.27 - 10.7 = 639.84 V; Q = 470e-9 * 639.84
    # = 300.7 uC per cycle; I = 50 * Q = 15.04 mA
    i = charge_pump_current_a(50.0, 470e-9, 230.0 * math.sqrt(2), 10.0, 0.7)
    assert i == pytest.approx(15.036e-3, rel=1e-3)
    # linear in C and in f (closed form): halving either halves the current
    assert charge_pump_current_a(50.0, 235e-9, 230.0 * math.sqrt(2), 10.0, 0.7) == \
        pytest.approx(i / 2, rel=1e-12)
    assert charge_pump_current_a(25.0, 470e-9, 230.0 * math.sqrt(2), 10.0, 0.7) == \
        pytest.approx(i / 2, rel=1e-12)
    # no swing left, no current (clamped at zero)
    assert charge_pump_current_a(50.0, 1e-6, 5.0, 10.0, 0.7) == 0.0


def test_charge_pump_against_the_ideal_clamped_capacitor_integrated_numerically():
    # Independent of the closed form: integrate the capacitor current of the ideal
    # circuit over one settled cycle (node clamped at +V_Z / -V_F, floating between), and
    # count the forward charge. Time grid fine enough that the sum is exact to 1e-4.
    f, c, vpk, vz, vf = 50.0, 1e-6, 325.0, 12.0, 0.7
    t = np.linspace(0.0, 3.0 / f, 600_001)
    vs = vpk * np.sin(2 * np.pi * f * t)
    vc = -(vpk - vf)  # start at a negative peak's state (any start settles in 1 cycle)
    fwd = np.zeros_like(t)
    for k in range(1, t.size):
        va = vs[k] - vc
        if va > vz:  # forward clamp conducts: node held at V_Z
            new = vs[k] - vz
        elif va < -vf:  # reverse clamp conducts: node held at -V_F
            new = vs[k] + vf
        else:  # node floats, capacitor voltage constant
            new = vc
        fwd[k] = max(new - vc, 0.0) * c if va > vz else 0.0
        vc = new
    last = t >= 2.0 / f
    i_mean = fwd[last].sum() * f
    assert i_mean == pytest.approx(charge_pump_current_a(f, c, vpk, vz, vf), rel=1e-4)


def test_capacitance_at_year():
    # linear loss (module Notes): 1 uF at 2 %/year -> 0.8 uF at year 10, 0 after 50
    assert capacitance_at_year_f(1e-6, 10, 0.02) == pytest.approx(0.8e-6)
    np.testing.assert_allclose(capacitance_at_year_f(1e-6, [0, 5, 60], 0.02),
                               [1e-6, 0.9e-6, 0.0])
    assert capacitance_at_year_f(1e-6, 1) == pytest.approx(1e-6 * (1 - DEFAULT_LOSS_PER_YEAR))
    with pytest.raises(ValueError):
        capacitance_at_year_f(1e-6, -1)


def test_voltage_acceleration():
    # at the reference stress (230 V on 275 V ac) the stated rate is unchanged
    assert loss_rate_per_year(0.01, 230.0, 275.0) == pytest.approx(0.01)
    # inverse power law, n = 7: (1.1)^7 = 1.9487 (hand computation)
    assert loss_rate_per_year(0.01, 253.0, 275.0) == pytest.approx(0.019487, rel=1e-4)
    # a higher rating ages slower; no rating, no acceleration
    assert loss_rate_per_year(0.01, 230.0, 310.0) < 0.01
    assert loss_rate_per_year(0.01) == 0.01
    with pytest.raises(ValueError):
        loss_rate_per_year(-0.01)
