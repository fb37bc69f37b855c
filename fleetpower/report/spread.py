"""A spread run as a JSON-ready dict, its terminal rendering and its figures.

The terminal figures come from the dict (as for every other report), so ``--json`` and
the table agree. Owns: :func:`spread_to_dict`, :func:`render_spread`,
:func:`spread_figures`. May import ``spread`` and the plot helpers; never the CLI.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
from rich.markup import escape

from ..spread.study import SpreadResult
from .format import fmt, humanize, key_label_unit
from .terminal import numbered_notes

#: per state: quantities whose largest value is the bad end (the rest: the smallest)
_WORST_HIGH = ("p_w", "s_va", "i_rms_a", "thd_i_pct")
_WORST_LOW = ("pf", "v_dc_min_v", "v_out_min_v")

NON_ISOLATION_NOTE = (
    "NOT ISOLATED: a capacitive or resistive dropper's output sits at mains potential; "
    "every unit of this run can kill if touched or probed with earthed equipment.")


def _num(x) -> float | None:
    x = float(x)
    return x if math.isfinite(x) else None


def _spread_row(s) -> dict:
    row = {"key": s.key, "nominal": s.nominal, "distribution": s.distribution,
           "low": s.low, "high": s.high, "source": s.source}
    if s.distribution != "corners":
        row["band_pct"] = 100.0 * s.band
    if s.distribution == "normal":
        row["sigmas"] = s.sigmas
    if s.distribution == "corners":
        row["corners"] = list(s.corners)
    return row


def spread_to_dict(result: SpreadResult) -> dict:
    """Everything a spread run reports, JSON-ready (units in every key)."""
    plan, st = result.plan, result.statistics
    table = st.percentiles() if result.done else None
    figures, worst = [], []
    if table is not None:
        for name, row in table.iterrows():
            group, quantity = name.split("|", 1)
            figures.append({"group": group, "quantity": quantity,
                            **{k: _num(row[k]) for k in ("p5", "p50", "p95", "min", "max")},
                            "samples": int(row["samples"])})
            high = quantity in _WORST_HIGH or group == "stress"
            if (high or quantity in _WORST_LOW) and row["samples"] > 0:
                idx, value = st.worst(name, largest=high)
                worst.append({"group": group, "quantity": quantity,
                              "end": "max" if high else "min", "value": _num(value),
                              "unit": result.label(idx), "values": result.sample_values(idx),
                              "alike": st.alike(name, largest=high)})
    fails = st.failure_fractions() if result.done else {}
    failing = []
    for name, frac in (fails.items() if len(fails) else []):
        kind, check = name.split("|", 1)
        failing.append({"kind": kind, "check": check, "fraction": _num(frac)})
    out = {
        "design": plan.design.name,
        "file": plan.design.source,
        "topology": plan.design.topology,
        "mode": plan.mode,
        "seed": plan.seed if plan.mode == "monte-carlo" else None,
        "samples": {"requested": result.requested, "done": result.done,
                    "complete": not result.interrupted},
        "note": (f"interrupted: figures of the {result.done} of {result.requested} samples "
                 "done so far" if result.interrupted else None),
        "conditions": "each unit at its own sampled mains; stresses and limits evaluated "
                      "on each unit (the mains band replaces the fixed +10 % of `unit`)",
        "accuracy": _accuracy(plan),
        "caution": None if plan.design.is_isolated else NON_ISOLATION_NOTE,
        "tolerances": [_spread_row(s) for s in plan.spreads],
        "figures": figures,
        "failing": failing,
        "worst": worst,
        "ageing": None,
        "solve_s": result.solve_s,
        "warnings": [w.message for w in plan.range_warnings],
        "range_warnings": [w.to_dict() for w in plan.range_warnings],
    }
    ag = result.ageing
    if ag is not None:
        out["ageing"] = {
            "state": ag.state, "load_a": ag.load_a, "units": ag.units,
            "loss_per_year_pct": 100.0 * ag.loss_per_year,
            "voltage_accelerated": ag.voltage_accelerated,
            "years": [{"year": y, "capacitance_pct": 100.0 * f, "delivering_pct": 100.0 * d,
                       "v_dc_min_p5_v": _num(v), "charge_pump_nominal_a": p}
                      for y, f, d, v, p in zip(ag.years, ag.capacitance_factor,
                                               ag.delivering_fraction, ag.v_dc_min_p5_v,
                                               ag.charge_pump_nominal_a, strict=True)],
            "p5_fails_year": ag.p5_fails_year,
        }
    return out


def _accuracy(plan) -> dict:
    """The run's accuracy setting and what it was measured to cost in accuracy."""
    from ..spread.study import SPREAD_SAMPLES_PER_CYCLE

    n = plan.samples_per_cycle
    measured = {256: "worst error 0.36 % of I rms, 0.011 % of P",
                2048: "worst error 0.004 % of I rms, 0.001 % of P"}.get(n)
    note = (f"{n} steps per mains cycle"
            + (" (the spread default)" if n == SPREAD_SAMPLES_PER_CYCLE else "")
            + (f"; against the reference tests: {measured}" if measured else "")
            + " (DEVELOPERS.md, Accuracy per cost)")
    return {"steps_per_cycle": n, "periodic_rtol": plan.periodic_rtol, "note": note}


