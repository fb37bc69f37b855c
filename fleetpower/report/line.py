"""A product line as a JSON-ready dict, its terminal rendering, Markdown and figures.

Every figure shown comes from the dict that ``--json`` prints. Owns: :func:`line_to_dict`,
:func:`render_line`, :func:`line_markdown`, :func:`line_figures`, :func:`line_tables`.
May import the product-line result and the plot helpers; never the CLI.
"""

from __future__ import annotations

import math
from pathlib import Path

import pandas as pd
from rich import box
from rich.console import Console
from rich.panel import Panel
from rich.table import Table
from rich.text import Text

from ..gadget_range import unique
from ..product_line import LineResult
from .format import fmt, humanize
from .model import _clean

LINE_CAUTION = ("Non-isolated models (capacitive or resistive droppers) put everything on "
                "their output at mains potential; enclose them fully and follow local codes "
                "and licensed practice.")


def _records(df: pd.DataFrame) -> list[dict]:
    out = []
    for rec in df.to_dict("records"):
        out.append({k: (None if isinstance(v, float) and not math.isfinite(v) else v)
                    for k, v in rec.items()})
    return out


def _fix(row: dict) -> dict:
    keys = ("model", "market", "worst_check", "worst_used_pct", "failed_checks", "failures",
            "installed_kwh", "standby_p_w", "driver_state", "driver", "driver_w",
            "driver_of_p_w")
    return {k: row[k] for k in keys}


def _basis_lines(d: dict) -> list[str]:
    """One line per pair and state whose figures rest on a stated basis (a measured
    gadget's capture, scaled by a voltage model onto another market's mains)."""
    return [f"{p['model']} in {p['market']}, {b}" for p in d["pairs"]
            for b in p.get("figures_basis") or []]


def line_to_dict(r: LineResult) -> dict:
    """JSON-ready report of a :class:`fleetpower.product_line.LineResult`."""
    spec = r.spec
    used = spec.market_ids
    markets = [{
        "market": m.market, "title": m.title, "v_ln_v": m.v_ln_v,
        "frequency_hz": m.frequency_hz, "limit_sets": list(m.limit_sets),
        "price_per_kwh": m.price_per_kwh, "currency": m.currency,
        "co2_kg_per_kwh": m.co2_kg_per_kwh, "provenance": m.provenance, "source": m.source,
    } for m in (spec.markets[k] for k in used)]
    models = [{
        "model": m.name, "design": str(m.design_path), "design_name": m.design.name,
        "topology": m.design.topology, "isolated": m.design.is_isolated,
        "service_life_years": m.service_life_years, "markets": list(m.sales),
        "caution": r.cautions.get(m.name),
    } for m in spec.models]
    pairs = _records(r.pairs)
    checks = _records(r.checks)
    for p in pairs:
        p["checks"] = [c for c in checks if c["model"] == p["model"] and
                       c["market"] == p["market"]]
    inst = r.installed
    by_year = inst.groupby("year", sort=True).agg(
        units_in_service=("units_in_service", "sum"), energy_kwh=("energy_kwh", "sum"),
        co2_kg=("co2_kg", "sum")).reset_index()
    cost = inst.groupby(["currency", "year"], sort=True)["cost"].sum()
    ff = r.fix_first()
    outside = unique(w for a in r.analyses.values() for w in a.range_warnings)
    return _clean({
        "product_line": spec.name, "file": spec.file, "first_year": spec.first_year,
        "sales_years": spec.sales_years, "horizon_years": spec.horizon_years,
        "retirement": "fixed service life: a unit sold in year s serves years s .. "
                      "s + life - 1 (counted in service for the whole year it is sold)",
        "markets": markets, "models": models, "pairs": pairs,
        "installed_base": _records(inst),
        "totals_by_year": _records(by_year),
        "cost_by_currency": {cur: [{"year": int(y), "cost": float(v)}
                                   for (_, y), v in cost[cost.index.get_level_values(0)
                                                         == cur].items()]
                             for cur in dict.fromkeys(inst["currency"])},
        "fix_first": {k: [_fix(x) for x in _records(v)] for k, v in ff.items()},
        "caution": LINE_CAUTION if r.cautions else None,
        "warnings": [w.message for w in outside],
        "range_warnings": [w.to_dict() for w in outside],
    })


