"""How fast the command line answers: each target against what this run measures.

Run from the repository root:

    python benchmarks/bench_cli_speed.py            # everything (about 2 minutes)
    python benchmarks/bench_cli_speed.py --quick    # without the cold-compile run
    python benchmarks/bench_cli_speed.py --fleet-only   # only the fleet of 1e5 groups

Measures, in fresh processes of this interpreter (``python -m fleetpower.cli``, this
checkout first on the path), the median wall time of REPEATS runs of

* ``fleetpower --help``                         target <= 0.5 s
* ``fleetpower limits``                         target <= 0.5 s
* ``fleetpower unit examples/nightlight-dropper.toml`` with the compiled engine cached
  (warm)                                        target <= 1.5 s
* the first run on a machine: the same ``unit`` with an empty ``NUMBA_CACHE_DIR``, so the
  engine compiles; the compile time is that run minus the warm median
                                                target <= 15 s

and, in this process, a fleet of 100,000 groups (1,000 ``[[group]]`` tables and 99,000
inventory rows over 20 designs): ``load_fleet`` + ``evaluate_fleet`` with the designs'
simulations already done (they are per design, not per group; printed apart)
                                                target <= 2 s

The package's bytecode is cached as an installed package's is (the first, untimed run of
each command writes it, even when the calling environment sets PYTHONDONTWRITEBYTECODE).
The reference measured in the same run is the interpreter's own start
(``python -c pass``); every figure is printed beside it, with the load average, because
the machine may be shared. Timing is printed, never asserted in the tests; this script
exits 1 when a target is missed.
"""

from __future__ import annotations

import argparse
import os
import resource
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

REPO = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(REPO))
sys.path.insert(0, str(REPO / "benchmarks"))

import bench_fleet_scale as bfs  # noqa: E402

REPEATS = 5
UNIT_EXAMPLE = "examples/nightlight-dropper.toml"
TARGETS_S = {
    "--help": 0.5,
    "limits": 0.5,
    "unit (warm)": 1.5,
    "first-run compile": 15.0,
    "fleet of 1e5 groups": 2.0,
}
N_GROUPS = 100_000
N_TABLES = 1_000


def _env(**extra: str) -> dict:
    env = dict(os.environ)
    env["PYTHONPATH"] = str(REPO) + os.pathsep + env.get("PYTHONPATH", "")
    # Python may cache the package's bytecode, as it does for an installed package (pip
    # compiles it at install): a calling environment that forbids writing it
    # (PYTHONDONTWRITEBYTECODE) would otherwise time Python's compiler on every run
    env.pop("PYTHONDONTWRITEBYTECODE", None)
    env.update(extra)
    return env


def _children_cpu() -> float:
    ru = resource.getrusage(resource.RUSAGE_CHILDREN)
    return ru.ru_utime + ru.ru_stime


CPU: dict[str, float] = {}  # CPU seconds (user + system) beside each wall time


