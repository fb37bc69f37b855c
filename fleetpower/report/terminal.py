"""Terminal rendering (rich) of the report dictionaries of :mod:`fleetpower.report.model`.

Readable at 80 columns and without colour. Every figure comes from the dictionary.

Owns: the layout of the terminal summaries of a unit, a fleet and a comparison. May import
``report.model`` and rich; it computes nothing.
"""

from __future__ import annotations

import math
import re

from rich import box
from rich.console import Console, Group
from rich.panel import Panel
from rich.table import Table
from rich.text import Text

from .format import fmt, humanize, quantity_label
from .model import COMPARE_ROWS, collapse_notes, marked_cell, safety_label

VERDICT_MARK = {
    "pass": "PASS",
    "fail": "FAIL",
    "unrated": "no rating",
    "note": "info",
    "not applicable": "n/a",
    "exempt": "exempt",
    "not evaluated": "not evaluated",
    "for information": "for information",
    "out of scope": "out of scope",
}


VERDICT_STYLE = {"pass": "green", "fail": "bold red", "unrated": "yellow", "note": "cyan",
                 "not applicable": "dim", "exempt": "green", "not evaluated": "yellow",
                 "for information": "dim", "out of scope": "dim"}


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


def _harmonic_table(state: dict, width: int = 120) -> Table:
    t = Table(box=box.SIMPLE_HEAD, title=f"Harmonic currents, state '{state['state']}'",
              title_justify="left", pad_edge=False)
    groups = 3 if width >= 100 else 2  # 12 columns do not fit 80 without cutting cells
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
                          "-" if h["phase_deg"] is None else f"{h['phase_deg']:.0f}"]
            else:
                cells += ["", "", "", ""]
        t.add_row(*cells)
    t.caption = ("rms current, % of I1, phase against V1 in degrees ('-': too small to "
                 "have one); even orders below 0.5 % of I1 not shown; all 50 orders are in "
                 "--json")
    t.caption_justify = "left"
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
    t.add_row("delivered to the load", *[fmt(s["delivered_w"], 3, "W") for s in states],
              style="bold")
    t.add_row("input P (at the terminals)",
              *[fmt(s["balance"]["p_in_w"], 4, "W") for s in states], style="bold")
    t.add_row("balance residual",
              *[f"{s['balance']['residual_pct']:+.1e} %" for s in states], style="dim")
    if any(s["balance"]["source_resistance_w"] for s in states):
        # lost in the mains before the terminals: not part of the supply's input P
        t.add_row("lost in the mains' source resistance",
                  *[fmt(s["balance"]["source_resistance_w"], 3, "W") for s in states],
                  style="dim")
    return t


def _output_table(states: list[dict]) -> Table:
    t = Table(box=box.SIMPLE_HEAD, title="Output", title_justify="left", pad_edge=False)
    t.add_column("")
    for s in states:
        t.add_column(s["state"], justify="right")
    t.add_row("reservoir mean", *[fmt(s["output"]["v_dc_v"], 4, "V") for s in states])
    t.add_row("reservoir minimum", *[fmt(s["output"]["v_dc_min_v"], 4, "V") for s in states])
    t.add_row("ripple", *[fmt(s["output"]["ripple_v_pp"], 3, "V p-p") for s in states])
    t.add_row("load current", *[fmt(s["output"]["i_dc_a"], 3, "A") for s in states])
    t.add_row("in regulation", *["yes" if s["output"]["in_regulation"] else "NO" for s in states])
    return t


def _stress_table(stresses: list[dict]) -> Table:
    t = Table(box=box.SIMPLE_HEAD, title="Component stresses", title_justify="left",
              pad_edge=False)
    t.add_column("item", overflow="fold")
    t.add_column("value", justify="right")
    t.add_column("rating", justify="right")
    t.add_column("verdict")
    t.add_column("condition / note", overflow="fold")
    for s in stresses:
        note = "; ".join(x for x in (s["condition"], s["note"]) if x)
        t.add_row(humanize(s["item"]), fmt(s["value"], 3, s["unit"]),
                  fmt(s["limit"], 3, s["unit"]), _verdict(s["verdict"]), humanize(note))
    return t


def numbered_notes(notes: list[str]) -> Table:
    """Notes printed whole under a table that cites them as ``[n]``: "[1]  text", with the
    text's wrapped lines hanging under its first word."""
    grid = Table(box=None, show_header=False, pad_edge=False)
    grid.add_column(justify="right", no_wrap=True)
    grid.add_column(overflow="fold")
    for k, note in enumerate(notes, 1):
        grid.add_row(f"[{k}]", note)
    return grid


#: narrower than this, a limit row's clause or reason moves out of the table into a numbered
#: note under it (a column of 14 characters breaks words such as "line-to-neutral")
NOTES_BELOW_WIDTH = 110


