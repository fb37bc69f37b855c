"""Acceptance of the steady-state engine against an independent brute-force model.

The engine (shooting-Newton, trapezoidal rule, 2048 samples/cycle; fleetpower.simulate
and fleetpower.engine.solver) is compared with ``tests/reference_circuits.py``: the same
circuits written again from their physical description, integrated from t = 0 with
scipy's stiff Radau integrator (rtol 1e-9) until the line current repeats, sampled at
4096 points and analysed with numpy.fft directly. Tolerances: tests/tolerances.py.
"""

from __future__ import annotations

import functools
import math

import numpy as np
import pytest
import reference_circuits as rc
import tolerances as tol

from fleetpower import simulate, unit
from fleetpower.engine.devices import diode_saturation_current_a
from fleetpower.io.design_file import design_from_dict
from fleetpower.topologies.mains_transformer import transformer_model

#: every reference circuit and state (tests/reference_circuits.py)
CASES = rc.REFERENCE_CASES
IDS = [f"{k}/{s}" for k, s in CASES]


@functools.cache
def design(key):
    return rc.design(key)


@functools.cache
def engine(key, state):
    (res,) = simulate.simulate(design(key), [state])
    return res


@functools.cache
def reference(key, state, load_a=None):
    return rc.simulate_reference(design(key), state, load_a=load_a)


@pytest.fixture(params=CASES, ids=IDS)
def pair(request):
    key, state = request.param
    return key, engine(key, state), reference(key, state)


# ---------------------------------------------------------------------------------------
# the reference is itself settled and conserves energy
# ---------------------------------------------------------------------------------------
def test_reference_is_periodic_and_balanced(pair):
    _, _, ref = pair
    # the brute force stopped because its line current repeats from cycle to cycle
    assert ref.cycle_change < tol.REF_CYCLE_CHANGE
    # its own books close: what comes in at the terminals is delivered, dissipated or (~0)
    # stored (the source resistance's loss is before the terminals)
    out = ref.delivered_w + sum(ref.losses_w.values())
    assert out == pytest.approx(ref.p_w, rel=tol.REF_BALANCE)


# ---------------------------------------------------------------------------------------
# issue acceptance: P, I rms, h1..h15, energy balance
# ---------------------------------------------------------------------------------------
def test_active_power(pair):
    _, eng, ref = pair
    assert eng.pq.p_w == pytest.approx(ref.p_w, rel=tol.REL_P)


def test_rms_current(pair):
    _, eng, ref = pair
    assert eng.pq.i_rms_a == pytest.approx(ref.i_rms_a, rel=tol.REL_I_RMS)


def test_harmonic_phasors(pair):
    """h = 0..15 as complex phasors (magnitude and phase to the voltage fundamental)."""
    _, eng, ref = pair
    h = np.arange(tol.H_COMPARED + 1)
    err = np.abs(eng.pq.i_h_a[h] - ref.i_h_a[h]) / ref.i1_rms_a
    assert err.max() < tol.HARMONIC_OF_I1, f"worst h = {int(np.argmax(err))}: {err.max():.2e}"
    # and the comparison is not vacuous: the fundamental is the reference's
    assert abs(eng.pq.i_h_a[1]) == pytest.approx(ref.i1_rms_a, rel=tol.HARMONIC_OF_I1)


def test_energy_balance_closes(pair):
    _, eng, ref = pair
    b = eng.balance
    assert abs(b.residual_pct) < tol.BALANCE_PCT
    # the engine's delivered + losses also account for the *reference's* input power
    out = b.delivered_w + b.losses_w
    assert 100.0 * abs(out - ref.p_w) / ref.p_w < tol.BALANCE_PCT


def test_loss_budget_matches_reference(pair):
    key, eng, ref = pair
    budget = tol.LOSS_OF_P_IN * ref.p_w
    assert eng.balance.delivered_w == pytest.approx(ref.delivered_w, abs=budget)
    assert eng.balance.source_resistance_w == pytest.approx(ref.source_resistance_w, abs=budget)
    losses = dict(eng.losses_w)
    if "dropper resistor" in losses:  # a resistive dropper names its series resistor so
        losses["series resistor"] = losses.pop("dropper resistor")
    for name, value in ref.losses_w.items():
        assert losses.get(name, 0.0) == pytest.approx(value, abs=budget), name
    assert set(losses) <= set(ref.losses_w), set(losses) - set(ref.losses_w)


# ---------------------------------------------------------------------------------------
# trade facts
# ---------------------------------------------------------------------------------------
@pytest.mark.parametrize("key", ["dropper-half-wave", "dropper-bridge"])
def test_capacitive_dropper_power_factor_is_low(key):
    # a capacitive dropper draws a nearly reactive current: PF < 0.1
    # (common practice, no source); the reference agrees
    for state in design(key).states:
        eng = engine(key, state)
        ref = reference(key, state)
        assert 0.0 < eng.pq.pf < tol.DROPPER_PF_MAX
        assert ref.p_w / (eng.pq.v_rms_v * ref.i_rms_a) < tol.DROPPER_PF_MAX
        # capacitive: the fundamental current leads, Q1 < 0 (IEEE 1459 sign)
        assert eng.pq.q1_var < 0.0


