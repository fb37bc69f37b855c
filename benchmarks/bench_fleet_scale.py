"""How fleet evaluation scales: a million units in a thousand groups.

Builds, in a temporary folder, 20 distinct designs (15 capacitive droppers varying the
series capacitor, zener voltage and load; 5 switch-mode variants) and a fleet of 1000
groups totalling 1,000,000 units across L1/L2/L3/balanced with mixed hours, profiles and
diversity (half as [[group]] tables, half as a CSV inventory). Then it times

* ``load_fleet`` (parsing and validation),
* ``unit_catalogue`` (simulating every design-state once),
* ``evaluate_fleet(spec, catalogue)``, median of repeats, against the 2 s target,
* the same 1000 groups with counts x1 and x100 (cost should not depend on unit count),
* the same 1000 groups drawing on 5 vs 20 distinct designs (cost grows with these),

and prints the ratios. Timing is printed, never asserted. Run from the repository root:

    python benchmarks/bench_fleet_scale.py
"""

from __future__ import annotations

import dataclasses
import json
import statistics
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

REPO = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(REPO))

from fleetpower import simulate  # noqa: E402
from fleetpower.fleet import evaluate_fleet, unit_catalogue  # noqa: E402
from fleetpower.io.fleet_file import load_fleet  # noqa: E402

EXAMPLES = REPO / "examples"
N_GROUPS = 1000
N_UNITS = 1_000_000
TARGET_S = 2.0
REPEATS = 11
PHASES = ("L1", "L2", "L3", "balanced")


def _sub(text: str, key: str, value: str) -> str:
    """Replace the value of ``key = "..."`` (first occurrence) in a design file's text."""
    lines = text.splitlines()
    for k, line in enumerate(lines):
        if line.split("=")[0].strip() == key:
            lines[k] = f'{key} = "{value}"'
            return "\n".join(lines) + "\n"
    raise KeyError(key)


def write_designs(folder: Path) -> list[str]:
    dropper = (EXAMPLES / "nightlight-dropper.toml").read_text(encoding="utf-8")
    smps = (EXAMPLES / "corridor-smps.toml").read_text(encoding="utf-8")
    names = []
    for c_uf in (2.2, 2.7, 3.3, 3.9, 4.7):
        for vz, load_ma in ((12, 20), (15, 15), (12, 28)):
            t = _sub(dropper, "series_capacitance", f"{c_uf} uF")
            t = _sub(t, "zener_voltage", f"{vz} V")
            t = _sub(t, "active", f"{load_ma} mA")
            t = _sub(t, "name", f"dropper {c_uf} uF, {vz} V zener, {load_ma} mA")
            name = f"dropper-{c_uf}uF-{vz}V-{load_ma}mA.toml"
            (folder / name).write_text(t, encoding="utf-8")
            names.append(name)
    for rated_w, bulk_uf, active_w in (
        (3, 4.7, 0.1),
        (5, 10, 0.135),
        (5, 22, 0.3),
        (8, 22, 0.5),
        (8, 10, 1.2),
    ):
        t = _sub(smps, "rated_power", f"{rated_w} W")
        t = _sub(t, "bulk_capacitance", f"{bulk_uf} uF")
        t = _sub(t, "active", f"{active_w} W")
        t = _sub(t, "name", f"flyback {rated_w} W, {bulk_uf} uF bulk, {active_w} W load")
        name = f"smps-{rated_w}W-{bulk_uf}uF-{active_w}W.toml"
        (folder / name).write_text(t, encoding="utf-8")
        names.append(name)
    return names


def _groups(designs: list[str], rng: np.random.Generator) -> list[dict]:
    out = []
    per = N_UNITS // N_GROUPS
    for k in range(N_GROUPS):
        g = {
            "name": f"g{k:04d}",
            "design": designs[k % len(designs)],
            "count": per,
            "phase": PHASES[k % len(PHASES)],
        }
        if k % 2 == 0:
            active = int(rng.integers(0, 25))
            g["hours"] = {"active": active, "idle": 24 - active}
            if k % 6 == 0:
                g["diversity"] = round(float(rng.uniform(0.3, 1.0)), 3)
        else:
            g["profile"] = [("active" if x else "idle") for x in rng.random(24) < 0.4]
        out.append(g)
    return out


def _value(v) -> str:
    if isinstance(v, dict):
        return "{ " + ", ".join(f"{k} = {_value(x)}" for k, x in v.items()) + " }"
    return json.dumps(v)


def write_fleet(folder: Path, name: str, groups: list[dict]) -> Path:
    """Half of the groups as [[group]] tables, the other half as a CSV inventory."""
    half = len(groups) // 2
    inv = f"{Path(name).stem}-inventory.csv"
    lines = [
        f"name = {_value(name)}",
        f"inventory = {_value(inv)}",
        "",
        "[site]",
        'system = "three-phase-wye"',
        'voltage = "120 V"',
        'frequency = "60 Hz"',
        'short_circuit_current = "20 kA"',
        "",
        "[tariff]",
        "energy_price = 0.15",
        "demand_price = 12.0",
    ]
    for g in groups[:half]:
        lines += ["", "[[group]]"] + [f"{k} = {_value(v)}" for k, v in g.items()]
    (folder / name).write_text("\n".join(lines) + "\n", encoding="utf-8")
    rows = ["name,design,count,phase,hours,profile,diversity"]
    for g in groups[half:]:
        hours = " ".join(f"{s}={h}" for s, h in g.get("hours", {}).items())
        rows.append(
            ",".join(
                [
                    g["name"],
                    g["design"],
                    str(g["count"]),
                    g["phase"],
                    hours,
                    " ".join(g.get("profile", [])),
                    str(g.get("diversity", "")),
                ]
            )
        )
    (folder / inv).write_text("\n".join(rows) + "\n", encoding="utf-8")
    return folder / name


