"""A product line across markets: every model on every mains it is sold into.

Data flows one way: :class:`~fleetpower.io.product_line_file.ProductLineSpec` -> the
distinct mains of each design -> every case of every (design, mains) solved in ONE batch
through :func:`fleetpower.simulate.run` (its cache then serves
:func:`fleetpower.unit.analyse_unit`, which adds stresses, EPS figures and compliance) ->
per model x market: standby and active power, PF, the applicable checks (the market's
``limit_sets`` decide which shipped rules apply there; everything else about a rule's
scope is :mod:`fleetpower.limits.applicability`'s) and energy per unit -> the installed
base per market and year (:mod:`fleetpower.installed_base`), its energy, cost and CO2 ->
a ranked "fix first" list.

Owns: :func:`evaluate_line`, :class:`LineResult`, the rated-range check of a design on a
market's mains. May import ``io``, ``simulate``, ``unit``, ``limits`` and
``installed_base``; never ``fleet``, ``compare`` or reports.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from . import limits as L
from .errors import InputError
from .installed_base import annual_energy_per_unit_kwh, units_in_service
from .io.design_file import ConverterOutput, Design
from .io.market_file import Market
from .io.product_line_file import ModelSpec, ProductLineSpec, load_product_line
from .limits.applicability import (
    COUNTED,
    EPS_LOAD_FRACTIONS,
    IN_SCOPE,
    lightest_state,
    mains_scope,
    rated_state,
    required_declaration,
    rows_in_market,
)
from .simulate import Case, run
from .topologies.base import STRESS_MAINS_FACTOR
from .unit import UnitAnalysis, analyse_unit, max_deliverable_currents_a

#: a design rated for one mains tolerates this fraction either side of its rated voltage
#: (the +/-10 % supply-voltage tolerance of IEC 60038, from memory)
SINGLE_RATING_VOLTAGE_TOL = 0.10
#: and this fraction either side of its rated frequency (common practice, no source)
SINGLE_RATING_FREQUENCY_TOL = 0.02
#: how many pairs each "fix first" list names
FIX_FIRST_N = 10


# ----------------------------------------------------------------------------------
# rating
# ----------------------------------------------------------------------------------
def rated_range(design: Design) -> tuple[float, float, float, float, str]:
    """(V min, V max, f min, f max, label) of a design's rating.

    A declared ``rated_input`` range (a universal-input converter, e.g. 90-264 V 47-63 Hz)
    is taken as written (its frequency, when not given, is the mains frequency +/-2 %).
    Without one the design is rated for its ``mains`` alone: +/-10 % of the voltage
    (IEC 60038 supply tolerance, from memory) and +/-2 % of the frequency.
    """
    v0, f0 = design.mains.voltage, design.mains.frequency
    ftol = (f0 * (1 - SINGLE_RATING_FREQUENCY_TOL), f0 * (1 + SINGLE_RATING_FREQUENCY_TOL))
    if design.rated_input is not None:
        (vlo, vhi) = design.rated_input.voltage
        (flo, fhi) = design.rated_input.frequency or ftol
        label = f"{vlo:g}-{vhi:g} V {flo:g}-{fhi:g} Hz (rated input range)"
    else:
        vlo, vhi = v0 * (1 - SINGLE_RATING_VOLTAGE_TOL), v0 * (1 + SINGLE_RATING_VOLTAGE_TOL)
        flo, fhi = ftol
        label = f"{v0:g} V {f0:g} Hz (single rating)"
    return vlo, vhi, flo, fhi, label


def rating_note(design: Design, v_v: float, f_hz: float) -> str:
    """Empty when the mains are within the design's rating, else why not (one line)."""
    vlo, vhi, flo, fhi, label = rated_range(design)
    why = []
    if not vlo - 1e-9 <= v_v <= vhi + 1e-9:
        why.append(f"{v_v:g} V is outside {vlo:.0f}-{vhi:.0f} V")
    if not flo - 1e-9 <= f_hz <= fhi + 1e-9:
        why.append(f"{f_hz:g} Hz is outside {flo:.4g}-{fhi:.4g} Hz")
    return "" if not why else f"outside its rating {label}: " + " and ".join(why) + \
        "; simulated as it is"