def test_half_wave_resistive_dropper_draws_dc():
    # without a series capacitor a half-wave rectifier draws a DC current from the mains;
    # its size is the reference's (checked with h = 0 above), and is not negligible
    eng = engine("resistive-half-wave", "active")
    ref = reference("resistive-half-wave", "active")
    assert eng.pq.i_dc_a < 0.0 and ref.i_dc_a < 0.0  # the positive half is clamped
    assert abs(eng.pq.i_dc_a) > 0.01 * eng.pq.i_rms_a


def test_reactance_and_rule_of_thumb_for_3u3_at_60hz():
    d = design("dropper-half-wave")  # 3.3 uF, 120 V, 60 Hz
    hand = unit.hand_estimate(d, simulated_max_a=0.0)
    # X_C of 3.3 uF at 60 Hz is about 803 ohm (common practice, no source)
    assert hand.xc_ohm == pytest.approx(803.0, abs=1.0 + tol.XC_QUOTED_OHM)
    # the half-wave rule of thumb I = V / (2 X_C) gives 74.6 mA (common practice, no source)
    assert hand.hand_estimate_a == pytest.approx(74.6e-3, abs=tol.I_QUOTED_A)
    # the mean of a half-wave rectified sine is I_pk / pi (handbook: mean of a half-wave
    # rectified sine, e.g. CRC Standard Mathematical Tables, from memory), i.e. the rule
    # of thumb times 2 sqrt(2) / pi
    assert hand.sine_average_a == pytest.approx(
        hand.hand_estimate_a * 2.0 * math.sqrt(2.0) / math.pi, rel=1e-12
    )


def test_half_wave_deliverable_current_bounds():
    """Simulated deliverable current against closed-form upper bounds and the reference.

    Upper bounds, in order: the ideal charge pump f C (2 Vpk - Vz - Vf) (closed form
    derived in the docstring of fleetpower.topologies.capacitive_dropper.charge_pump_limit_a), then the sine
    average, then the 74.6 mA rule of thumb. Lower bound: the 20 mA 'active' load, which
    the Radau reference holds in regulation (reservoir minimum above 5 V + 2 V dropout).
    """
    d = design("dropper-half-wave")
    parts, mains, out = d.parts, d.mains, d.output
    simulated = unit.max_deliverable_current_a(d)
    hand = unit.hand_estimate(d, simulated)
    f, cap = mains.frequency, parts.series_capacitance
    vpk = math.sqrt(2.0) * mains.voltage
    pump = f * cap * (2.0 * vpk - parts.zener_voltage - parts.diode.forward_voltage)
    assert hand.charge_pump_a == pytest.approx(pump, rel=1e-12)
    assert simulated < pump < hand.sine_average_a < hand.hand_estimate_a
    assert hand.hand_estimate_a == pytest.approx(74.6e-3, abs=tol.I_QUOTED_A)  # as above
    ref = reference("dropper-half-wave", "active")
    load = d.load_current_a("active")
    assert ref.v_o_v.min() > out.voltage + out.dropout  # the reference regulates 20 mA
    assert simulated >= load


# ---------------------------------------------------------------------------------------
# mains transformer
# ---------------------------------------------------------------------------------------
def test_transformer_equivalent_circuit_from_datasheet():
    """The reference's own derivation of the equivalent circuit equals the engine's.

    Approximate equivalent circuit referred to the primary, values from the open-circuit
    figures and the regulation (Fitzgerald, Kingsley & Umans, Electric Machinery, ch. 2).
    By hand for the example (230 V, 50 Hz, 9 V, 1.5 VA, 25 %, 0.45 W, 6 mA):
    n = 230 / 9 = 25.556; R_L = (230 / 1.25)^2 / 1.5 = 22 571 ohm, R_w = 0.25 R_L
    = 5642.7 ohm (regulation (U_nl - U_fl) / U_fl = 25 % at rated VA, resistive load);
    R_c = 230^2 / 0.45 = 117 556 ohm; I_c = 0.45 / 230 = 1.9565 mA,
    I_m = sqrt(6^2 - 1.9565^2) mA = sqrt(32.172) mA = 5.6720 mA,
    L_m = 230 / (2 pi 50 x 5.6720 mA) = 129.07 H.
    """
    d = design("transformer-bridge")
    mine = rc.transformer_equivalent(d)
    assert mine == pytest.approx(transformer_model(d), rel=1e-12)
    hand = {
        "turns_ratio": 25.556,
        "winding_resistance_ohm": 5642.7,
        "core_resistance_ohm": 117556.0,
        "magnetizing_inductance_h": 129.07,
    }
    for k, v in hand.items():  # the hand figures are rounded to 5 significant digits
        assert mine[k] == pytest.approx(v, rel=1e-4), k
    # without a no-load current the format's default (magnetizing current 3 x the
    # core-loss current) is used by both
    table = rc.example_table(rc.TRANSFORMER_EXAMPLE)
    del table["parts"]["no_load_current"]
    d2 = design_from_dict(table)
    assert rc.transformer_equivalent(d2) == pytest.approx(transformer_model(d2), rel=1e-12)
    # 230 / (2 pi 50 x 3 x 1.9565 mA) = 124.72 H (by hand)
    assert rc.transformer_equivalent(d2)["magnetizing_inductance_h"] == pytest.approx(
        124.72, rel=1e-4
    )


