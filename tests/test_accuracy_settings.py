"""A spread's accuracy setting, and the batch paths that make a spread fast.

Sources: the spread's resolution is checked against the independent brute-force reference
of ``tests/reference_circuits.py`` (the same circuits written again from their physical
description, integrated with scipy's Radau at rtol 1e-9; the reference of
``benchmarks/bench_accuracy.py`` and ``tests/test_engine_reference.py``) and against the
engine at ``unit``'s 2048 steps. The batched power-quality path is checked against the
scalar one (IEEE 1459 figures of :func:`fleetpower.pq.ieee1459.power_quality`, itself
checked against closed-form Fourier series in ``tests/test_analysis.py``). Thread counts:
each row of a batch is solved on its own, so any number of threads must give the same bytes.
"""

from __future__ import annotations

import dataclasses
import functools

import numpy as np
import pytest
import reference_circuits as rc
import tolerances as tol
from conftest import build_design, write_design

from fleetpower import simulate
from fleetpower.engine import solver
from fleetpower.io.design_file import design_from_dict
from fleetpower.pq.ieee1459 import power_quality, power_quality_rows
from fleetpower.spread.study import (
    SPREAD_PERIODIC_RTOL,
    SPREAD_SAMPLES_PER_CYCLE,
    evaluate_chunk,
    plan_spread,
)

#: the dropper cases of the reference tests (the spread's subject: capacitive droppers)
CASES = [("dropper-half-wave", "active"), ("dropper-bridge", "active"),
         ("dropper-half-wave", "idle")]


@functools.cache
def _reference(key, state):
    return rc.simulate_reference(rc.design(key), state)


def _spread_setting(key, state):
    (res,) = simulate.run([simulate.Case(rc.design(key), state)], SPREAD_SAMPLES_PER_CYCLE,
                          cache=None, periodic_rtol=SPREAD_PERIODIC_RTOL)
    return res


@pytest.mark.parametrize(("key", "state"), CASES)
def test_spread_setting_meets_the_reference_tolerances(key, state):
    # source: the Radau reference; tolerances of the engine's acceptance (tests/tolerances.py)
    ref = _reference(key, state)
    res = _spread_setting(key, state)
    assert abs(res.pq.p_w / ref.p_w - 1.0) <= tol.SPREAD_SETTING_REL
    assert abs(res.pq.i_rms_a / ref.i_rms_a - 1.0) <= tol.SPREAD_SETTING_REL
    h = np.arange(tol.H_COMPARED + 1)
    assert np.max(np.abs(res.pq.i_h_a[h] - ref.i_h_a[h])) / ref.i1_rms_a <= \
        tol.SPREAD_SETTING_REL
    # and the stricter acceptance of the reference tests themselves
    assert abs(res.pq.p_w / ref.p_w - 1.0) <= tol.REL_P
    assert abs(res.pq.i_rms_a / ref.i_rms_a - 1.0) <= tol.REL_I_RMS


@pytest.mark.parametrize(("key", "state"), CASES)
def test_spread_setting_agrees_with_unit_resolution(key, state):
    # source: the engine at unit's 2048 steps, itself within 0.007 of every reference
    # tolerance (benchmarks/bench_accuracy.py); the spread's documented worst error
    fine = simulate.run([simulate.Case(rc.design(key), state)], cache=None)[0]
    res = _spread_setting(key, state)
    for name in ("p_w", "i_rms_a", "s_va"):
        a, b = getattr(res.pq, name), getattr(fine.pq, name)
        assert abs(a / b - 1.0) <= tol.SPREAD_SETTING_REL, name
    assert abs(res.v_dc_v / fine.v_dc_v - 1.0) <= tol.SPREAD_SETTING_REL
    assert abs(res.balance.delivered_w - fine.balance.delivered_w) <= \
        tol.SPREAD_SETTING_REL * fine.pq.p_w
    # it is a different resolution: the figures do move (the test can fail)
    assert res.pq.i_rms_a != fine.pq.i_rms_a