# ----------------------------------------------------------------------------------
# simulation: one batch for every design on every distinct mains
# ----------------------------------------------------------------------------------
def _cases(design: Design) -> list[Case]:
    """Every case analyse_unit asks for that is known before solving (so one batch)."""
    cases = [Case(design, s, f) for f in (1.0, STRESS_MAINS_FACTOR) for s in design.states]
    if design.external_power_supply and isinstance(design.output, ConverterOutput):
        out = design.output  # the EPS no-load and 25..100 % points
        state = next(iter(design.states))
        loads = [0.0] + [f * out.rated_power / out.voltage for f in EPS_LOAD_FRACTIONS]
        cases += [Case(design, state, 1.0, a) for a in loads]
    return cases


def analyse_on_mains(designs: dict[tuple, Design], progress=None) -> dict[tuple, UnitAnalysis]:
    """Analyse each (design on mains) once, with as few batches as the work allows.

    Every case known before solving (all states at nominal and +10 % mains, the EPS load
    points) of every design goes into ONE :func:`fleetpower.simulate.run` batch. The
    deliverable-current search runs only for a design that cannot hold its output in some
    state (the line reports no hand estimate beside it), and the searches of all such
    designs run in lockstep, one batch per step. :func:`fleetpower.unit.analyse_unit` is
    then served by the cache.
    """
    per = {key: _cases(d) for key, d in designs.items()}
    results = iter(run([c for cs in per.values() for c in cs]))
    collapsed = []
    for key, cs in per.items():
        res = [next(results) for _ in cs]
        if any(r.in_regulation is False for c, r in zip(cs, res, strict=True)
                if c.mains_factor == 1.0 and c.load_a is None):
            collapsed.append(designs[key])
    max_deliverable_currents_a(collapsed)  # fills the cache the analyses below read
    out = {}
    for k, (key, d) in enumerate(designs.items()):
        out[key] = analyse_unit(d, report_deliverable=False)
        if progress is not None:
            progress(k + 1, len(designs), d.name)
    return out


# ----------------------------------------------------------------------------------
# the line
# ----------------------------------------------------------------------------------
@dataclass(frozen=True)
class LineResult:
    """Everything ``fleetpower line`` reports.

    ``pairs``: one row per model x market (figures per unit, verdict, installed-base
    totals); ``checks``: one row per model x market x check; ``installed``: one row per
    model x market x year (units in service, energy, cost, CO2).
    """

    spec: ProductLineSpec
    pairs: pd.DataFrame
    checks: pd.DataFrame
    installed: pd.DataFrame
    analyses: dict
    cautions: dict  # model name -> non-isolation caution (droppers)

    def fix_first(self, n: int = FIX_FIRST_N) -> dict[str, pd.DataFrame]:
        """The pairs to fix first: least headroom, and most installed-base energy."""
        p = self.pairs
        collapsed = (p["cannot_power"] != "").astype(int)
        ranked = p.assign(_c=collapsed, _u=p["worst_used_pct"].astype(float).fillna(-np.inf))
        ranked = ranked[(ranked["_c"] == 1) | p["worst_used_pct"].notna()]
        # a supply that cannot power its load has no headroom at all: it comes first
        least = ranked.sort_values(["_c", "_u", "installed_kwh"], ascending=[False] * 3,
                                   kind="stable").head(n).drop(columns=["_c", "_u"])
        most = p.sort_values("installed_kwh", ascending=False, kind="stable").head(n)
        return {"least_headroom": least, "most_energy": most}


def _standby_state(design: Design) -> str | None:
    return getattr(design, "standby_state", None)