#: the file names of ``--csv DIR`` (:func:`line_tables`)
LINE_TABLES = ("pairs.csv", "checks.csv", "installed_base.csv")


def line_tables(r: LineResult) -> dict[str, pd.DataFrame]:
    """The CSV tables of ``--csv DIR``: file name (:data:`LINE_TABLES`) -> table."""
    return dict(zip(LINE_TABLES, (r.pairs, r.checks, r.installed), strict=True))


# ----------------------------------------------------------------------------------
# terminal
# ----------------------------------------------------------------------------------
def _headroom_text(p: dict) -> Text:
    if p["cannot_power"]:
        return Text("NO POWER", style="bold red")
    u = p["worst_used_pct"]
    if u is None:
        return Text("—", style="dim")
    return Text(f"{100 - u:+.0f} %", style="bold red" if u > 100 else
                ("yellow" if u > 90 else "green"))


def render_line(d: dict, console: Console) -> None:
    """Terminal summary of a product line; readable at 80 columns and without colour."""
    first = d["first_year"]
    span = (f"years {first}-{first + d['horizon_years'] - 1}" if first is not None
            else f"{d['horizon_years']} years")
    console.print(Panel(Text.assemble(
        ("fleetpower line  ", "bold"), (d["product_line"], "bold cyan"),
        f"\n{len(d['models'])} models in {len(d['markets'])} markets; sales over "
        f"{d['sales_years']} years, installed base over {span}"), box=box.HEAVY, expand=False))
    mk = Table(box=box.SIMPLE_HEAD, title="Markets (data/markets.csv unless overridden)",
               title_justify="left", pad_edge=False)
    for col in ("market", "mains", "price/kWh", "CO2/kWh", "rules applied"):
        mk.add_column(col, overflow="fold")
    for m in d["markets"]:
        mk.add_row(m["market"], f"{m['v_ln_v']:g} V {m['frequency_hz']:g} Hz",
                   f"{m['price_per_kwh']:g} {m['currency']}", f"{m['co2_kg_per_kwh']:g} kg",
                   str(len(m["limit_sets"])))
    console.print(mk)
    t = Table(box=box.SIMPLE_HEAD, title="Every model on every market's mains (per unit)",
              title_justify="left", pad_edge=False)
    for col, just in (("model", "left"), ("mkt", "left"), ("standby", "right"),
                      ("active", "right"), ("PF", "right"), ("kWh/yr", "right"),
                      ("headroom", "right"), ("fails", "right")):
        t.add_column(col, justify=just, overflow="fold")
    for p in d["pairs"]:
        sb = fmt(p["standby_p_w"], 3, "W") if p["standby_p_w"] is not None else "not named"
        t.add_row(p["model"], p["market"] + ("*" if p["rating_note"] else ""), sb,
                  fmt(p["active_p_w"], 3, "W"), fmt(p["active_pf"], 2),
                  fmt(p["energy_per_unit_kwh"], 3), _headroom_text(p),
                  str(p["failed_checks"]))
    console.print(t)
    console.print(Text("headroom: 100 % minus the most-used applicable check (negative "
                       "fails); * sold outside its rating:", style="dim"))
    for p in d["pairs"]:
        if p["rating_note"]:
            console.print(Text(f"  {p['model']} in {p['market']}: {p['rating_note']}",
                               style="yellow"))
    for p in d["pairs"]:
        if p["failures"]:
            console.print(Text(f"{p['model']} in {p['market']} fails: {humanize(p['failures'])}",
                               style="red"))
    basis = _basis_lines(d)
    if basis:
        console.print(Text("basis of the figures (measured, not simulated):", style="bold"))
        for line in basis:
            console.print(Text("  " + line))
    ib = Table(box=box.SIMPLE_HEAD, title="Installed base (all models and markets)",
               title_justify="left", pad_edge=False)
    for col in ("year", "units in service", "energy", "CO2"):
        ib.add_column(col, justify="right")
    for y in d["totals_by_year"]:
        label = str(first + y["year"]) if first is not None else str(y["year"])
        ib.add_row(label, f"{y['units_in_service']:,.0f}", fmt(y["energy_kwh"] / 1e3, 4, "MWh"),
                   fmt(y["co2_kg"] / 1e3, 4, "t"))
    console.print(ib)
    for cur, rows in d["cost_by_currency"].items():
        total = sum(x["cost"] for x in rows)
        console.print(Text(f"cost to users over the horizon, {cur} markets: "
                           f"{total:,.0f} {cur}"))
    for key, title in (("least_headroom", "Fix first: least headroom"),
                       ("most_energy", "Fix first: most installed-base energy")):
        ft = Table(box=box.SIMPLE_HEAD, title=title, title_justify="left", pad_edge=False)
        for col in ("model in market", "worst check", "used", "MWh", "largest standby loss"):
            ft.add_column(col, overflow="fold", justify="right" if col in ("used", "MWh") else "left",
                          min_width={"worst check": _RULE_WIDTH,
                                     "largest standby loss": 16}.get(col))
        for x in d["fix_first"][key]:
            ft.add_row(f"{x['model']}\nin {x['market']}", _check_cell(x["worst_check"]),
                       fmt(x["worst_used_pct"], 3, "%"), fmt(x["installed_kwh"] / 1e3, 4),
                       f"{x['driver']} {fmt(x['driver_w'], 2, 'W')} of "
                       f"{fmt(x['driver_of_p_w'], 2, 'W')} ({x['driver_state']})")
        console.print(ft)
    if d.get("warnings"):
        console.print(Panel("\n".join(f"- {humanize(w)}" for w in d["warnings"]),
                            title="Warnings", border_style="yellow", title_align="left"))
    if d.get("caution"):
        console.print(Panel(Text(d["caution"], style="bold"), title="SAFETY",
                            border_style="red", box=box.DOUBLE))


