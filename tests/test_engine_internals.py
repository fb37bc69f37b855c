"""Internal consistency of the engine: analytic Jacobian, device fits, periodicity.

Outside references: the forward-difference derivative (numerical analysis, e.g. Nocedal &
Wright, Numerical Optimization, ch. 8) for the Jacobian; the datasheet meaning of the
device parameters (Shockley diode equation; zener voltage at its test current).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from tolerances import BALANCE_PCT

from fleetpower._resources import examples_dir
from fleetpower.engine import circuits as c
from fleetpower.engine import devices as dv
from fleetpower.engine import layout
from fleetpower.engine.solver import jacobian_fd, solve_periodic
from fleetpower.io.design_file import load_design
from fleetpower.simulate import circuit_rows, simulate

#: every example design the engine solves (a measured gadget has no engine row)
EXAMPLES = sorted(p.name for p in examples_dir().glob("*.toml") if "fleet" not in p.name
                  and p.read_text().find("topology") >= 0
                  and load_design(p).topology_impl.simulated)


def test_diode_drops_its_rated_forward_voltage():
    # Shockley: i = Is (exp(v/nVt) - 1); Is fitted so that 0.7 V gives 20 mA
    # ("about 0.7 V at tens of mA", common practice, no source).
    is_a = dv.diode_saturation_current_a(0.7, 0.020)
    nvt = dv.N_RECTIFIER * dv.VT_V
    assert dv.diode_current_a(0.7, is_a, nvt) == pytest.approx(0.020, rel=1e-12)
    # dynamic resistance n Vt / I at 20 mA (Shockley): 46.4 mV / 20 mA = 2.3 ohm
    assert 1.0 / dv.diode_conductance_s(0.7, is_a, nvt) == pytest.approx(nvt / 0.020, rel=1e-6)


def test_zener_breaks_down_at_its_test_current():
    # datasheet meaning: V_Z is the breakdown voltage at I_ZT; r_Z the slope there
    vk, s = dv.zener_knee(12.0, 0.020, 7.0)
    assert dv.zener_breakdown_current_a(12.0, vk, s, 7.0) == pytest.approx(0.020, rel=1e-12)
    slope = dv.zener_breakdown_conductance_s(12.0, vk, s, 7.0)
    assert 1.0 / slope == pytest.approx(7.0, rel=0.01)
    # far below the knee the zener blocks: less than 1 uA at 10 V
    assert dv.zener_breakdown_current_a(10.0, vk, s, 7.0) < 1e-6


@pytest.mark.parametrize("name", EXAMPLES)
@settings(max_examples=25, deadline=None)
@given(phase=st.floats(0.0, 1.0), dv_=st.floats(-3.0, 3.0), di=st.floats(-0.05, 0.05))
def test_analytic_jacobian_matches_finite_differences(name, phase, dv_, di):
    design = load_design(examples_dir() / name)
    p, x0 = circuit_rows(design, next(iter(design.states)))
    x = x0 + np.array([dv_, dv_ * 0.5, dv_ + 1.0, di])
    t = phase * 2 * math.pi / p[layout.param_index("omega_rad_s")]
    f0 = np.empty(4)
    c.residual(x, t, p, f0)
    ja, jf = np.empty((4, 4)), np.empty((4, 4))
    c.jacobian(x, t, p, ja)
    jacobian_fd(x, t, p, f0, jf, np.array([p[layout.param_index("v_pk_v")]] * 3 + [1.0]))
    np.testing.assert_allclose(ja, jf, rtol=2e-4, atol=1e-6 * np.abs(jf).max())


def test_steady_state_is_periodic_and_reached_from_a_poor_guess():
    # A fixed point of the one-cycle map does not depend on the initial guess.
    design = load_design(examples_dir() / "nightlight-dropper.toml")
    p, x0 = circuit_rows(design, "active")
    a = solve_periodic(p[None], x0[None])
    b = solve_periodic(p[None], np.array([[50.0, 0.0, 0.0, 0.0]]))
    np.testing.assert_allclose(a.probe("i_line_a")[0], b.probe("i_line_a")[0], atol=1e-7)
    assert a.periodic_residual[0] < 1e-9


def test_coarse_start_changes_the_cost_not_the_answer():
    # The fixed point of the fine one-cycle map does not depend on where the shooting
    # starts (as above): started from the coarse grid's fixed point it is the same to the
    # periodicity tolerance; for a dropper, whose cold start takes 4-9 cycles, it costs
    # fewer residual evaluations (the engine counts them; a switch-mode supply settling
    # cold in 2-3 cycles gains nothing; the averages are in benchmarks/bench_accuracy.py)
    for name in ("nightlight-dropper", "desk-sensor-smps-230"):
        design = load_design(examples_dir() / f"{name}.toml")
        p, x0 = circuit_rows(design, next(iter(design.states)))
        cold = solve_periodic(p[None], x0[None], coarse_start=0)
        warm = solve_periodic(p[None], x0[None], coarse_start=96)
        i_cold, i_warm = cold.probe("i_line_a")[0], warm.probe("i_line_a")[0]
        np.testing.assert_allclose(i_warm, i_cold, atol=1e-6 * np.abs(i_cold).max())
        assert warm.periodic_residual[0] < 1e-9
        if "dropper" in name:
            assert 0 < warm.residual_evaluations[0] < 0.8 * cold.residual_evaluations[0]
        # every time step of every cycle evaluates the residual at least once
        assert cold.residual_evaluations[0] >= cold.iterations[0] * len(cold.t_s)


def test_batch_equals_one_at_a_time():
    design = load_design(examples_dir() / "lobby-bridge-dropper.toml")
    one = [simulate(design, [s])[0].pq.p_w for s in design.states]
    both = [r.pq.p_w for r in simulate(design)]
    assert both == pytest.approx(one, rel=1e-12)


def _random_design(rng, k):
    """A plausible random design (seeded): the parameter ranges practitioners use."""
    topo = str(
        rng.choice(
            ["capacitive-dropper", "resistive-dropper", "rectifier-smps", "mains-transformer"]
        )
    )
    v, f = (120, 60) if rng.random() < 0.5 else (230, 50)
    rect = str(rng.choice(["half-wave", "bridge"]))
    vz = float(rng.uniform(5.6, 24))
    lin = dict(
        voltage=f"{rng.uniform(2, vz - 2.5):.2f} V",
        quiescent_current=f"{rng.uniform(0, 8):.2f} mA",
        dropout=f"{rng.uniform(0.2, 2):.2f} V",
    )
    if topo == "capacitive-dropper":
        parts = dict(
            series_capacitance=f"{rng.uniform(0.1, 5):.3f} uF",
            series_resistance=f"{rng.uniform(5, 200):.1f} ohm",
            bleeder_resistance=f"{rng.uniform(0.1, 2):.2f} Mohm",
            zener_voltage=f"{vz:.2f} V",
            rectifier=rect,
            reservoir_capacitance=f"{rng.uniform(10, 2200):.0f} uF",
        )
        out, load = lin, f"{rng.uniform(0, 120):.2f} mA"
    elif topo == "resistive-dropper":
        parts = dict(
            dropper_resistance=f"{rng.uniform(2, 50):.2f} kohm",
            zener_voltage=f"{vz:.2f} V",
            rectifier=rect,
            reservoir_capacitance=f"{rng.uniform(10, 2200):.0f} uF",
        )
        out, load = lin, f"{rng.uniform(0, 30):.2f} mA"
    elif topo == "mains-transformer":
        # small 50/60 Hz mains transformers (common practice, no source): 6-24 V open
        # circuit, 0.5-20 VA, 5-30 % regulation, core loss 2-20 % of the rating, no-load
        # current given (1.5-5 x the core-loss current) or left to the default, leakage
        # none or a few hundred mH referred to the primary
        v2 = float(rng.uniform(6, 24))
        va = float(rng.uniform(0.5, 20))
        parts = dict(
            secondary_voltage=f"{v2:.2f} V",
            rated_power=f"{va:.2f} W",
            regulation_pct=float(rng.uniform(5, 30)),
            no_load_power=f"{rng.uniform(0.02, 0.2) * va:.4f} W",
            rectifier=rect,
            reservoir_capacitance=f"{rng.uniform(100, 4700):.0f} uF",
        )
        if rng.random() < 0.5:
            p0 = float(parts["no_load_power"].split()[0])
            parts["no_load_current"] = f"{rng.uniform(1.5, 5) * p0 / v * 1e3:.4f} mA"
        if rng.random() < 0.5:
            parts["leakage_inductance"] = f"{rng.uniform(100, 500):.0f} mH"
        out = dict(
            voltage=f"{rng.uniform(2, 1.414 * v2 - 3):.2f} V",
            quiescent_current=f"{rng.uniform(0, 8):.2f} mA",
            dropout=f"{rng.uniform(0.2, 2):.2f} V",
        )
        load = f"{rng.uniform(0, 1) * va / v2 * 1e3:.2f} mA"
    else:
        pr = float(rng.uniform(1, 60))
        parts = dict(
            x_capacitance=f"{rng.uniform(10, 470):.0f} nF",
            bleeder_resistance=f"{rng.uniform(0.3, 3):.2f} Mohm",
            series_resistance=f"{rng.uniform(1, 47):.1f} ohm",
            bulk_capacitance=f"{rng.uniform(2, 100):.1f} uF",
            rectifier=rect,
        )
        out = dict(
            voltage="12 V",
            rated_power=f"{pr:.2f} W",
            no_load_input_power=f"{rng.uniform(0.02, 0.3):.3f} W",
            efficiency=[[0.1, 0.6], [0.5, 0.8], [1.0, 0.85]],
            undervoltage_lockout=f"{rng.uniform(0.2, 0.7) * v * 1.414:.0f} V",
        )
        load = f"{rng.uniform(0, 1.3) * pr:.3f} W"
    return dict(
        name=f"random {k}",
        topology=topo,
        mains=dict(voltage=f"{v} V", frequency=f"{f} Hz"),
        parts=parts,
        output=out,
        states=dict(s=load),
    )


def test_random_designs_converge_and_conserve_energy():
    # Invariant (conservation of energy over a period, any circuit): mean input power =
    # delivered + all losses + source resistance, storage averaging to zero. Checked on
    # 120 seeded random designs, overloaded ones included, solved as one batch.
    from fleetpower.io.design_file import design_from_dict

    rng = np.random.default_rng(20261202)
    rows, x0s = [], []
    for k in range(120):
        d = design_from_dict(_random_design(rng, k))
        p, x0 = circuit_rows(d, "s")
        rows.append(p)
        x0s.append(x0)
    sol = solve_periodic(np.array(rows), np.array(x0s), raise_on_failure=False)
    assert sol.converged.all()
    mean = {k: v.mean(axis=1) for k, v in layout.probe_table(sol.probes).items()}
    # from the source EMF: the supply's losses, its output and the source resistance's loss
    p_in = (sol.probe("i_line_a") * sol.probe("v_source_v")).mean(axis=1)
    out = sum(mean[k] for k in layout.LOSS_PROBES) + mean["p_delivered_w"] + \
        mean["p_source_resistance_w"]
    np.testing.assert_allclose(out, p_in, rtol=BALANCE_PCT / 100)
    assert np.all(np.isfinite(sol.probes))


def test_bundled_files_are_found():
    # the demo and the limit tables must be reachable both installed and from a checkout
    from fleetpower._resources import data_dir

    assert (data_dir() / "limits" / "iec61000-3-2.csv").is_file()
    assert (examples_dir() / "harbour-office.toml").is_file()


@pytest.mark.parametrize("v", [-40.0, -5.0, -0.7, -0.05, -1e-6, 0.0, 1e-6, 0.03, 0.5, 0.7,
                               0.95, 1.2, 3.0, 1e3])
def test_diode_current_and_conductance_share_one_exponential_and_stay_exact(v):
    # Shockley: i = Is expm1(v / nVt), g = Is exp(v / nVt) / nVt; above I_GUARD_A the
    # tangent continuation i = Is (e_m (1 + u - u_m) - 1), g = Is e_m / nVt (Nagel 1975,
    # as the module states). diode_iv takes e - 1 for expm1 away from zero: within a few
    # ulp of the closed forms computed here with numpy's expm1 and exp.
    is_a = dv.diode_saturation_current_a(0.7, 0.020)
    nvt = dv.N_RECTIFIER * dv.VT_V
    u = v / nvt
    u_max = math.log(dv.I_GUARD_A / is_a)
    if u > u_max:
        i_ref = is_a * (math.exp(u_max) * (1.0 + u - u_max) - 1.0)
        g_ref = is_a * math.exp(u_max) / nvt
    else:
        i_ref, g_ref = is_a * np.expm1(u), is_a * np.exp(u) / nvt
    i, g = dv.diode_iv(v, is_a, nvt)
    assert i == pytest.approx(i_ref, rel=4e-16, abs=1e-300)
    assert g == pytest.approx(g_ref, rel=1e-12, abs=1e-300)


@pytest.mark.parametrize("u", [-800.0, -30.0, -1.0, 0.0, 1e-9, 2.5, 40.0, 800.0])
def test_softplus_and_its_slope_from_one_exponential(u):
    # softplus ln(1 + e^u) and its derivative, the logistic 1 / (1 + e^-u), in closed form
    # (numpy's logaddexp and expit-by-hand), overflow-free at both ends
    sp, sg = dv.softplus_sigmoid(u)
    assert sp == pytest.approx(np.logaddexp(0.0, u), rel=1e-15, abs=1e-300)
    ref = 1.0 / (1.0 + math.exp(-u)) if u > -700 else 0.0
    assert sg == pytest.approx(ref, rel=1e-15, abs=1e-300)


def _spread_like_batch(n_samples=24, seed=7):
    """Engine rows of a dropper's samples (capacitance, zener and mains each within
    +-10 %) and the nominal's settled cycle (a warm start and guide), at 256 steps."""
    design = load_design(examples_dir() / "desk-sensor-dropper-lean.toml")
    p0, x0 = circuit_rows(design, "active")
    nominal = solve_periodic(p0[None], x0[None], 256, coarse_start=0, periodic_rtol=1e-6)
    rng = np.random.default_rng(seed)
    rows = np.repeat(p0[None], n_samples, axis=0)
    for name in ("c1_f", "v_pk_v"):
        rows[:, layout.param_index(name)] *= rng.uniform(0.9, 1.1, n_samples)
    starts = np.repeat(nominal.states[:, 0], n_samples, axis=0)
    return rows, starts, np.repeat(nominal.states, n_samples, axis=0)