def _rows(n=12):
    d = design_from_dict(build_design("desk-sensor-dropper-lean"), "lean.toml")
    rng = np.random.default_rng(7)
    rows, x0 = [], []
    for k in range(n):
        scaled = d.model_copy(update={"parts": d.parts.model_copy(update={
            "series_capacitance": d.parts.series_capacitance * rng.uniform(0.8, 1.2)})})
        r, x = simulate.engine_row(simulate.Case(scaled, list(d.states)[k % 2]))
        rows.append(r)
        x0.append(x)
    return np.array(rows), np.array(x0)


def test_batch_is_identical_for_any_number_of_threads():
    # each row is independent (common practice, no source): the bytes must not depend on
    # how rows are shared among threads
    p, x0 = _rows()
    one = solver.solve_periodic(p, x0, 256, threads=1)
    for threads in (2, 3, 5):
        other = solver.solve_periodic(p, x0, 256, threads=threads)
        assert other.states.tobytes() == one.states.tobytes()
        assert other.probes.tobytes() == one.probes.tobytes()
        assert np.array_equal(other.residual_evaluations, one.residual_evaluations)
    # a row alone gives what it gives inside the batch
    alone = solver.solve_periodic(p[3:4], x0[3:4], 256, threads=1)
    assert alone.states.tobytes() == one.states[3:4].tobytes()


def test_power_quality_rows_equal_the_scalar_path():
    # source: power_quality (checked against closed-form Fourier series elsewhere)
    rng = np.random.default_rng(3)
    t = np.arange(256) / 256
    v = 325.0 * np.sin(2 * np.pi * t + rng.uniform(0, 1, (40, 1)))
    i = np.cumsum(rng.normal(size=(40, 256)), axis=1) * 1e-3
    rows = power_quality_rows(v, i)
    for k, got in enumerate(rows):
        want = power_quality(v[k], i[k])
        for f in dataclasses.fields(want):
            a, b = getattr(got, f.name), getattr(want, f.name)
            assert np.allclose(a, b, rtol=tol.EXACT, atol=1e-15), f.name


def test_spread_report_states_its_accuracy_and_steps_is_an_option(tmp_path, cli):
    path = write_design(tmp_path, "desk-sensor-dropper-lean")
    rc_, out, err = cli("spread", path, "--samples", "4", "--no-limits", "--json")
    assert rc_ == 0, err
    import json

    acc = json.loads(out)["accuracy"]
    assert acc["steps_per_cycle"] == SPREAD_SAMPLES_PER_CYCLE
    assert "steps per mains cycle" in acc["note"]
    rc_, out, err = cli("spread", path, "--samples", "2", "--no-limits", "--steps", "512")
    assert rc_ == 0, err
    assert "512 steps per mains cycle" in out
    rc_, out, err = cli("spread", path, "--samples", "2", "--steps", "100")
    assert rc_ == 2 and "--steps" in err and len(err.strip().splitlines()) == 1


@pytest.mark.parametrize(("samples", "order"), [(40, 1), (300, 2), (400, 3)])
def test_fitted_warm_start_changes_the_cost_not_the_answer(samples, order):
    # the fit only moves where each solve starts: figures equal to the periodicity
    # tolerance's effect (a stored-energy change of ~5e-5 of P; DEVELOPERS.md)
    d = design_from_dict(build_design("desk-sensor-dropper-lean"), "lean.toml")
    plan = plan_spread(d, samples=samples, seed=5, check_limits=False)
    assert plan.warm_fit is not None and plan.warm_fit.order == order
    fitted = evaluate_chunk(plan, (0, 20))
    nominal = evaluate_chunk(dataclasses.replace(plan, warm_fit=None), (0, 20))
    for name in ("active|p_w", "idle|i_rms_a", "active|v_dc_min_v"):
        a, b = fitted.figures[name], nominal.figures[name]
        assert np.allclose(a, b, rtol=1e-4), name
        assert not np.array_equal(a, b)  # they did start elsewhere