#: the longest shipped rule id ("eu-2019-1782-eps-low-voltage"): a narrow column never
#: cuts one in two
_RULE_WIDTH = 20


def _check_cell(check: str | None) -> str:
    """A "rule(s) quantity" check as a cell: one rule per line, then the quantity's label
    (``iec60335-1-discharge + iec62368-1-discharge tau_discharge_s`` -> three lines)."""
    if not check:
        return "—"
    rules, _, quantity = check.rpartition(" ")
    if not rules:
        return humanize(check)
    return rules.replace(" + ", " +\n") + "\n" + humanize(quantity)


# ----------------------------------------------------------------------------------
# markdown
# ----------------------------------------------------------------------------------
def line_markdown(d: dict) -> str:
    """The product line as GitHub-flavoured Markdown."""
    lines = [f"# {d['product_line']}: models across markets", "",
             f"{len(d['models'])} models, {len(d['markets'])} markets, sales over "
             f"{d['sales_years']} years, installed base over {d['horizon_years']} years "
             f"({d['retirement']}).", "",
             "| model | market | mains | standby W | active W | PF | kWh/yr per unit | "
             "worst check | used % | failed | installed-base kWh |",
             "|---|---|---|---:|---:|---:|---:|---|---:|---:|---:|"]
    for p in d["pairs"]:
        lines.append(
            f"| {p['model']} | {p['market']} | {p['v_ln_v']:g} V {p['frequency_hz']:g} Hz | "
            f"{fmt(p['standby_p_w'], 3)} | {fmt(p['active_p_w'], 3)} | "
            f"{fmt(p['active_pf'], 2)} | {fmt(p['energy_per_unit_kwh'], 3)} | "
            f"{humanize(p['worst_check'] or '—')} | {fmt(p['worst_used_pct'], 3)} | "
            f"{p['failed_checks']} | {p['installed_kwh']:,.0f} |")
    notes = [f"- {p['model']} in {p['market']}: {p['rating_note']}" for p in d["pairs"]
             if p["rating_note"]]
    fails = [f"- {p['model']} in {p['market']}: {humanize(p['failures'])}" for p in d["pairs"]
             if p["failures"]]
    if notes:
        lines += ["", "## Sold outside the rating", ""] + notes
    if fails:
        lines += ["", "## Failed checks", ""] + fails
    basis = _basis_lines(d)
    if basis:
        lines += ["", "## Basis of the figures", "",
                  "Figures of a measured supply are scaled from its capture, not simulated:",
                  ""] + [f"- {x}" for x in basis]
    lines += ["", "## Installed base", "", "| year | units in service | energy kWh | CO2 kg |",
              "|---:|---:|---:|---:|"]
    for y in d["totals_by_year"]:
        lines.append(f"| {y['year']} | {y['units_in_service']:,.0f} | "
                     f"{y['energy_kwh']:,.0f} | {y['co2_kg']:,.0f} |")
    for key, title in (("least_headroom", "Fix first: least headroom"),
                       ("most_energy", "Fix first: most installed-base energy")):
        lines += ["", f"## {title}", ""]
        for x in d["fix_first"][key]:
            lines.append(f"- {x['model']} in {x['market']}: {humanize(x['worst_check'] or 'no check')} "
                         f"at {fmt(x['worst_used_pct'], 3, '%')}; {x['installed_kwh']:,.0f} "
                         f"kWh installed; largest standby loss {x['driver']} "
                         f"{fmt(x['driver_w'], 2, 'W')} of {fmt(x['driver_of_p_w'], 2, 'W')}")
    if d.get("warnings"):
        lines += ["", "## Warnings", ""] + [f"- {humanize(w)}" for w in d["warnings"]]
    if d.get("caution"):
        lines += ["", "## Safety", "", d["caution"]]
    lines += ["", "Markets, prices and CO2 factors are figures of the trade recorded from "
              "memory (data/markets.csv); limit verdicts use data/limits/ and are an "
              "engineering aid, not a certification.", ""]
    return "\n".join(lines)