def _fmt(x, unit: str = "") -> str:
    return "—" if x is None else fmt(x, 4, unit)


#: the unit of a toleranced design value, read from its key's last word
_VALUE_UNITS = {"capacitance": "F", "resistance": "ohm", "voltage": "V", "frequency": "Hz",
                "inductance": "H", "current": "A", "power": "W"}


def _value_text(key: str, value: float) -> str:
    unit = next((u for w, u in _VALUE_UNITS.items() if key.endswith(w)), "")
    return fmt(value, 4, unit) if unit else f"{value:.4g}"


def render_spread(report: dict, console) -> None:
    """Print a spread report (from :func:`spread_to_dict`) as rich tables."""
    from rich import box
    from rich.table import Table

    def table(title):
        return Table(title=title, title_justify="left", box=box.SIMPLE_HEAD, pad_edge=False)

    s = report["samples"]
    what = (f"{s['done']} Monte Carlo samples (seed {report['seed']})"
            if report["mode"] == "monte-carlo" else f"{s['done']} corners")
    console.print(f"[bold]{report['design']}[/bold] — spread of a production run: {what}")
    console.print(f"Accuracy: {report['accuracy']['note']}")
    if report["note"]:
        console.print(f"[yellow]{report['note']}[/yellow]")
    if report["caution"]:
        console.print(f"[bold red]{report['caution']}[/bold red]")
    for w in report.get("warnings", []):
        console.print(f"[yellow]Warning: {escape(humanize(w))}[/yellow]")
    t = table("Toleranced values")
    for col in ("key", "nominal", "distribution", "band", "source"):
        t.add_column(col, overflow="fold", no_wrap=col == "key")
    sources: list[str] = []  # said once each, in full, under the table
    for r in report["tolerances"]:
        band = (f"±{r['band_pct']:g} %" + (f" = {r['sigmas']:g} σ" if "sigmas" in r else "")
                if "band_pct" in r else ", ".join(f"{c:.4g}" for c in r["corners"]))
        if r["source"] not in sources:
            sources.append(r["source"])
        t.add_row(r["key"], _value_text(r["key"], r["nominal"]), r["distribution"], band,
                  f"[{sources.index(r['source']) + 1}]")
    console.print(t)
    console.print(numbered_notes(sources))
    t = table(f"Percentiles ({report['conditions']})")
    for col in ("group", "quantity", "P5", "P50", "P95", "max"):
        t.add_column(col, justify="right" if col[0] in "Pm" else "left", overflow="fold")
    for r in report["figures"]:
        label, unit = key_label_unit(r["quantity"])
        t.add_row(r["group"], label, *[_fmt(r[k], unit) for k in ("p5", "p50", "p95", "max")])
    console.print(t)
    t = table("Units failing")
    for col in ("kind", "check", "failing"):
        t.add_column(col, justify="right" if col == "failing" else "left", overflow="fold")
    for r in report["failing"]:
        pct = "-" if r["fraction"] is None else f"{100 * r['fraction']:.1f} %"
        t.add_row(r["kind"], humanize(r["check"]), pct)
    console.print(t)
    if report["worst"]:
        t = table("Worst unit per figure")
        for col in ("group", "quantity", "end", "value", "which unit"):
            t.add_column(col, overflow="fold", justify="right" if col == "value" else "left")
        for r in report["worst"]:
            label, unit = key_label_unit(r["quantity"])
            # the first of several units alike (to rounding) says so
            alike = f" (+{r['alike'] - 1:,} alike)" if r["alike"] > 1 else ""
            t.add_row(r["group"], label, r["end"], _fmt(r["value"], unit), r["unit"] + alike)
        console.print(t)
    ag = report["ageing"]
    if ag:
        t = table(f"Ageing: state '{ag['state']}' ({ag['load_a'] * 1e3:.1f} mA) on "
                        f"{ag['units']} units, series capacitor loses "
                        f"{ag['loss_per_year_pct']:.2f} %/year")
        for col in ("year", "C %", "units delivering", "P5 reservoir min V",
                    "charge-pump limit (nominal) mA"):
            t.add_column(col, justify="right")
        for y in ag["years"]:
            t.add_row(str(y["year"]), f"{y['capacitance_pct']:.1f}",
                      f"{y['delivering_pct']:.1f} %", _fmt(y["v_dc_min_p5_v"]),
                      f"{y['charge_pump_nominal_a'] * 1e3:.2f}")
        console.print(t)
        year = ag["p5_fails_year"]
        last = ag["years"][-1]["year"]
        console.print(
            f"The P5 unit can no longer deliver '{ag['state']}' from year {year}."
            if year is not None else
            f"The P5 unit still delivers '{ag['state']}' at year {last}.")
    console.print(f"[dim]run time {report['solve_s']:.1f} s (solves, per-unit figures, stresses"
                  " and limits)[/dim]")