def test_a_guide_changes_the_cost_not_the_answer():
    # The fixed point of the one-cycle map does not depend on where each time step's
    # Newton iteration starts (the predictor): with the nominal's cycle as the guide the
    # same steady states result, to the periodicity tolerance (1e-6 of the peak voltage,
    # the spread's), for fewer residual evaluations (switchings cost 2 Newton iterations
    # instead of up to 13; measured in benchmarks/bench_spread.py)
    rows, starts, guides = _spread_like_batch()
    kw = dict(samples_per_cycle=256, coarse_start=0, periodic_rtol=1e-6)
    plain = solve_periodic(rows, starts, **kw)
    guided = solve_periodic(rows, starts, guides=guides, **kw)
    assert plain.converged.all() and guided.converged.all()
    i_plain, i_guided = plain.probe("i_line_a"), guided.probe("i_line_a")
    peak = np.abs(i_plain).max(axis=1, keepdims=True)
    # ten times the periodicity tolerance, as the end points of two solves each within it
    # of the fixed point (measured: 2.3e-7 of the peak, P within 1.2e-9)
    assert np.all(np.abs(i_guided - i_plain) < 1e-5 * peak)
    p_plain = (plain.probe("v_terminal_v") * i_plain).mean(axis=1)
    p_guided = (guided.probe("v_terminal_v") * i_guided).mean(axis=1)
    np.testing.assert_allclose(p_guided, p_plain, rtol=1e-6)
    assert guided.residual_evaluations.sum() < 0.9 * plain.residual_evaluations.sum()
    # a row of NaN is no guide: that row is solved exactly as without one
    none = guides.copy()
    none[0] = np.nan
    partly = solve_periodic(rows, starts, guides=none, **kw)
    np.testing.assert_array_equal(partly.probes[0], plain.probes[0])
    np.testing.assert_array_equal(partly.probes[1:], guided.probes[1:])
    with pytest.raises(ValueError, match="guides"):
        solve_periodic(rows, starts, guides=guides[:, :128], **kw)


def test_softplus_limits_far_from_the_knee_are_exact():
    # Beyond |u| = SOFTPLUS_EXACT_LIMIT the softplus and its slope are taken as their
    # limits (u, 1) and (e^u, e^u) without the logarithm: the same doubles as the full
    # formulas ln(1 + e^u) = u + ln(1 + e^-u) and 1 / (1 + e^-u), computed here in Python
    # (IEEE 754 rounding: e^-37 = 8.5e-17 is below half an ulp of 1 and of 37)
    def full(u):
        if u > 0.0:
            e = math.exp(-u)
            return u + math.log1p(e), 1.0 / (1.0 + e)
        e = math.exp(u)
        return math.log1p(e), e / (1.0 + e)

    lim = dv.SOFTPLUS_EXACT_LIMIT
    for u in np.concatenate([np.linspace(lim - 2, lim + 2, 4001), -np.linspace(lim - 2, lim + 2, 4001),
                             [700.0, -700.0, 1e6, -1e6]]):
        assert dv.softplus_sigmoid(float(u)) == full(float(u)), u
