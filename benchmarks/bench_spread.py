"""Spread of a capacitive dropper: batched samples against the same samples one by one.

Run from the repository root:  python benchmarks/bench_spread.py [--samples N] [--no-dask]

Measures, in one process (numba warmed first), on the desk-sensor half-wave dropper
(examples/desk-sensor-dropper-lean.toml) with the part-class default tolerances and the
mains band (7 toleranced values), both states per sample, at the spread's accuracy setting
(``--steps``, default fleetpower.spread.study.SPREAD_SAMPLES_PER_CYCLE, and its periodicity
tolerance; the SAME setting on both sides of the ratio):
  * batched: every sample of a chunk in one engine batch through fleetpower.simulate.run,
    started from the pilot samples' fit around the nominal solution, its time steps
    guided by the nominal's cycle (the spread path): solve time (engine rows, engine,
    per-case figures) and the whole per-sample path (+ scalars and stresses; limits off);
  * one by one: ``--reference`` of the same samples (the first few of every chunk, solved
    between the chunks so that both sides see the same machine), each state of each
    sample solved on its own through fleetpower.simulate.run from the topology's own
    initial guess (the path a loop over ``unit`` would take): per-sample cost and the
    ratio;
  * the same batched run through a Dask local cluster (2 worker processes) against the
    plain local run, results checked equal.
Targets: batched >= 10x faster per sample than one by one; 10,000 samples in <= 5 s of
solve time (the batches through simulate.run: engine rows, engine, per-case figures). Per-10,000 figures are scaled from the samples run (printed as such).
Exit status 1 when a target is missed.
"""

from __future__ import annotations

import argparse
import os
import sys
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

from fleetpower import simulate as sim  # noqa: E402
from fleetpower.engine import solver  # noqa: E402
from fleetpower.executors import chunk_ranges  # noqa: E402
from fleetpower.io.design_file import load_design  # noqa: E402
from fleetpower.spread import study  # noqa: E402

TARGET_RATIO = 10.0
TARGET_SOLVE_S_PER_10K = 5.0
CHUNK = 128


def _pilots(plan) -> int:
    return study._pilot_size(plan.n, len(plan.spreads))[0]


