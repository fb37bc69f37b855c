"""Spread runs through the design file, simulate and the CLI.

Sources beside each check: the charge-pump closed form f C (2 Vpk - Vz - Vf) (derived in
fleetpower.spread.ageing, Notes) for ageing; the project's own one-line error contract
(README "Design files") for bad declarations; reproducibility is this project's own
requirement (seeded per sample index).
"""

from __future__ import annotations

import json

import numpy as np
import pytest
from conftest import build_design, write_design

from fleetpower.executors import local_executor
from fleetpower.io.design_file import design_from_dict, load_design
from fleetpower.spread.ageing import charge_pump_current_a
from fleetpower.spread.study import (
    SpreadResult,
    plan_spread,
    run_ageing,
    run_spread,
    sample_design,
)
from fleetpower.unit import max_deliverable_current_a

TOLERANCED = {"parts": {
    "series_capacitance": {"value": "470 nF", "tolerance": "10 %"},
    "zener_voltage": {"value": "10 V", "tolerance": "5 %", "distribution": "normal"},
}}


def _design(**extra):
    data = build_design("desk-sensor-dropper-lean", **TOLERANCED)
    data.update(extra)
    return design_from_dict(data, "lean.toml")


def test_design_file_carries_tolerances_and_keeps_nominals():
    d = _design(spread={"mains": {"voltage": "6 %"}, "capacitor_loss_per_year": "2 %",
                        "part_class_defaults": False})
    assert d.parts.series_capacitance == pytest.approx(470e-9)  # the nominal
    assert [s.key for s in d.spread.parts] == ["parts.series_capacitance",
                                               "parts.zener_voltage"]
    assert [s.band for s in d.spread.mains_band] == [pytest.approx(0.06), pytest.approx(0.01)]
    assert d.spread.capacitor_loss_per_year == pytest.approx(0.02)
    plain = design_from_dict(build_design("desk-sensor-dropper-lean"), "lean.toml")
    assert plain.parts == d.parts  # a toleranced file simulates its nominal everywhere else


@pytest.mark.parametrize(("parts", "key", "words"), [
    ({"series_capacitance": {"value": "470 nF", "tolerance": "-5 %"}},
     "parts.series_capacitance.tolerance", "cannot be negative"),
    ({"series_capacitance": {"value": "470 nF", "tolerance": "120 %"}},
     "parts.series_capacitance.tolerance", "must stay positive"),
    ({"series_capacitance": {"value": "470 nF", "tolerance": "5 %", "distribution": "flat"}},
     "parts.series_capacitance.distribution", "unknown distribution"),
    ({"capacitor_voltage_rating": {"value": "400 V", "tolerance": "5 %"}},
     "parts.capacitor_voltage_rating", "takes no tolerance"),
])
def test_bad_tolerance_in_a_design_file_is_one_line_exit_2(tmp_path, cli, parts, key, words):
    path = write_design(tmp_path, "desk-sensor-dropper-lean", parts=parts)
    rc, out, err = cli("spread", path, "--samples", "2")
    assert rc == 2 and out == ""
    assert err.startswith(f"fleetpower: {path}: {key}: ") and len(err.splitlines()) == 1
    assert words in err and "Traceback" not in err
    # the other verbs read the same file the same way
    rc, out, err2 = cli("unit", path)
    assert rc == 2 and err2 == err


@pytest.fixture(scope="module")
def plan():
    return plan_spread(_design(spread={"part_class_defaults": False,
                                       "mains": {"voltage": "10 %"}}),
                       samples=6, seed=7, check_limits=False)


def test_spread_is_reproducible_bit_for_bit_and_independent_of_chunking(plan):
    a = run_spread(plan, chunk_size=6)
    b = run_spread(plan, chunk_size=6)
    c = run_spread(plan, chunk_size=4)
    assert a.done == 6 and not a.interrupted
    for name in ("active|p_w", "idle|i_rms_a", "stress|series_capacitor_rms_voltage_v"):
        assert a.statistics.values(name).tobytes() == b.statistics.values(name).tobytes()
        assert a.statistics.values(name).tobytes() == c.statistics.values(name).tobytes()
    # each sample is the design with its drawn values, solved like any other design
    row = plan.values(3, 4)[0]
    d3 = sample_design(plan.design, plan.spreads, row)
    assert d3.parts.series_capacitance == row[0] != plan.design.parts.series_capacitance