#: the figures of a spread run (:func:`spread_figures`), by file stem
SPREAD_FIGURES = ("spread_p_w", "spread_v_dc_min_v")


def spread_figures(result: SpreadResult, folder, overwrite: bool = True) -> list[Path]:
    """Write a percentile plot (empirical CDF) per state of P and of the reservoir minimum,
    PNG and SVG each (:data:`SPREAD_FIGURES`); an existing file is refused unless
    ``overwrite``."""
    from .plots import _floor_axis, _save, require_matplotlib

    plt = require_matplotlib()
    out = Path(folder)
    out.mkdir(parents=True, exist_ok=True)
    paths = []
    st = result.statistics
    for quantity, label, unit in (("p_w", "input power P [W]", "W"),
                                  ("v_dc_min_v", "reservoir minimum [V]", "V")):
        fig, ax = plt.subplots(figsize=(6.4, 4.0))
        every = []
        for state in result.plan.design.states:
            v = np.sort(st.values(f"{state}|{quantity}"))
            v = v[np.isfinite(v)]
            if v.size:
                every.append(v)
                ax.plot(v, 100.0 * (np.arange(1, v.size + 1) / v.size), label=state,
                        drawstyle="steps-post")
        for p in (5, 50, 95):
            ax.axhline(p, color="0.8", lw=0.8, zorder=0)
            ax.text(1.0, p, f" P{p}", transform=ax.get_yaxis_transform(), fontsize=7,
                    color="0.4", va="center", ha="left")
        if every:
            _floor_axis(ax, np.concatenate(every), axis="x", unit=unit)
        ax.set_ylim(0, 100)
        ax.set_xlabel(label)
        ax.set_ylabel("units at or below [%]")
        ax.set_title(f"{result.plan.design.name}: {result.done} units")
        ax.legend(title="state", fontsize=8)
        fig.tight_layout()
        paths += _save(fig, out, f"spread_{quantity}", overwrite)
        plt.close(fig)
    return paths