def _driver(design: Design, analysis: UnitAnalysis) -> tuple[str, str, float | None, float]:
    """(state, component, its loss [W], input power [W]) of the largest standby loss."""
    state = _standby_state(design) or lightest_state(design)
    res = next((r for r in analysis.states if r.state == state), analysis.states[0])
    if not res.circuit_known:
        return res.state, f"(losses {res.unknown_note})", None, float(res.pq.p_w)
    name, watts = max(res.losses_w.items(), key=lambda kv: kv[1])
    return res.state, name, float(watts), float(res.pq.p_w)


def _collapsed(design: Design, analysis: UnitAnalysis) -> list[str]:
    """One sentence per state in which the supply cannot hold its output."""
    out = []
    for r in analysis.states:
        if r.in_regulation is not False:  # held, or not known (a measured gadget)
            continue
        if design.has_linear_regulator and analysis.max_deliverable_a is not None:
            out.append(f"cannot power its load in state {r.state}: holds "
                       f"{analysis.max_deliverable_a * 1e3:.1f} mA of {r.load_a * 1e3:.1f} mA")
        else:
            out.append(f"cannot power its load in state {r.state}: the bulk capacitor falls "
                       f"to {r.v_dc_min_v:.1f} V, below the converter's lockout")
    return out


def check_standby_declared(spec: ProductLineSpec) -> None:
    """A model sold where a standby rule applies must name its standby state.

    Raises
    ------
    InputError
        Naming the product-line file and the model's ``design`` key.
    """
    for m in spec.models:
        if _standby_state(m.design) is not None:
            continue
        for mid in m.sales:
            mk = spec.markets[mid]
            on = m.design.on_mains(mk.v_ln_v, mk.frequency_hz)
            # a standby rule applies where the market has it and it covers those mains
            rules = [s for s in mk.limit_sets
                     if required_declaration(s) == "standby_state"
                     and mains_scope(s, on) == IN_SCOPE]
            if rules:
                raise InputError(spec.file, f"{m.where}.design",
                                 f"design '{m.design.name}' names no standby_state, and the "
                                 f"{mid} market applies the standby rule {rules[0]}; add "
                                 f"standby_state = \"<state>\" to {m.design_path.name}")


def evaluate_line(spec: ProductLineSpec, progress=None) -> LineResult:
    """Evaluate a product line: every model on every market's mains, and its installed base.

    Parameters
    ----------
    spec : ProductLineSpec
        From :func:`fleetpower.io.product_line_file.load_product_line`.
    progress : callable, optional
        ``progress(done, total, name)`` after each (design, mains) analysis.

    Returns
    -------
    LineResult
    """
    check_standby_declared(spec)
    on_mains: dict[tuple, Design] = {}
    for m in spec.models:
        for mid in m.sales:
            mk = spec.markets[mid]
            key = (str(m.design_path), mk.v_ln_v, mk.frequency_hz)
            if key not in on_mains:
                on_mains[key] = m.design.on_mains(mk.v_ln_v, mk.frequency_hz)
    analyses = analyse_on_mains(on_mains, progress)
    years = np.arange(spec.horizon_years)
    pairs, checks, installed = [], [], []
    cautions = {}
    for m in spec.models:
        for mid, sales in m.sales.items():
            mk = spec.markets[mid]
            key = (str(m.design_path), mk.v_ln_v, mk.frequency_hz)
            a = analyses[key]
            if a.caution:
                cautions[m.name] = a.caution
            pairs.append(_pair(spec, m, mk, a, sales, years, checks, installed))
    return LineResult(spec, pd.DataFrame(pairs), pd.DataFrame(checks),
                      pd.DataFrame(installed), analyses, cautions)