def test_interrupt_reports_the_samples_done_so_far(plan):
    def stop_after_first(func, items, on_done=None):
        on_done(0, func(items[0]))
        raise KeyboardInterrupt

    r = run_spread(plan, chunk_size=2, executor=stop_after_first)
    assert isinstance(r, SpreadResult)
    assert (r.done, r.requested, r.interrupted) == (2, 6, True)
    assert r.statistics.n_samples == 2


def test_spread_on_a_dask_local_cluster_equals_the_local_run(plan):
    pytest.importorskip("distributed")
    from fleetpower.executors import dask_executor

    local = run_spread(plan, chunk_size=3, executor=local_executor)
    # two workers as threads of this process (quick): the compiled engine is plain
    # GIL-releasing functions on per-call arrays, safe to enter from two threads at once
    with dask_executor(n_workers=2, processes=False) as run:
        remote = run_spread(plan, chunk_size=3, executor=run)
    for name in ("active|p_w", "idle|v_dc_min_v"):
        assert remote.statistics.values(name).tobytes() == \
            local.statistics.values(name).tobytes()


def test_deliverable_current_falls_with_capacitance_as_the_charge_pump_predicts():
    # Acceptance: the simulated deliverable current follows f C (2 Vpk - Vz - Vf) within
    # 2 % as the series capacitor ages. The pump feeds the regulator's load AND its
    # quiescent current, so the load's limit plus I_q is compared with the closed form.
    d = load_design("examples/desk-sensor-dropper-lean.toml")
    iq = d.output.quiescent_current
    for factor in (1.0, 0.9, 0.8):  # e.g. years 0, 10 and 20 at 1 %/year
        parts = d.parts.model_copy(update={"series_capacitance":
                                           factor * d.parts.series_capacitance})
        aged = d.model_copy(update={"parts": parts})
        simulated = max_deliverable_current_a(aged, rounds=3) + iq
        closed = charge_pump_current_a(d.mains.frequency, parts.series_capacitance,
                                       d.mains.voltage * 2**0.5, parts.zener_voltage,
                                       parts.diode.forward_voltage)
        assert simulated == pytest.approx(closed, rel=0.02), factor


def test_ageing_year_by_year(plan):
    ag = run_ageing(plan, 2, units=3)
    assert ag.years == (0, 1, 2) and ag.units == 3
    # linear loss at the default 1 %/year (from memory, fleetpower.spread.ageing)
    assert ag.capacitance_factor == pytest.approx((1.0, 0.99, 0.98))
    # the charge-pump limit falls in proportion (closed form, linear in C)
    assert np.diff(ag.charge_pump_nominal_a) == pytest.approx(
        [-0.01 * ag.charge_pump_nominal_a[0]] * 2)
    # this lean design cannot hold its 18 mA 'active' state even new: the P5 unit fails
    # from year 0 (its deliverable current is ~12 mA, unit analysis)
    assert ag.state == "active" and ag.delivering_fraction[0] == 0.0
    assert ag.p5_fails_year == 0


def test_spread_cli_json_and_corners(tmp_path, cli):
    path = write_design(tmp_path, "desk-sensor-dropper-lean",
                        spread={"part_class_defaults": False}, **TOLERANCED)
    rc, out, err = cli("spread", path, "--corners", "--json", "--no-limits")
    assert rc == 0, err
    rep = json.loads(out)
    assert rep["mode"] == "corners" and rep["samples"]["done"] == 4  # 2 parts -> 2^2
    assert rep["samples"]["complete"] and rep["note"] is None
    worst = {(w["group"], w["quantity"]): w for w in rep["worst"]}
    # the most line current at the corner with the most capacitance (X_C = 1/(2 pi f C))
    assert worst[("idle", "i_rms_a")]["unit"].startswith("series_capacitance high")
    assert rep["caution"].startswith("NOT ISOLATED")