def _compliance_tables(rows: list[dict], width: int = 120) -> list:
    """One small table per limit set (its id and edition as the title), then a caption.

    At widths under :data:`NOTES_BELOW_WIDTH` the clause or reason of each row is a note
    ``[n]`` printed in full under its table (the same text once, however many rows cite it).
    """
    out: list = [Text("Compliance with published limits", style="bold")]
    sets: dict[str, list[dict]] = {}
    for r in rows:
        sets.setdefault(r["set"], []).append(r)
    below = width < NOTES_BELOW_WIDTH
    for name, group in sets.items():
        t = Table(box=box.SIMPLE_HEAD, title=f"{name}  ({group[0].get('edition', '')})",
                  title_justify="left", pad_edge=False)
        t.add_column("quantity", min_width=12, overflow="fold")
        t.add_column("value", justify="right")
        t.add_column("limit", justify="right")
        t.add_column("used", justify="right")
        t.add_column("headroom", justify="right")
        t.add_column("verdict")
        t.add_column("note" if below else "clause / reason", overflow="fold")
        notes: list[str] = []
        for r in group:
            unit = "" if r.get("unit") in ("1", "-") else r.get("unit", "")
            used = "" if r.get("used_pct") is None else f"{r['used_pct']:.0f} %"
            scope = r.get("scope", "in scope")
            why = r.get("reason") or r.get("clause", "")
            if scope != "in scope":
                why = scope + (f"; {r['reason']}" if r.get("reason") else "")
            why = humanize(why)
            if below and why:
                if why not in notes:
                    notes.append(why)
                why = f"[{notes.index(why) + 1}]"
            # out of scope: shown, dimmed, never as a pass or a failure
            t.add_row(quantity_label(r["quantity"], order=True), fmt(r.get("value"), 3, unit),
                      fmt(r.get("limit"), 3, unit), used, fmt(r.get("headroom"), 2, unit),
                      _verdict(r["verdict"]), why,
                      style="dim" if scope != "in scope" else None)
        out.append(t)
        if notes:
            out.append(numbered_notes(notes))
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
        + f"; {safety_label(report['isolated']).split(':')[0]}",
    )
    console.print(Panel(head, box=box.HEAVY, expand=False))
    if report.get("caution"):
        console.print(Panel(Text(report["caution"], style="bold"), title="SAFETY",
                            border_style="red", box=box.DOUBLE))
    console.print(_state_table(states))
    known = [s for s in states if s.get("balance") is not None]
    if known:
        console.print(_loss_table(known))
        console.print(_output_table(known))
    for s in states:
        if s.get("basis"):
            console.print(Text(f"State '{s['state']}': {humanize(s['basis'])}", style="dim"))
    if "circuit_figures" in report:
        console.print(Text(f"Losses, output and component stresses: "
                           f"{report['circuit_figures']}.", style="italic"))
    if "hand_estimate" in report:
        h = report["hand_estimate"]
        why = Table(box=None, show_header=False, pad_edge=False)
        why.add_column(no_wrap=True)
        why.add_column(overflow="fold")
        why.add_column(justify="right", no_wrap=True)
        for line in h["explanation"]:
            reason, _, figure = humanize(line).rpartition(": ")
            why.add_row("  -", reason or figure, figure if reason else "")
        body = Group(
            Text(f"Xc = 1/(2 pi f C) = {fmt(h['xc_ohm'], 4, 'ohm')}; capacitor current "
                 f"V/Xc = {fmt(h['i_cap_rms_a'], 4, 'A')} rms"),
            Text(f"hand estimate ({h['rule']}): {fmt(h['hand_estimate_i_dc_a'], 4, 'A')}"),
            Text(f"largest load held in regulation (simulated): "
                 f"{fmt(h['simulated_max_i_dc_a'], 4, 'A')}", style="bold"),
            Text("why they differ:"),
            why,
        )
        console.print(Panel(body, title="Deliverable DC current: quick estimate vs waveform",
                            box=box.ROUNDED, title_align="left"))
    for s in states[:1] if len(states) > 1 else states:
        console.print(_harmonic_table(s, console.width))
    if len(states) > 1:
        console.print(Text("(harmonic tables of the other states: --state NAME or --json)",
                           style="dim"))
    if report["stresses"] or "circuit_figures" not in report:
        console.print(_stress_table(report["stresses"]))
    if report.get("compliance"):
        for part in _compliance_tables(report["compliance"], console.width):
            console.print(part)
    if report["warnings"]:
        console.print(Panel("\n".join(f"- {humanize(w)}" for w in report["warnings"]), title="Warnings",
                            border_style="yellow", title_align="left"))


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
    t.add_row("I rms, largest", *[fmt(p["i_rms_max_a"], 3, "A") for p in d["phases"]],
              fmt(d["neutral"]["i_rms_max_a"], 3, "A"), "")
    t.add_row("I fundamental", *[fmt(p["i1_a"], 3, "A") for p in d["phases"]],
              fmt(d["neutral"]["i1_a"], 3, "A"), "")
    t.add_row("THD of current", *[fmt(p["thd_i_pct"], 3, "%") for p in d["phases"]], "", "")
    t.add_row(f"K-factor h1-{d['phases'][0]['k_factor_h_max']}",
              *[fmt(p["k_factor"], 3) for p in d["phases"]], "", "")
    t.add_row("F_HL", *[fmt(p["f_hl"], 3) for p in d["phases"]], "", "")
    console.print(t)
    console.print(Text(
        f"PF {d['pf']:.3f} ({d['pf_basis']})   DPF {d['dpf']:.3f}   Q1 {d['q1_sense']}   "
        + (f"S_e {fmt(d['s_e_kva'], 4, 'kVA')} (IEEE 1459)   " if d.get("s_e_kva") else "")
        + f"TDD {d['tdd_pct']:.2f} % of I_L {fmt(d['i_l_a'], 3, 'A')}"))
    w = d["worst_phase"]
    console.print(Text(f"largest phase current {fmt(w['i_rms_a'], 3, 'A')} on {w['phase']} "
                       f"({w['case']}); neutral {fmt(d['neutral']['i_rms_max_a'], 3, 'A')} "
                       f"({d['neutral']['i_rms_max_case']})"))
    basis = Table(box=None, show_header=False, pad_edge=False, title="Basis of the figures",
                  title_justify="left", title_style="dim", style="dim")
    basis.add_column(no_wrap=True, style="dim")
    basis.add_column(overflow="fold", style="dim")
    basis.add_row("summation", d["summation"])
    for what, text in d["assumptions"].items():
        basis.add_row(what, text)
    console.print(basis)
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
    if d.get("measured"):
        console.print(Text("Measured gadgets (figures from their files, not simulated):",
                           style="bold"))
        for m in d["measured"]:
            console.print(Text(f"  {m['design']} / {m['state']}: {humanize(m['basis'])}"))
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
            f"{d['site']['isc_source']}), every phase at its worst hour: {len(fails)} of "
            f"{len(d['compliance'])} limits exceeded; highest use "
            f"{quantity_label(worst['quantity'], order=True)} on "
            f"{worst['phase']} {worst['used_pct']:.0f} % ({'FAIL' if fails else 'PASS'})"))
    if d["warnings"]:
        console.print(Panel("\n".join(f"- {humanize(w)}" for w in _merge_phases(d["warnings"])),
                            title="Warnings", border_style="yellow", title_align="left"))