def run_once(args: list[str], env: dict | None = None) -> float:
    """Wall time [s] of one fresh process ``python *args`` (output discarded).

    Its CPU time (user + system, all threads) is kept in ``CPU["last"]``: on a shared
    machine that is the better guide to the wall time on a quiet one.
    """
    c0 = _children_cpu()
    t0 = time.perf_counter()
    proc = subprocess.run([sys.executable, *args], cwd=REPO, env=env or _env(),
                          stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    dt = time.perf_counter() - t0
    CPU["last"] = _children_cpu() - c0
    if proc.returncode != 0:
        raise SystemExit(f"bench: {' '.join(args)} exited {proc.returncode}: "
                         f"{proc.stderr.decode(errors='replace')[-400:]}")
    return dt


def median_run(args: list[str], repeats: int = REPEATS) -> float:
    """Median wall time [s]; the median CPU time goes to ``CPU[" ".join(args)]``."""
    run_once(args)  # warm the file cache
    walls, cpus = [], []
    for _ in range(repeats):
        walls.append(run_once(args))
        cpus.append(CPU["last"])
    CPU[" ".join(args)] = statistics.median(cpus)
    return statistics.median(walls)


def cold_compile_s(warm_unit_s: float) -> float:
    """The first run with an empty numba cache, minus the warm run [s]."""
    cache = tempfile.mkdtemp(prefix="fleetpower-numba-")
    try:
        first = run_once(["-m", "fleetpower.cli", "unit", UNIT_EXAMPLE],
                         env=_env(NUMBA_CACHE_DIR=cache))
    finally:
        shutil.rmtree(cache, ignore_errors=True)
    CPU["first-run compile"] = CPU["last"] - CPU["-m fleetpower.cli unit " + UNIT_EXAMPLE]
    return first - warm_unit_s


def fleet_1e5_s() -> tuple[float, float, float, int]:
    """(load + evaluate, load, simulate, groups) for a fleet of N_GROUPS groups."""
    from fleetpower.fleet import evaluate_fleet
    from fleetpower.io.fleet_file import load_fleet

    rng = np.random.default_rng(2024)
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        designs = bfs.write_designs(folder)
        bfs.N_GROUPS, bfs.N_UNITS = N_GROUPS, N_GROUPS * 10
        groups = bfs._groups(designs, rng)
        path = write_fleet(folder, "fleet-1e5.toml", groups)
        spec = load_fleet(path)  # warm-up: imports, design files, numba dispatch
        bfs.simulate_fresh(spec.designs)
        cat, t_sim = bfs.simulate_fresh(spec.designs)
        loads, evals, cpus = [], [], []
        for _ in range(3):
            c0 = time.process_time()
            t0 = time.perf_counter()
            spec = load_fleet(path)
            t1 = time.perf_counter()
            evaluate_fleet(spec, cat)
            t2 = time.perf_counter()
            cpus.append(time.process_time() - c0)
            loads.append(t1 - t0)
            evals.append(t2 - t1)
        n = len(spec.groups)
        CPU["fleet of 1e5 groups"] = statistics.median(cpus)
    t_load, t_eval = statistics.median(loads), statistics.median(evals)
    return t_load + t_eval, t_load, t_sim, n


def write_fleet(folder: Path, name: str, groups: list[dict]) -> Path:
    """bench_fleet_scale's fleet file with N_TABLES tables and the rest as inventory."""
    path = bfs.write_fleet(folder, name, groups[: 2 * N_TABLES])  # N_TABLES tables + CSV
    inv = folder / f"{Path(name).stem}-inventory.csv"
    rows = inv.read_text(encoding="utf-8").splitlines()
    for g in groups[2 * N_TABLES:]:
        hours = " ".join(f"{s}={h}" for s, h in g.get("hours", {}).items())
        rows.append(",".join([g["name"], g["design"], str(g["count"]), g["phase"], hours,
                              " ".join(g.get("profile", [])), str(g.get("diversity", ""))]))
    inv.write_text("\n".join(rows) + "\n", encoding="utf-8")
    return path


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="skip the cold-compile run (~30 s)")
    ap.add_argument("--fleet-only", action="store_true",
                    help="only the fleet of 1e5 groups (in this process; no fresh processes)")
    opts = ap.parse_args(argv)
    load0 = os.getloadavg()
    t_python = median_run(["-c", "pass"])
    got: dict[str, float] = {}
    for what, argv in (("--help", ["--help"]), ("limits", ["limits"]),
                       ("unit (warm)", ["unit", UNIT_EXAMPLE])):
        if opts.fleet_only:
            break
        got[what] = median_run(["-m", "fleetpower.cli", *argv])
        CPU[what] = CPU[" ".join(["-m", "fleetpower.cli", *argv])]
    if not (opts.quick or opts.fleet_only):
        got["first-run compile"] = cold_compile_s(got["unit (warm)"])
    total, t_load, t_sim, n = fleet_1e5_s()
    got["fleet of 1e5 groups"] = total
    load1 = os.getloadavg()

    print(f"machine: {os.cpu_count()} cores, load average {load0[0]:.2f} before and "
          f"{load1[0]:.2f} after; medians of {REPEATS} fresh processes")
    print(f"reference: the interpreter's own start (python -c pass) {t_python:.3f} s")
    print("verdicts are on wall time; the CPU time (user + system, all threads) beside it is "
          "the better guide to a quiet machine when the load average exceeds the cores")
    missed = 0
    for what, target in TARGETS_S.items():
        if what not in got:
            print(f"  {what:<22} skipped ({'--fleet-only' if opts.fleet_only else '--quick'})")
            continue
        t = got[what]
        ok = t <= target
        missed += not ok
        print(f"  {what:<22} {t:7.3f} s   target <= {target:g} s   "
              f"{'meets' if ok else 'MISSES'} ({t / target:.0%} of it; "
              f"{t / t_python:.1f}x the interpreter start); CPU {CPU[what]:.3f} s")
    print(f"  fleet detail: {n:,} groups; load_fleet {t_load:.3f} s, evaluate_fleet "
          f"{total - t_load:.3f} s; the 20 designs' simulation {t_sim:.3f} s (not counted)")
    return 1 if missed else 0


if __name__ == "__main__":
    sys.exit(main())