# ----------------------------------------------------------------------------------
# figures
# ----------------------------------------------------------------------------------
#: the figures of a product line (:func:`line_figures`), by file stem
LINE_FIGURES = ("headroom_matrix", "installed_energy")


def line_figures(d: dict, folder, overwrite: bool = True) -> list[Path]:
    """Write two figures (PNG and SVG each): ``headroom_matrix`` (model x market, 100 %
    minus the most-used check) and ``installed_energy`` (installed-base energy by model,
    stacked over the years); an existing file is refused unless ``overwrite``."""
    import numpy as np

    from .plots import _save, require_matplotlib

    plt = require_matplotlib()
    out = Path(folder)
    out.mkdir(parents=True, exist_ok=True)
    models = [m["model"] for m in d["models"]]
    markets = [m["market"] for m in d["markets"]]
    grid = np.full((len(models), len(markets)), np.nan)
    for p in d["pairs"]:
        u = p["worst_used_pct"]
        if p["cannot_power"]:
            u = 200.0
        if u is not None:
            grid[models.index(p["model"]), markets.index(p["market"])] = 100.0 - u
    fig, ax = plt.subplots(figsize=(1.2 + 0.9 * len(markets), 1.0 + 0.55 * len(models)))
    im = ax.imshow(np.clip(grid, -50, 100), cmap="RdYlGn", vmin=-50, vmax=100, aspect="auto")
    ax.set_xticks(range(len(markets)), markets)
    ax.set_yticks(range(len(models)), models)
    for i in range(len(models)):
        for j in range(len(markets)):
            if np.isfinite(grid[i, j]):
                ax.text(j, i, f"{grid[i, j]:.0f}", ha="center", va="center", fontsize=8)
    fig.colorbar(im, ax=ax, extend="both",
                 label="headroom [%] (< 0 fails)")
    ax.set_title("Headroom of the most-used check, model x market")
    ax.set_xlabel("market (blank: not sold there, or no counted check)")
    fig.tight_layout()
    written = _save(fig, out, "headroom_matrix", overwrite)
    plt.close(fig)
    years = sorted({x["year"] for x in d["installed_base"]})
    fig, ax = plt.subplots(figsize=(7, 3.5))
    bottom = np.zeros(len(years))
    for m in models:
        e = np.zeros(len(years))
        for x in d["installed_base"]:
            if x["model"] == m:
                e[years.index(x["year"])] += x["energy_kwh"] / 1e3
        ax.bar(years, e, bottom=bottom, label=m)
        bottom += e
    ax.set_xlabel("year of the line")
    ax.set_title("Installed-base energy by model", fontsize=9)
    ax.set_ylabel("installed-base energy [MWh/year]")
    ax.legend(title="model", fontsize=8)
    fig.tight_layout()
    written += _save(fig, out, "installed_energy", overwrite)
    plt.close(fig)
    return written


__all__ = ["line_to_dict", "render_line", "line_markdown", "line_figures", "line_tables"]