def timed(*fns, repeats: int = REPEATS) -> list[float]:
    """Median wall time of each ``fn()`` [s]; runs interleave so machine drift hits all."""
    for fn in fns:  # warm-up
        fn()
    times: list[list[float]] = [[] for _ in fns]
    for _ in range(repeats):
        for k, fn in enumerate(fns):
            t0 = time.perf_counter()
            fn()
            times[k].append(time.perf_counter() - t0)
    return [statistics.median(t) for t in times]


def scaled(spec, factor: int):
    return dataclasses.replace(
        spec, groups=[dataclasses.replace(g, count=g.count * factor) for g in spec.groups]
    )


def simulate_fresh(designs) -> tuple[dict, float]:
    """``unit_catalogue`` from an empty in-process cache; (catalogue, seconds)."""
    simulate.CACHE.clear()
    t0 = time.perf_counter()
    cat = unit_catalogue(designs)
    return cat, time.perf_counter() - t0


def main() -> None:
    rng = np.random.default_rng(2024)
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        designs = write_designs(folder)
        groups = _groups(designs, rng)
        assert sum(g["count"] for g in groups) == N_UNITS
        path20 = write_fleet(folder, "fleet-20.toml", groups)
        # the same groups (counts, phases, occupancy) drawing on only 5 of the designs
        five = [designs[0], designs[6], designs[12], designs[15], designs[18]]
        path5 = write_fleet(
            folder, "fleet-5.toml", [{**g, "design": five[k % 5]} for k, g in enumerate(groups)]
        )

        t0 = time.perf_counter()
        spec = load_fleet(path20)
        t_load = time.perf_counter() - t0
        spec5 = load_fleet(path5)
        n_states = sum(len(d.states) for d in spec.designs.values())
        n_states5 = sum(len(d.states) for d in spec5.designs.values())

        simulate_fresh(spec5.designs)  # warm-up: JIT dispatch and the thread pool
        cat5, t_sim5 = simulate_fresh(spec5.designs)
        cat, t_sim = simulate_fresh(spec.designs)

        res = evaluate_fleet(spec, cat)
        spec100 = scaled(spec, 100)
        spec_iec = dataclasses.replace(spec, summation="iec61000-3-6")
        (t_eval,) = timed(lambda: evaluate_fleet(spec, cat))
        t_x1, t_x100 = timed(
            lambda: evaluate_fleet(spec, cat), lambda: evaluate_fleet(spec100, cat)
        )
        t_d5, t_d20 = timed(lambda: evaluate_fleet(spec5, cat5), lambda: evaluate_fleet(spec, cat))
        (t_iec,) = timed(lambda: evaluate_fleet(spec_iec, cat))

    verdict = "meets" if t_eval < TARGET_S else "MISSES"
    print(
        f"fleet: {res.units:,} units in {len(spec.groups)} groups, {len(spec.designs)} "
        f"designs ({n_states} design-states), three-phase wye 120 V 60 Hz"
    )
    print(
        f"  peak {res.p_kw:,.1f} kW, {res.q1_kvar:,.1f} kvar, {res.s_kva:,.1f} kVA; "
        f"neutral {res.neutral_i_rms_a:,.1f} A rms; {res.e_kwh_per_year:,.0f} kWh/yr"
    )
    print(f"load_fleet (500 [[group]] tables + 500 CSV rows):  {t_load:8.3f} s")
    print(f"unit_catalogue, {n_states} design-states simulated once:  {t_sim:8.3f} s")
    print(
        f"evaluate_fleet, median of {REPEATS}:                   {t_eval:8.4f} s   "
        f"{verdict} the {TARGET_S:.0f} s target ({t_eval / TARGET_S:.1%} of it)"
    )
    print(f"  with IEC 61000-3-6 summation:                  {t_iec:8.4f} s")
    print("cost vs unit count (same 1000 groups, interleaved medians):")
    print(f"  counts x1   ({N_UNITS:.0e} units): evaluate {t_x1:.4f} s")
    print(
        f"  counts x100 ({100 * N_UNITS:.0e} units): evaluate {t_x100:.4f} s   "
        f"ratio {t_x100 / t_x1:.2f} (expect ~1)"
    )
    print("cost vs distinct designs (same 1000 groups):")
    print(
        f"  {len(spec5.designs):2d} designs ({n_states5} states): simulate {t_sim5:.3f} s, "
        f"evaluate {t_d5:.4f} s"
    )
    print(
        f"  {len(spec.designs):2d} designs ({n_states} states): simulate {t_sim:.3f} s, "
        f"evaluate {t_d20:.4f} s"
    )
    print(
        f"  ratio 20/5: simulate {t_sim / t_sim5:.2f}, evaluate {t_d20 / t_d5:.2f} "
        "(simulation grows with designs; evaluation is dominated by per-group bookkeeping)"
    )


if __name__ == "__main__":
    main()