_PHASE_WARNING = re.compile(r"^phase (\S+): (.*)$", re.S)


def _merge_phases(warnings: list[str]) -> list[str]:
    """Warnings that differ only in their phase said once: "phase L1: x", "phase L2: x" ->
    "phases L1, L2: x" (in the order first met)."""
    out: list[str] = []
    phases: dict[str, list[str]] = {}
    for w in warnings:
        m = _PHASE_WARNING.match(w)
        if not m:
            out.append(w)
            continue
        if m.group(2) not in phases:
            phases[m.group(2)] = []
            out.append(m.group(2))
        phases[m.group(2)].append(m.group(1))
    return [w if w not in phases else
            (f"phase{'s' if len(phases[w]) > 1 else ''} {', '.join(phases[w])}: {w}")
            for w in out]


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
        t.add_row(label, *[marked_cell(x, key, digits, unit, cur) for x in d["designs"]])
    t.add_row("failed checks", *[str(x["failed_checks"]) for x in d["designs"]])
    t.add_row("verdict", *[Text("COLLAPSES" if x.get("collapsed") else
                                "FAILS" if x["failed_checks"] else "passes",
                                style="bold red" if x["failed_checks"] else "green")
                           for x in d["designs"]])
    console.print(t)
    for note in collapse_notes(d):
        console.print(Text(note, style="bold red"))
    for x in d["designs"]:
        if x["failures"]:
            console.print(Text(f"{x['letter']} fails: " + "; ".join(humanize(f) for f in x["failures"]),
                               style="red"))
    if d.get("shared_failures"):
        console.print(Text("Every candidate (groups they do not replace) fails: "
                           + "; ".join(humanize(f) for f in d["shared_failures"])
                           + " - not counted against any candidate", style="yellow"))
    console.print(Text("What drives the difference (largest loss in standby):", style="bold"))
    for x in d["designs"]:
        console.print(Text(f"  {x['letter']}: {humanize(x['driver'])}"))
    for pb in d["paybacks"]:
        console.print(Text(f"Payback: {humanize(pb['reason'])}"))
    if d.get("caution"):
        console.print(Panel(Text(d["caution"], style="bold"), title="SAFETY",
                            border_style="red", box=box.DOUBLE))
    if d.get("basis"):
        console.print(Text(f"Designs enter as: {d['basis']}", style="bold"))
    if d.get("warnings"):
        console.print(Panel("\n".join(f"- {humanize(w)}" for w in d["warnings"]),
                            title="Warnings", border_style="yellow", title_align="left"))
    console.print(Panel(Text(humanize(d["recommendation"]), style="bold"), title="Recommendation",
                        title_align="left", box=box.ROUNDED))


__all__ = ["render_unit", "render_fleet", "render_compare", "VERDICT_MARK", "VERDICT_STYLE"]