def test_percentile_unit_is_numpys_nearest_rank_of_its_spread():
    from fleetpower import simulate as sim
    from fleetpower.spread.study import parse_percentile, percentile_design

    d = _design(spread={"part_class_defaults": False})  # two declared parts, no mains band
    p95, note = percentile_design(d, 95, samples=8, seed=3)
    assert "P95" in note and "8 units" in note
    plan = plan_spread(d, samples=8, seed=3, check_limits=False)
    assert [s.key for s in plan.spreads] == ["parts.series_capacitance",
                                             "parts.zener_voltage"]

    def mean_p(unit):
        return np.mean([r.pq.p_w for r in sim.run([sim.Case(unit, s) for s in unit.states])])

    ranks = [mean_p(sample_design(d, plan.spreads, row)) for row in plan.values(0, 8)]
    # the unit returned is numpy's nearest-rank percentile of the units' mean input power
    # (numpy.percentile, method "nearest")
    assert mean_p(p95) == pytest.approx(np.percentile(ranks, 95, method="nearest"), rel=1e-6)
    assert parse_percentile("P95") == 95.0 and parse_percentile("5") == 5.0
    for bad in ("P101", "top"):
        with pytest.raises(Exception, match="percentile"):
            parse_percentile(bad)


def test_fleet_at_a_percentile_says_so(cli):
    from conftest import example_path

    rc, out, err = cli("fleet", example_path("harbour-office"), "--at", "P95",
                       "--at-samples", "4", "--json")
    assert rc == 0, err
    rep = json.loads(out)
    notes = [w for w in rep["warnings"] if w.startswith("designs enter at a percentile")]
    assert notes and all("P95 of its own spread" in w for w in notes)
    rc, out, err = cli("fleet", example_path("harbour-office"), "--at", "P150")
    assert rc == 2 and "--at" in err and len(err.splitlines()) == 1


def test_switch_mode_spread_solves_every_unit_and_its_eps_figures():
    # a switch-mode supply's cold start already takes ~3 cycles: no warm start, and every
    # unit (mains band and part defaults drawn) reaches its steady state; the EPS load
    # points are solved per unit (no-load power and average efficiency, as in `unit`)
    d = load_design("examples/desk-sensor-smps-230.toml")
    plan = plan_spread(d, samples=3, seed=0, check_limits=False)
    assert plan.warm == ()
    r = run_spread(plan)
    assert r.statistics.failure_fractions()["solver|no periodic steady state"] == 0.0
    eff = r.statistics.values("eps|average_efficiency")
    assert eff.shape == (3,) and np.all((eff > 0) & (eff < 1))  # an efficiency


def test_spread_plots_and_terminal_report(tmp_path, cli):
    pytest.importorskip("matplotlib")
    path = write_design(tmp_path, "desk-sensor-dropper-lean",
                        spread={"part_class_defaults": False}, **TOLERANCED)
    rc, out, err = cli("spread", path, "--samples", "3", "--no-limits", "--years", "1",
                       "--plots", tmp_path / "fig", "--width", "160")
    assert rc == 0, err
    written = sorted(p.name for p in (tmp_path / "fig").iterdir())
    assert written == ["spread_p_w.png", "spread_p_w.svg", "spread_v_dc_min_v.png",
                       "spread_v_dc_min_v.svg"]
    assert "fleetpower: wrote" in err  # one stderr line naming the files written
    assert "3 Monte Carlo samples (seed 0)" in out and "NOT ISOLATED" in out
    assert "The P5 unit can no longer deliver 'active' from year 0." in out


def test_a_check_citing_several_rules_keeps_one_flag_per_rule():
    """The plug-pin discharge row cites the rules it breaks ("a + b" when both, "a" when
    one): the spread keeps one flag per rule, so a check never splits into rows named
    after whichever rules a unit broke. For one unit both rules see the same V0 and tau,
    and IEC 60335-1 (34 V within 1 s) is stricter than IEC 62368-1 (60 V within 2 s) from
    any V0 above 34 V (the tables' values, from memory): at least as many units fail it."""
    plan = plan_spread(load_design("examples/sensor-dropper-230.toml"), samples=24, seed=3)
    fails = run_spread(plan, executor=local_executor).statistics.failure_fractions()
    names = list(fails.index)
    assert not [n for n in names if " + " in n], names
    a = "limit|iec60335-1-discharge: tau_discharge_s"
    b = "limit|iec62368-1-discharge: tau_discharge_s"
    assert a in names and fails[a] >= fails.get(b, 0.0)
    assert fails[a] > 0.0  # 1 uF x 470 kohm = 0.47 s against about 0.44 s allowed at 325 V
