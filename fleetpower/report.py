"""Rendering: JSON-ready dictionaries and rich terminal summaries.

Every figure shown on the terminal is taken from the same dictionary that ``--json``
prints, so the two can never disagree beyond the displayed digits.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np
from rich import box
from rich.console import Console, Group
from rich.panel import Panel
from rich.table import Table
from rich.text import Text

from .errors import FleetpowerError
from .pq.spectrum import harmonic_table
from .supply import StateResult, UnitAnalysis

VERDICT_MARK = {
    "pass": "PASS",
    "fail": "FAIL",
    "unrated": "no rating",
    "note": "info",
    "not applicable": "n/a",
}
VERDICT_STYLE = {"pass": "green", "fail": "bold red", "unrated": "yellow", "note": "cyan",
                 "not applicable": "dim"}


def _clean(x: Any) -> Any:
    """Make a value JSON-safe: numpy scalars to Python, NaN/inf refused loudly."""
    if isinstance(x, dict):
        return {k: _clean(v) for k, v in x.items()}
    if isinstance(x, (list, tuple)):
        return [_clean(v) for v in x]
    if isinstance(x, (np.floating, float)):
        v = float(x)
        if not math.isfinite(v):
            raise FleetpowerError("a reported figure came out NaN or infinite; "
                                  "refusing to print it (please report this design)")
        return v
    if isinstance(x, (np.integer,)):
        return int(x)
    if isinstance(x, np.bool_):
        return bool(x)
    return x


def state_to_dict(r: StateResult) -> dict:
    """JSON-ready figures of one state (keys carry their units)."""
    q = r.pq
    table = harmonic_table(q.i_h_a)
    return {
        "state": r.state,
        "v_rms_v": q.v_rms_v,
        "i_rms_a": q.i_rms_a,
        "i_peak_a": q.i_peak_a,
        "crest_factor": q.crest_factor,
        "p_w": q.p_w,
        "s_va": q.s_va,
        "q1_var": q.q1_var,
        "p1_w": q.p1_w,
        "s1_va": q.s1_va,
        "n_var": q.n_var,
        "d_i_var": q.d_i_var,
        "pf": q.pf,
        "dpf": q.dpf,
        "thd_i_pct": q.thd_i_pct,
        "i_dc_mains_a": q.i_dc_a,
        "harmonics": [
            {"h": int(row.h), "i_rms_a": row.i_rms_a,
             "pct_of_fundamental": row.pct_of_fundamental, "phase_deg": row.phase_deg}
            for row in table.itertuples()
        ],
        "losses_w": dict(r.losses_w),
        "delivered_w": r.balance.delivered_w,
        "balance": {
            "p_in_w": r.balance.p_in_w,
            "delivered_w": r.balance.delivered_w,
            "losses_w": r.balance.losses_w,
            "source_resistance_w": r.balance.source_resistance_w,
            "residual_w": r.balance.residual_w,
            "residual_pct": r.balance.residual_pct,
        },
        "output": {
            "v_dc_v": r.v_dc_v,
            "v_dc_min_v": r.v_dc_min_v,
            "ripple_v_pp": r.ripple_v_pp,
            "i_dc_a": r.i_dc_a,
            "i_load_set_a": r.load_a,
            "in_regulation": r.in_regulation,
        },
        "shooting_iterations": r.iterations,
    }


def unit_to_dict(u: UnitAnalysis) -> dict:
    """JSON-ready report of a unit analysis.

    The top level holds the design's figures and a ``states`` list; when exactly one
    state was analysed, its figures also stand at the top level.
    """
    d = u.design
    out: dict[str, Any] = {
        "design": d.name,
        "file": d.source,
        "topology": d.topology,
        "isolated": d.is_isolated,
        "caution": u.caution,
        "unit_price": d.unit_price,
        "mains": {"v_rms_v": d.mains.voltage, "f_hz": d.mains.frequency},
        "states": [state_to_dict(r) for r in u.states],
        "stresses": [
            {"item": s.item, "value": s.value, "unit": s.unit, "limit": s.limit,
             "used_pct": s.used_pct, "verdict": s.verdict, "condition": s.condition,
             "note": s.note}
            for s in u.stresses
        ],
        "warnings": list(u.warnings),
    }
    if u.max_deliverable_a is not None:
        out["max_deliverable_i_dc_a"] = u.max_deliverable_a
    if u.hand is not None:
        h = u.hand
        out["hand_estimate"] = {
            "xc_ohm": h.xc_ohm, "i_cap_rms_a": h.i_cap_rms_a, "rule": h.rule,
            "hand_estimate_i_dc_a": h.hand_estimate_a, "sine_average_i_dc_a": h.sine_average_a,
            "charge_pump_i_dc_a": h.charge_pump_a, "simulated_max_i_dc_a": h.simulated_max_a,
            "explanation": h.explanation,
        }
    if "compliance" in u.extra:
        out["compliance"] = u.extra["compliance"]
    if len(u.states) == 1:
        for k, v in out["states"][0].items():
            out.setdefault(k, v)
    return _clean(out)


# ----------------------------------------------------------------------------------
# terminal
# ----------------------------------------------------------------------------------
def fmt(x: float | None, digits: int = 3, unit: str = "") -> str:
    """Engineering-friendly number with ``digits`` significant figures and a unit."""
    if x is None:
        return "—"
    if abs(x) < 1e-9:  # below any current or power the tool resolves
        s = "0"
    else:
        mag = math.floor(math.log10(abs(x)))
        dec = max(digits - 1 - mag, 0)
        s = f"{x:.{dec}f}"
    return f"{s} {unit}".rstrip()


def _verdict(v: str) -> Text:
    return Text(VERDICT_MARK.get(v, v), style=VERDICT_STYLE.get(v, ""))


def _state_table(states: list[dict]) -> Table:
    t = Table(box=box.SIMPLE_HEAD, title="Drawn from the mains", title_justify="left",
              pad_edge=False)
    t.add_column("quantity")
    for s in states:
        t.add_column(s["state"], justify="right")
    rows = [
        ("V rms", "v_rms_v", 4, "V"), ("I rms", "i_rms_a", 4, "A"), ("I peak", "i_peak_a", 4, "A"),
        ("crest factor", "crest_factor", 3, ""), ("P real", "p_w", 4, "W"),
        ("S apparent", "s_va", 4, "VA"), ("Q1 fundamental", "q1_var", 4, "var"),
        ("DPF", "dpf", 3, ""), ("PF", "pf", 3, ""), ("THD of current", "thd_i_pct", 3, "%"),
    ]
    for label, key, dig, unit in rows:
        t.add_row(label, *[fmt(s[key], dig, unit) for s in states])
    t.add_row("Q1 sign", *["leading (capacitive)" if s["q1_var"] < 0 else "lagging"
                            for s in states])
    return t


def _harmonic_table(state: dict) -> Table:
    t = Table(box=box.SIMPLE_HEAD, title=f"Harmonic currents, state '{state['state']}' "
              "(rms; % of I1; phase vs V1)", title_justify="left", pad_edge=False)
    groups = 3
    for _ in range(groups):
        t.add_column("h", justify="right", style="bold")
        t.add_column("mA", justify="right")
        t.add_column("%", justify="right")
        t.add_column("deg", justify="right")
    odd = [h for h in state["harmonics"] if h["h"] % 2 == 1 or h["pct_of_fundamental"] >= 0.5]
    per = math.ceil(len(odd) / groups)
    for row in range(per):
        cells = []
        for g in range(groups):
            k = g * per + row
            if k < len(odd):
                h = odd[k]
                cells += [str(h["h"]), fmt(h["i_rms_a"] * 1e3, 3), fmt(h["pct_of_fundamental"], 3),
                          f"{h['phase_deg']:.0f}"]
            else:
                cells += ["", "", "", ""]
        t.add_row(*cells)
    t.caption = "even orders below 0.5 % of I1 not shown; all 50 orders are in --json"
    return t


def _loss_table(states: list[dict]) -> Table:
    t = Table(box=box.SIMPLE_HEAD, title="Where the input power goes", title_justify="left",
              pad_edge=False)
    t.add_column("")
    for s in states:
        t.add_column(s["state"], justify="right")
    names: list[str] = []
    for s in states:
        for k in s["losses_w"]:
            if k not in names:
                names.append(k)
    for n in names:
        t.add_row(n, *[fmt(s["losses_w"].get(n, 0.0), 3, "W") for s in states])
    if any(s["balance"]["source_resistance_w"] for s in states):
        t.add_row("mains source resistance",
                  *[fmt(s["balance"]["source_resistance_w"], 3, "W") for s in states])
    t.add_row("delivered to the load", *[fmt(s["delivered_w"], 3, "W") for s in states],
              style="bold")
    t.add_row("input P", *[fmt(s["balance"]["p_in_w"], 4, "W") for s in states], style="bold")
    t.add_row("balance residual",
              *[f"{s['balance']['residual_pct']:+.1e} %" for s in states], style="dim")
    return t


def _output_table(states: list[dict]) -> Table:
    t = Table(box=box.SIMPLE_HEAD, title="Output", title_justify="left", pad_edge=False)
    t.add_column("")
    for s in states:
        t.add_column(s["state"], justify="right")
    t.add_row("reservoir mean", *[fmt(s["output"]["v_dc_v"], 4, "V") for s in states])
    t.add_row("reservoir minimum", *[fmt(s["output"]["v_dc_min_v"], 4, "V") for s in states])
    t.add_row("ripple", *[fmt(s["output"]["ripple_v_pp"], 3, "V p-p") for s in states])
    t.add_row("load current", *[fmt(s["output"]["i_dc_a"] * 1e3, 3, "mA") for s in states])
    t.add_row("in regulation", *["yes" if s["output"]["in_regulation"] else "NO" for s in states])
    return t


def _stress_table(stresses: list[dict]) -> Table:
    t = Table(box=box.SIMPLE_HEAD, title="Component stresses", title_justify="left",
              pad_edge=False)
    t.add_column("item")
    t.add_column("value", justify="right")
    t.add_column("rating", justify="right")
    t.add_column("verdict")
    t.add_column("condition / note", overflow="fold")
    for s in stresses:
        t.add_row(s["item"], fmt(s["value"], 3, s["unit"]), fmt(s["limit"], 3, s["unit"]),
                  _verdict(s["verdict"]), "; ".join(x for x in (s["condition"], s["note"]) if x))
    return t


def _compliance_tables(rows: list[dict]) -> list:
    """One small table per limit set (its id and edition as the title), then a caption."""
    out: list = [Text("Compliance with published limits", style="bold")]
    sets: dict[str, list[dict]] = {}
    for r in rows:
        sets.setdefault(r["set"], []).append(r)
    for name, group in sets.items():
        t = Table(box=box.SIMPLE_HEAD, title=f"{name}  ({group[0].get('edition', '')})",
                  title_justify="left", pad_edge=False)
        t.add_column("quantity", min_width=12, overflow="fold")
        t.add_column("value", justify="right")
        t.add_column("limit", justify="right")
        t.add_column("used", justify="right")
        t.add_column("headroom", justify="right")
        t.add_column("verdict")
        t.add_column("clause / reason", overflow="fold")
        for r in group:
            unit = "" if r.get("unit") in ("1", "-") else r.get("unit", "")
            used = "" if r.get("used_pct") is None else f"{r['used_pct']:.0f} %"
            t.add_row(r["quantity"], fmt(r.get("value"), 3, unit), fmt(r.get("limit"), 3, unit),
                      used, fmt(r.get("headroom"), 2, unit), _verdict(r["verdict"]),
                      r.get("reason") or r.get("clause", ""))
        out.append(t)
    out.append(Text("Margins against the tables in data/limits/ (mostly from memory): an "
                    "engineering aid, not a certification; the standards' texts, local "
                    "codes and licensed practice govern.", style="dim"))
    return out


def render_unit(report: dict, console: Console) -> None:
    """Print the terminal summary of a unit report (the dict from :func:`unit_to_dict`)."""
    states = report["states"]
    head = Text.assemble(
        ("fleetpower unit  ", "bold"), (report["design"], "bold cyan"),
        f"\n{report['topology']} on {fmt(report['mains']['v_rms_v'], 3, 'V')} "
        f"{fmt(report['mains']['f_hz'], 3, 'Hz')}"
        + ("" if report.get("unit_price") is None else f"; unit price {report['unit_price']}")
        + f"; {'isolated' if report['isolated'] else 'NOT isolated'}",
    )
    console.print(Panel(head, box=box.HEAVY, expand=False))
    if report.get("caution"):
        console.print(Panel(Text(report["caution"], style="bold"), title="SAFETY",
                            border_style="red", box=box.DOUBLE))
    console.print(_state_table(states))
    console.print(_loss_table(states))
    console.print(_output_table(states))
    if "hand_estimate" in report:
        h = report["hand_estimate"]
        body = Group(
            Text(f"Xc = 1/(2 pi f C) = {fmt(h['xc_ohm'], 4, 'ohm')}; capacitor current "
                 f"V/Xc = {fmt(h['i_cap_rms_a'] * 1e3, 4, 'mA')} rms"),
            Text(f"hand estimate ({h['rule']}): {fmt(h['hand_estimate_i_dc_a'] * 1e3, 4, 'mA')}"),
            Text(f"largest load held in regulation (simulated): "
                 f"{fmt(h['simulated_max_i_dc_a'] * 1e3, 4, 'mA')}", style="bold"),
            Text("why they differ:"),
            *[Text(f"  - {line}") for line in h["explanation"]],
        )
        console.print(Panel(body, title="Deliverable DC current: quick estimate vs waveform",
                            box=box.ROUNDED, title_align="left"))
    for s in states[:1] if len(states) > 1 else states:
        console.print(_harmonic_table(s))
    if len(states) > 1:
        console.print(Text("(harmonic tables of the other states: --state NAME or --json)",
                           style="dim"))
    console.print(_stress_table(report["stresses"]))
    if report.get("compliance"):
        for part in _compliance_tables(report["compliance"]):
            console.print(part)
    if report["warnings"]:
        console.print(Panel("\n".join(f"- {w}" for w in report["warnings"]), title="Warnings",
                            border_style="yellow", title_align="left"))


# ----------------------------------------------------------------------------------
# fleets
# ----------------------------------------------------------------------------------
def _peak_case(r) -> str:
    flat = float(np.ptp(r.hourly["p_kw"])) <= 1e-9 * max(float(r.hourly["p_kw"].abs().max()), 1e-30)
    when = ("every hour alike (hours per day spread evenly)" if flat
            else f"hour {r.peak_hour:02d}:00-{r.peak_hour + 1:02d}:00")
    return when + (", coincident (diversity) case" if r.peak_coincident else "")


def fleet_to_dict(r) -> dict:
    """JSON-ready report of a :class:`fleetpower.fleet.FleetResult` (units in key names)."""
    site = r.spec.site
    out = {
        "fleet": r.spec.name,
        "file": r.spec.file,
        "site": {"system": site.system_label, "v_ln_v": site.v_ln_v, "f_hz": site.f_hz,
                 "isc_a": site.isc_a, "isc_source": site.isc_source,
                 "currency": site.currency},
        "units": r.units,
        "summation": r.summation_label,
        "peak_hour": r.peak_hour,
        "peak_coincident": r.peak_coincident,
        "peak_case": _peak_case(r),
        "p_kw": r.p_kw,
        "q1_kvar": r.q1_kvar,
        "q1_sense": "leading (capacitive)" if r.q1_kvar < 0 else "lagging (inductive)",
        "s_kva": r.s_kva,
        "s_e_kva": r.s_e_kva,
        "pf": r.pf,
        "dpf": r.dpf,
        "phases": [
            {"phase": f.phase, "p_kw": f.p_w / 1e3, "q1_kvar": f.q1_var / 1e3,
             "s_kva": f.s_va / 1e3, "i_rms_a": f.i_rms_a, "i1_a": f.i1_a,
             "thd_i_pct": f.thd_i_pct, "k_factor": f.k_factor, "f_hl": f.f_hl,
             "harmonics_a": [abs(x) for x in f.i_h_a[1:]]}
            for f in r.phases
        ],
        "neutral": {"i_rms_a": r.neutral_i_rms_a, "i1_a": r.neutral_i1_a,
                    "i3_a": float(abs(r.neutral_i_h_a[3])),
                    "harmonics_a": [abs(x) for x in r.neutral_i_h_a[1:]]},
        "tdd_pct": r.tdd_pct,
        "i_l_a": r.i_l_a,
        "i_l_source": r.i_l_source,
        "e_kwh_per_year": r.e_kwh_per_year,
        "energy_cost_per_year": r.energy_cost,
        "demand_cost_per_year": r.demand_cost,
        "reactive_cost_per_year": r.reactive_cost,
        "total_cost_per_year": r.total_cost_per_year,
        "co2_kg_per_year": r.co2_kg_per_year,
        "compliance": r.compliance,
        "conductors": r.conductors,
        "groups": r.groups.to_dict("records"),
        "hourly": r.hourly.to_dict("records"),
        "warnings": list(r.warnings),
    }
    return _clean(out)


def render_fleet(d: dict, console: Console) -> None:
    """Terminal summary of a fleet report dict."""
    cur = d["site"]["currency"]
    console.print(Panel(Text.assemble(
        ("fleetpower fleet  ", "bold"), (d["fleet"], "bold cyan"),
        f"\n{d['units']:,} units on a {d['site']['system']} "
        f"{fmt(d['site']['v_ln_v'], 3, 'V')} {fmt(d['site']['f_hz'], 3, 'Hz')} supply; "
        f"peak: {d['peak_case']}"), box=box.HEAVY, expand=False))
    t = Table(box=box.SIMPLE_HEAD, title="At the peak", title_justify="left", pad_edge=False)
    t.add_column("")
    for p in d["phases"]:
        t.add_column(p["phase"], justify="right")
    t.add_column("neutral", justify="right")
    t.add_column("total", justify="right", style="bold")
    t.add_row("P real", *[fmt(p["p_kw"], 3, "kW") for p in d["phases"]], "",
              fmt(d["p_kw"], 4, "kW"))
    t.add_row("Q1", *[fmt(p["q1_kvar"], 3, "kvar") for p in d["phases"]], "",
              fmt(d["q1_kvar"], 4, "kvar"))
    t.add_row("S apparent", *[fmt(p["s_kva"], 3, "kVA") for p in d["phases"]], "",
              fmt(d["s_kva"], 4, "kVA"))
    t.add_row("I rms", *[fmt(p["i_rms_a"], 3, "A") for p in d["phases"]],
              fmt(d["neutral"]["i_rms_a"], 3, "A"), "")
    t.add_row("I fundamental", *[fmt(p["i1_a"], 3, "A") for p in d["phases"]],
              fmt(d["neutral"]["i1_a"], 3, "A"), "")
    t.add_row("THD of current", *[fmt(p["thd_i_pct"], 3, "%") for p in d["phases"]], "", "")
    t.add_row("K-factor", *[fmt(p["k_factor"], 3) for p in d["phases"]], "", "")
    t.add_row("F_HL", *[fmt(p["f_hl"], 3) for p in d["phases"]], "", "")
    console.print(t)
    console.print(Text(
        f"PF {d['pf']:.3f}   DPF {d['dpf']:.3f}   Q1 {d['q1_sense']}   "
        + (f"S_e {fmt(d['s_e_kva'], 4, 'kVA')} (IEEE 1459)   " if d.get("s_e_kva") else "")
        + f"TDD {d['tdd_pct']:.2f} % of I_L {fmt(d['i_l_a'], 3, 'A')}"))
    console.print(Text(f"summation: {d['summation']}", style="dim"))
    y = Table(box=box.SIMPLE_HEAD, title="Per year", title_justify="left", pad_edge=False)
    y.add_column("")
    y.add_column("value", justify="right")
    y.add_row("energy", fmt(d["e_kwh_per_year"], 4, "kWh"))
    y.add_row("energy cost", fmt(d["energy_cost_per_year"], 4, cur))
    y.add_row("demand cost", fmt(d["demand_cost_per_year"], 4, cur))
    y.add_row("reactive-energy cost", fmt(d["reactive_cost_per_year"], 4, cur))
    y.add_row("total", fmt(d["total_cost_per_year"], 4, cur), style="bold")
    y.add_row("CO2", fmt(d["co2_kg_per_year"], 4, "kg"))
    console.print(y)
    g = Table(box=box.SIMPLE_HEAD, title="Groups", title_justify="left", pad_edge=False)
    for col in ("group", "count", "phase", "mean W/unit", "kWh/yr", f"cost/yr {cur}"):
        g.add_column(col, justify="left" if col == "group" else "right")
    for row in d["groups"]:
        g.add_row(row["group"], f"{row['count']:,}", row["phase"],
                  fmt(row["p_unit_mean_w"], 3), fmt(row["e_kwh_per_year"], 4),
                  fmt(row["energy_cost_per_year"], 4))
    console.print(g)
    if d["conductors"]:
        c = Table(box=box.SIMPLE_HEAD, title="Feeder conductors", title_justify="left",
                  pad_edge=False)
        for col in ("conductor", "I rms", "rating", "used", "verdict"):
            c.add_column(col, justify="left" if col in ("conductor", "verdict") else "right")
        for row in d["conductors"]:
            style = {"over": "bold red", "high": "yellow"}.get(row["verdict"], "green")
            c.add_row(row["conductor"], fmt(row["i_rms_a"], 3, "A"), fmt(row["rating_a"], 3, "A"),
                      f"{row['used_pct']:.0f} %", Text(row["verdict"].upper(), style=style))
        console.print(c)
    if d["compliance"]:
        fails = [r for r in d["compliance"] if r["verdict"] == "fail"]
        worst = max(d["compliance"], key=lambda r: r["used_pct"] or 0.0)
        console.print(Text(
            f"IEEE 519 at the PCC (I_sc {fmt(d['site']['isc_a'], 3, 'A')}, "
            f"{d['site']['isc_source']}): {len(fails)} of {len(d['compliance'])} limits "
            f"exceeded; highest use {worst['quantity']} {worst['used_pct']:.0f} % "
            f"({'FAIL' if fails else 'PASS'})"))
    if d["warnings"]:
        console.print(Panel("\n".join(f"- {w}" for w in d["warnings"]), title="Warnings",
                            border_style="yellow", title_align="left"))


# ----------------------------------------------------------------------------------
# comparisons
# ----------------------------------------------------------------------------------
#: rows of the comparison summary: (label, key, significant digits, unit or currency flag)
COMPARE_ROWS = (
    ("per unit", None, 0, ""),
    ("price", "unit_price", 3, "$"),
    ("standby P", "standby_p_w", 3, "W"),
    ("active P", "active_p_w", 3, "W"),
    ("apparent S (max)", "s_va", 3, "VA"),
    ("power factor", "pf", 3, ""),
    ("THD of current", "thd_i_pct", 3, "%"),
    ("per fleet", None, 0, ""),
    ("units replaced", "replaced_units", 0, ""),
    ("real P at peak", "fleet_p_kw", 4, "kW"),
    ("apparent S at peak", "fleet_s_kva", 4, "kVA"),
    ("Q1 at peak", "fleet_q1_kvar", 4, "kvar"),
    ("worst phase I", "phase_i_rms_a", 3, "A"),
    ("neutral I", "neutral_i_rms_a", 3, "A"),
    ("energy per year", "e_kwh_per_year", 4, "kWh"),
    ("running cost/year", "running_cost_per_year", 4, "$"),
    ("CO2 per year", "co2_kg_per_year", 4, "kg"),
    ("over the life", None, 0, ""),
    ("purchase", "purchase_cost", 4, "$"),
    ("lifetime cost", "lifetime_cost", 4, "$"),
)


def compare_to_dict(cmp) -> dict:
    """JSON-ready report of a :class:`fleetpower.compare.Comparison`."""
    from .compare import comparison_table

    table = comparison_table(cmp)
    designs = []
    for c, row in zip(cmp.candidates, table.to_dict("records"), strict=True):
        d = dict(row)
        d["letter"] = chr(ord("A") + len(designs))
        d["file"] = str(c.path)
        d["safety"] = ("isolated" if c.design.is_isolated else
                       "NOT isolated: output at mains potential")
        d["failures"] = c.failures
        d["unit_compliance"] = c.unit_compliance
        d["fleet_compliance"] = c.fleet.compliance
        d["conductors"] = c.fleet.conductors
        d["lifetime_by_year"] = [
            {"year": int(y), "cost": r.cost, "cost_cumulative_discounted":
             r.cost_cumulative_discounted}
            for y, r in c.lifetime.iterrows()
        ]
        d["groups"] = c.fleet.groups.to_dict("records")
        designs.append(d)
    return _clean({
        "fleet": cmp.fleet_name,
        "file": cmp.fleet_file,
        "currency": cmp.currency,
        "service_life_years": cmp.years,
        "discount_rate": cmp.rate,
        "energy_escalation": cmp.escalation,
        "designs": designs,
        "paybacks": cmp.paybacks,
        "recommendation": cmp.recommendation,
        "caution": (None if all(c.design.is_isolated for c in cmp.candidates)
                    else "Non-isolated candidates put everything on their output at mains "
                         "potential; enclose them fully and follow local codes and licensed "
                         "practice."),
    })


def _cell(d: dict, key: str, digits: int, unit: str, currency: str) -> str:
    v = d[key]
    if key == "replaced_units":
        return f"{int(v):,}"
    unit = currency if unit == "$" else unit
    return fmt(v, digits, unit)


def render_compare(d: dict, console: Console) -> None:
    """Terminal summary of a comparison; readable at 80 columns and without colour."""
    cur = d["currency"]
    console.print(Panel(Text.assemble(
        ("fleetpower compare  ", "bold"), (d["fleet"], "bold cyan"),
        f"\n{len(d['designs'])} candidates on the same fleet; "
        f"{d['service_life_years']} years at {100 * d['discount_rate']:.1f} % discount, "
        f"energy +{100 * d['energy_escalation']:.1f} %/yr"), box=box.HEAVY, expand=False))
    legend = Table(box=None, show_header=False, pad_edge=False)
    legend.add_column(style="bold")
    legend.add_column(overflow="fold")
    for x in d["designs"]:
        legend.add_row(x["letter"], f"{x['name']} ({x['design']}); {x['safety']}")
    console.print(legend)
    t = Table(box=box.SIMPLE_HEAD, pad_edge=False)
    t.add_column("", min_width=18)
    for x in d["designs"]:
        t.add_column(x["letter"], justify="right")
    for label, key, digits, unit in COMPARE_ROWS:
        if key is None:
            t.add_row(Text(label, style="bold underline"), *[""] * len(d["designs"]))
            continue
        t.add_row(label, *[_cell(x, key, digits, unit, cur) for x in d["designs"]])
    t.add_row("failed checks", *[str(x["failed_checks"]) for x in d["designs"]])
    t.add_row("verdict", *[Text("FAILS" if x["failed_checks"] else "passes",
                                style="bold red" if x["failed_checks"] else "green")
                           for x in d["designs"]])
    console.print(t)
    for x in d["designs"]:
        if x["failures"]:
            console.print(Text(f"{x['letter']} fails: " + "; ".join(x["failures"]),
                               style="red"))
    console.print(Text("What drives the difference (largest loss in standby):", style="bold"))
    for x in d["designs"]:
        console.print(Text(f"  {x['letter']}: {x['driver']}"))
    for pb in d["paybacks"]:
        console.print(Text(f"Payback: {pb['reason']}"))
    if d.get("caution"):
        console.print(Panel(Text(d["caution"], style="bold"), title="SAFETY",
                            border_style="red", box=box.DOUBLE))
    console.print(Panel(Text(d["recommendation"], style="bold"), title="Recommendation",
                        title_align="left", box=box.ROUNDED))


def compare_markdown(d: dict) -> str:
    """A report a buyer can paste into a tender file (GitHub-flavoured Markdown)."""
    cur = d["currency"]
    lines = [f"# {d['fleet']}: supply options compared", "",
             f"Service life {d['service_life_years']} years, discount rate "
             f"{100 * d['discount_rate']:.1f} %, energy price escalation "
             f"{100 * d['energy_escalation']:.1f} % per year. Figures from fleetpower "
             "simulations of each design on the same fleet, phases, profiles and tariff.", "",
             "| | " + " | ".join(f"{x['letter']}: {x['name']}" for x in d["designs"]) + " |",
             "|---|" + "---:|" * len(d["designs"])]
    for label, key, digits, unit in COMPARE_ROWS:
        if key is None:
            lines.append(f"| **{label}** |" + " |" * len(d["designs"]))
            continue
        lines.append(f"| {label} | " + " | ".join(_cell(x, key, digits, unit, cur)
                                                 for x in d["designs"]) + " |")
    lines.append("| safety | " + " | ".join(x["safety"] for x in d["designs"]) + " |")
    lines.append("| failed checks | " + " | ".join(
        (", ".join(x["failures"]) or "none") for x in d["designs"]) + " |")
    lines += ["", "## Recommendation", "", d["recommendation"], ""]
    if d["paybacks"]:
        lines += ["## Payback", ""] + [f"- {p['reason']}" for p in d["paybacks"]] + [""]
    lines += ["## What drives the difference", ""] + \
        [f"- {x['letter']}: {x['driver']}" for x in d["designs"]] + [""]
    if d.get("caution"):
        lines += ["## Safety", "", d["caution"], ""]
    lines += ["Limit verdicts use tables recorded in fleetpower's data/limits/ (mostly from "
              "memory); they are an engineering aid, not a certification.", ""]
    return "\n".join(lines)