def _pair(spec, m: ModelSpec, mk: Market, a: UnitAnalysis, sales, years, checks,
          installed) -> dict:
    d = a.design
    by = {r.state: r for r in a.states}
    p_by_state = np.array([by[s].pq.p_w for s in m.states])
    e_unit = annual_energy_per_unit_kwh(p_by_state, m.occupancy)
    active = rated_state(d)
    standby = _standby_state(d)
    # the rows of the (design, mains) analysis, scoped to this market's rules: only
    # in-scope rows pass or fail, and only they decide headroom and the fix-first list
    rows = rows_in_market(a.compliance, mk.market, mk.limit_sets, str(mk.source))
    in_scope = [r for r in rows if r["scope"] == IN_SCOPE and r["verdict"] in COUNTED]
    counted = [r for r in in_scope if r.get("used_pct") is not None]
    worst = max(counted, key=lambda r: r["used_pct"], default=None)
    failures = [f"{r['set']} {r['quantity']}" for r in in_scope if r["verdict"] == "fail"]
    collapsed = _collapsed(d, a)
    for r in rows:
        checks.append({"model": m.name, "market": mk.market, **{
            k: r.get(k) for k in ("set", "quantity", "value", "limit", "unit", "used_pct",
                                  "headroom", "verdict", "scope", "clause", "edition",
                                  "provenance", "reason")}})
    units = units_in_service(sales, m.service_life_years, spec.horizon_years)
    e_year = units * e_unit
    for y in years:
        installed.append({
            "model": m.name, "market": mk.market, "year": int(y),
            "calendar_year": None if spec.first_year is None else spec.first_year + int(y),
            "units_in_service": float(units[y]), "energy_kwh": float(e_year[y]),
            "cost": float(e_year[y] * mk.price_per_kwh), "currency": mk.currency,
            "co2_kg": float(e_year[y] * mk.co2_kg_per_kwh)})
    drv_state, drv_part, drv_w, drv_p = _driver(d, a)
    n_fail = len(failures) + (len(collapsed) if not any(
        r["set"] == "output-regulation" for r in rows) else 0)
    return {
        "model": m.name, "market": mk.market, "design": m.design_path.name,
        "design_name": d.name, "v_ln_v": mk.v_ln_v, "frequency_hz": mk.frequency_hz,
        "rating": rated_range(d)[4], "rating_note": rating_note(m.design, mk.v_ln_v,
                                                                mk.frequency_hz),
        "standby_state": standby,
        "standby_p_w": by[standby].pq.p_w if standby in by else None,
        "standby_pf": by[standby].pq.pf if standby in by else None,
        "active_state": active,
        "active_p_w": by[active].pq.p_w if active in by else None,
        "active_pf": by[active].pq.pf if active in by else None,
        "energy_per_unit_kwh": e_unit,
        "cannot_power": "; ".join(collapsed),
        "failed_checks": n_fail,
        "failures": "; ".join(collapsed + failures),
        "worst_check": None if worst is None else f"{worst['set']} {worst['quantity']}",
        "worst_used_pct": None if worst is None else float(worst["used_pct"]),
        "units_sold": float(np.sum(sales)),
        "unit_years": float(units.sum()),
        "installed_kwh": float(e_year.sum()),
        "installed_cost": float(e_year.sum() * mk.price_per_kwh),
        "currency": mk.currency,
        "installed_co2_kg": float(e_year.sum() * mk.co2_kg_per_kwh),
        "driver_state": drv_state, "driver": drv_part, "driver_w": drv_w,
        "driver_of_p_w": drv_p,
        **({"figures_basis": [f"{r.state}: {r.basis}" for r in a.states if r.basis]}
           if any(r.basis for r in a.states) else {}),
        "isolated": d.is_isolated,
    }


def run_line(path, progress=None) -> LineResult:
    """Read a product-line file and evaluate it (the library behind ``fleetpower line``)."""
    known = list(L.list_limit_sets()["set"])
    return evaluate_line(load_product_line(path, known), progress)


__all__ = ["evaluate_line", "run_line", "LineResult", "rated_range", "rating_note",
           "check_standby_declared", "analyse_on_mains"]