def main() -> int:
    ap = argparse.ArgumentParser()
    ap.add_argument("--samples", type=int, default=10_000)
    ap.add_argument("--reference", type=int, default=200,
                    help="samples solved one by one for the reference (default 200)")
    ap.add_argument("--no-dask", action="store_true")
    ap.add_argument("--steps", type=int, default=study.SPREAD_SAMPLES_PER_CYCLE,
                    help="steps per cycle, both sides (default: the spread's)")
    args = ap.parse_args()
    n = args.samples
    design = load_design(ROOT / "examples" / "desk-sensor-dropper-lean.toml")
    study.plan_spread(design, samples=8, seed=1, check_limits=False,
                      samples_per_cycle=args.steps)  # compile and warm the plan's path
    t0 = time.perf_counter()
    plan = study.plan_spread(design, samples=n, seed=2026, check_limits=False,
                             samples_per_cycle=args.steps)
    t_plan = time.perf_counter() - t0
    study.evaluate_chunk(plan, (0, 2))  # warm every code path
    print(f"{design.name}: {len(plan.spreads)} toleranced values, {len(design.states)} "
          f"states per sample; accuracy setting on both sides: {plan.samples_per_cycle} steps "
          f"per cycle, periodicity {plan.periodic_rtol:.0e}; {solver.engine_threads()} engine "
          f"threads on {os.cpu_count()} cores; load average {os.getloadavg()[0]:.2f}")
    fit = plan.warm_fit
    print(f"plan:                   {t_plan:.2f} s once per run (the nominal unit, and "
          f"{'no' if fit is None else _pilots(plan)} pilot samples solved from it for the "
          f"warm-start fit{'' if fit is None else f' of order {fit.order}'}; not in the "
          f"figures below)")

    # --- the batched path (the same batches evaluate_chunk builds) and the reference, the
    # same samples one by one, interleaved chunk by chunk: the first samples of every chunk
    # are also solved one at a time (cold start, each state on its own, at the same
    # accuracy setting), so both see the same machine (its speed drifts by 20-30 % over
    # tens of seconds on a shared host)
    m = min(args.reference, n)
    chunks = list(chunk_ranges(n, CHUNK))
    per_chunk = -(-m // len(chunks))
    solve_s = cpu_batched = ref_s = cpu_ref = 0.0
    done = 0
    for a, b in chunks:
        values = plan.values(a, b)
        c0 = time.process_time()
        designs = [study.sample_design(design, plan.spreads, r) for r in values]
        t0 = time.perf_counter()
        study._solve_units(designs, plan.warm, plan.samples_per_cycle, plan.periodic_rtol,
                           plan.starts(values), plan.warm_cycles)
        solve_s += time.perf_counter() - t0
        cpu_batched += time.process_time() - c0  # all threads, samples built included
        for row in values[: min(per_chunk, m - done)]:
            c0, t0 = time.process_time(), time.perf_counter()
            d = study.sample_design(design, plan.spreads, row)
            for state in d.states:
                sim.run([sim.Case(d, state)], plan.samples_per_cycle, cache=None,
                        periodic_rtol=plan.periodic_rtol)
            ref_s += time.perf_counter() - t0
            cpu_ref += time.process_time() - c0
            done += 1
    per_batched = solve_s / n
    print(f"batched solve:          {n} samples in {solve_s:.2f} s = {n / solve_s:.0f} "
          f"samples/s; per 10,000: {1e4 * per_batched:.1f} s (target <= "
          f"{TARGET_SOLVE_S_PER_10K:.0f} s); CPU (user + system, all threads, samples "
          f"built included) {1e4 * cpu_batched / n:.1f} s per 10,000: the better guide to a "
          f"quiet machine when the load average exceeds the cores")
    per_single = ref_s / done
    ratio = per_single / per_batched
    print(f"one by one (reference): {done} of the same samples (the first {per_chunk} of "
          f"each chunk, solved between the chunks), {1e3 * per_single:.2f} ms per sample; "
          f"batched {1e3 * per_batched:.3f} ms per sample: ratio {ratio:.1f}x (target >= "
          f"{TARGET_RATIO:.0f}x); in CPU time {1e3 * cpu_ref / done:.2f} against "
          f"{1e3 * cpu_batched / n:.3f} ms per sample = "
          f"{(cpu_ref / done) / (cpu_batched / n):.1f}x")

    # --- the whole spread path, local
    t0 = time.perf_counter()
    local = study.run_spread(plan, chunk_size=CHUNK)
    t_local = time.perf_counter() - t0
    print(f"spread run (local):     {n} samples in {t_local:.2f} s = {n / t_local:.0f} "
          f"samples/s (solve + per-unit figures and stresses)")

    # --- Dask local cluster against the plain local run
    if not args.no_dask:
        from fleetpower.executors import dask_executor

        t0 = time.perf_counter()
        with dask_executor(n_workers=2, processes=True) as run:
            t_up = time.perf_counter() - t0
            t1 = time.perf_counter()
            remote = study.run_spread(plan, chunk_size=CHUNK, executor=run)
            t_dask = time.perf_counter() - t1
        same = all(np.array_equal(remote.statistics.values(k), local.statistics.values(k),
                                  equal_nan=True)
                   for k in ("active|p_w", "idle|p_w", "active|v_dc_min_v"))
        print(f"dask local cluster:     {n} samples in {t_dask:.2f} s (+{t_up:.1f} s start-up) "
              f"against {t_local:.2f} s plain local = {t_local / t_dask:.2f}x; per 10,000: "
              f"{1e4 * t_dask / n:.0f} s vs {1e4 * t_local / n:.0f} s; results identical: "
              f"{same}")
        if not same:
            print("FAIL: the Dask run differs from the local run")
            return 1
    ok = True
    if ratio < TARGET_RATIO:
        print(f"MISSED: batched/one-by-one ratio {ratio:.1f}x < {TARGET_RATIO:.0f}x")
        ok = False
    if 1e4 * per_batched > TARGET_SOLVE_S_PER_10K:
        print(f"MISSED: {1e4 * per_batched:.1f} s of solve time per 10,000 samples > "
              f"{TARGET_SOLVE_S_PER_10K:.0f} s (load average {os.getloadavg()[0]:.2f} on "
              f"{os.cpu_count()} cores)")
        ok = False
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main())