#: relative tolerance of steady-state charge balances the engine enforces exactly (its
#: periodicity residual is ~1e-9; the regulator's smooth turn-on tanh(v_o / 0.1 V) is 1
#: to 1e-80 at a 9 V reservoir): common practice, no source
REL_CHARGE = 1e-4


def test_half_wave_transformer_draws_dc():
    # Through the ideal transformer of the model (no saturation) a half-wave rectifier
    # draws a DC current from the mains. In steady state the reservoir's mean current is
    # zero, so the diode's mean current is the regulator's constant I_load + I_q and the
    # primary's is that / n; the magnetizing (cos) and core-loss (sin) currents average
    # to zero. By hand: (18 + 3) mA / (230 / 9) = 0.8217 mA, positive (the diode conducts
    # on the positive half-cycle; consumer sign).
    eng = engine("transformer-half-wave", "active")
    ref = reference("transformer-half-wave", "active")
    assert ref.v_o_v.min() > 5.0 + 1.5  # in regulation, so the load is the constant one
    assert eng.pq.i_dc_a == pytest.approx(21e-3 / (230 / 9), rel=REL_CHARGE)
    assert ref.i_dc_a == pytest.approx(21e-3 / (230 / 9), rel=REL_CHARGE)
    assert abs(eng.pq.i_dc_a - ref.i_dc_a) < tol.HARMONIC_OF_I1 * ref.i1_rms_a
    assert eng.pq.i_dc_a > 0.01 * eng.pq.i_rms_a  # not negligible
    # a bridge conducts symmetrically in both half-cycles: no DC (only rounding and the
    # diodes' nA leakage; 1e-4 of the fundamental is far above both)
    for state in ("active", "idle"):
        assert abs(engine("transformer-bridge", state).pq.i_dc_a) < 1e-4 * ref.i1_rms_a
        assert abs(reference("transformer-bridge", state).i_dc_a) < 1e-4 * ref.i1_rms_a


def test_transformer_no_load_hand_check():
    """The example with no load and no quiescent current draws its no-load figures.

    By hand: the core loss is V^2 / R_c = 230^2 / (230^2 / 0.45 W) = 0.45 W = P0 by
    construction; the rest is the rectifier's, with the reservoir at the secondary crest
    its diodes pass only their leakage, of the order of 4 Is x Vpk2 = 4 x 5.3 nA x
    12.7 V = 2.7e-7 W (Is of a 0.7 V / 20 mA diode), allowed 10 times. The line current
    is then the magnetizing and core-loss currents, in quadrature: the magnetizing part
    (the fundamental's quadrature component, lagging) has rms
    sqrt(I0^2 - (P0/V)^2) = sqrt(6^2 - 1.9565^2) mA = 5.6720 mA, and the whole line
    current the datasheet no-load current I0 = 6 mA. (Fitzgerald, Kingsley & Umans,
    Electric Machinery, ch. 2: open-circuit test.)
    """
    table = rc.example_table(rc.TRANSFORMER_EXAMPLE)
    table["output"]["quiescent_current"] = "0 mA"
    table["states"] = {"off": "0 mA"}
    table["rated_state"] = "off"
    table.pop("standby_state", None)
    d = design_from_dict(table)
    (eng,) = simulate.simulate(d)
    parts, v = d.parts, d.mains.voltage
    assert parts.no_load_power == 0.45 and v == 230.0  # the figures of the hand check
    i_s = diode_saturation_current_a(parts.diode.forward_voltage, parts.diode.forward_test_current)
    remainder = 10 * 4 * i_s * math.sqrt(2.0) * parts.secondary_voltage
    assert 0.45 <= eng.pq.p_w < 0.45 + remainder
    assert eng.losses_w["transformer core"] == pytest.approx(0.45, rel=1e-9)
    i_mag = -eng.pq.i_h_a[1].imag
    assert i_mag == pytest.approx(5.6720e-3, rel=1e-4)  # hand figure, 5 digits
    assert i_mag == pytest.approx(
        math.sqrt(parts.no_load_current**2 - (parts.no_load_power / v) ** 2), rel=1e-6
    )
    assert eng.pq.i_rms_a == pytest.approx(parts.no_load_current, rel=1e-6)
