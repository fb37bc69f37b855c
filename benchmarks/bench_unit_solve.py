"""Time the steady-state solve per unit-state against the brute-force Radau reference.

Run from the repository root:  python benchmarks/bench_unit_solve.py

Measures, in one process (numba warmed first):
  * fleetpower.simulate.run([Case(design, state)], cache=None)  -- the whole per-state
    path, uncached;
  * fleetpower.engine.solver.solve_periodic on one row from fleetpower.simulate.circuit_rows;
  * the same rows for a batch of 64 variants (per-variant cost);
  * tests/reference_circuits.simulate_reference (Radau, rtol 1e-9, from t = 0 until the
    line current repeats to 1e-5), which reaches the same accuracy as the engine: the
    acceptance tests find the two within ~1e-5 of each other.
Targets: <= 20 ms per unit-state, and >= 20x faster than the brute force.
"""

from __future__ import annotations

import statistics
import sys
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT / "tests"))

import reference_circuits as rc  # noqa: E402

from fleetpower import simulate as sim  # noqa: E402
from fleetpower.engine import layout, solver  # noqa: E402

TARGET_MS = 20.0
TARGET_RATIO = 20.0
REPEATS = 25
BRUTE_REPEATS = 3
BATCH = 64
CASES = [
    ("dropper-half-wave", "active"),
    ("dropper-bridge", "active"),
    ("resistive-half-wave", "active"),
    ("smps-bridge", "active"),
]


def median_ms(fn, repeats: int) -> float:
    times = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return 1e3 * statistics.median(times)


def main() -> int:
    rows_out = []
    all_ok = True
    for key, state in CASES:
        design = rc.design(key)
        p, x0 = sim.circuit_rows(design, state)
        # warm numba (compilation or cache load) and the code paths once
        sim.run([sim.Case(design, state)], cache=None)
        solver.solve_periodic(p[None, :], x0[None, :])
        t_sim = median_ms(
            lambda d=design, s=state: sim.run([sim.Case(d, s)], cache=None), REPEATS
        )
        t_raw = median_ms(
            lambda p=p, x0=x0: solver.solve_periodic(p[None, :], x0[None, :]), REPEATS
        )
        # a batch of 64 variants: the load swept from 50 % to 100 % of the state's
        rows, x0s = [], []
        for frac in np.linspace(0.5, 1.0, BATCH):
            if design.is_dropper:
                pv, xv = sim.circuit_rows(
                    design, state, load_a=frac * design.load_current_a(state)
                )
            else:
                pv, xv = sim.circuit_rows(design, state)
                pv = pv.copy()
                pv[layout.param_index("p_converter_in_w")] *= frac
            rows.append(pv)
            x0s.append(xv)
        prm, xx = np.array(rows), np.array(x0s)
        solver.solve_periodic(prm, xx)
        t_batch = median_ms(lambda prm=prm, xx=xx: solver.solve_periodic(prm, xx), 5) / BATCH
        t_brute = median_ms(lambda d=design, s=state: rc.simulate_reference(d, s), BRUTE_REPEATS)
        ratio = t_brute / t_sim
        ok = t_sim <= TARGET_MS and ratio >= TARGET_RATIO
        all_ok &= ok
        rows_out.append((f"{key}/{state}", t_sim, t_raw, t_batch, t_brute, ratio, ok))

    head = (
        f"{'case':28s} {'simulate':>9s} {'raw solve':>9s} {'batch/var':>9s} "
        f"{'Radau ref':>10s} {'ratio':>7s}  targets"
    )
    print(
        f"median ms per unit-state ({REPEATS} repeats; batch of {BATCH}; reference "
        f"{BRUTE_REPEATS} repeats)"
    )
    print(head)
    print("-" * len(head))
    for name, t_sim, t_raw, t_batch, t_brute, ratio, ok in rows_out:
        print(
            f"{name:28s} {t_sim:9.2f} {t_raw:9.2f} {t_batch:9.2f} {t_brute:10.1f} "
            f"{ratio:6.0f}x  {'ok' if ok else 'MISSED'}"
        )
    print(
        f"targets: simulate <= {TARGET_MS:.0f} ms per unit-state and >= {TARGET_RATIO:.0f}x "
        f"faster than the Radau reference: {'all hold' if all_ok else 'NOT all hold'}"
    )
    return 0 if all_ok else 1


if __name__ == "__main__":
    sys.exit(main())
