"""Compare candidate designs over one fleet's life: the procurement decision.

Each candidate replaces the fleet's designs of the same ``role``; every other group, the
phases, the profiles and the tariff stay the same, so the candidates are compared on the
same fleet. Per candidate: the unit's own figures and compliance, the fleet's figures,
lifetime cost of ownership (purchase + discounted running cost), the payback year of a
dearer design against the cheapest to buy, and a one-line recommendation with its reason.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from pathlib import Path

import numpy as np
import pandas as pd

from . import economics as E
from .economics import horizon_problem, life_problem, rate_problem
from .errors import InputError
from .fleet import FleetResult, evaluate_fleet, unit_catalogue
from .io.design_file import Design, load_design
from .io.files import check_path
from .io.fleet_file import FleetSpec, load_fleet
from .limits.applicability import lightest_state, rated_state
from .unit import UnitAnalysis, analyse_unit

DEFAULT_YEARS = 10
DEFAULT_RATE = 0.05
DEFAULT_ESCALATION = 0.02


@dataclass(frozen=True)
class Failure:
    """One failed check: what failed (one line), what passing would need, and its key.

    ``collapse`` marks a supply that cannot power its load (its energy and cost are those
    of a supply out of regulation). ``key`` identifies the same check across candidates.
    """

    key: str
    text: str
    need: str
    collapse: bool = False


def _num(x, unit: str) -> str:
    return f"{x:.3g} {unit}".rstrip() if x is not None else "?"


def _row_failure(r: dict, where: str = "") -> Failure:
    """A failed compliance row as a Failure."""
    unit = "" if r.get("unit") in ("1", "-") else r.get("unit", "")
    if r["set"] == "output-regulation":
        text = r["reason"].split(" (the reservoir")[0]
        state = r["reason"].split("'")[1]
        need = f"to power its load in state '{state}'"
        if "holds " in text:
            asked = text.split(" of ")[-1]
            held = text.split("holds ")[1].split(" of ")[0]
            need = f"to hold {asked} in state '{state}' (holds {held})"
        return Failure(f"regulation {where}{state}", text, need, collapse=True)
    word = "at least" if r["quantity"] == "avg_active_eff_frac" or (
        r.get("value") is not None and r.get("limit") is not None
        and r.get("headroom") is not None and r["value"] < r["limit"]
        and r["headroom"] < 0) else "at most"
    text = f"{r['set']} {r['quantity']}" + (f" ({where.strip()})" if where else "")
    need = (f"{r['set']} {r['quantity']} {word} {_num(r.get('limit'), unit)} "
            f"(now {_num(r.get('value'), unit)})")
    return Failure(f"{r['set']} {r['quantity']} {where}".strip(), text, need)


def candidate_failures(unit_compliance: list[dict], unit: UnitAnalysis,
                       fleet: FleetResult, design_name: str) -> list[Failure]:
    """Every failed check of one candidate on its fleet (shared ones not yet removed).

    The candidate's own regulation is its unit check; the fleet's copy is not counted
    twice.
    """
    out = [_row_failure(r) for r in unit_compliance if r["verdict"] == "fail"]
    out += [Failure(f"stress {s.item}", f"stress: {s.item}",
                    f"{s.item} within {_num(s.limit, s.unit)} (now {_num(s.value, s.unit)})")
            for s in unit.stresses if s.verdict == "fail"]
    out += fleet_failures(fleet, skip_design=design_name)
    return out


def fleet_failures(fleet: FleetResult, skip_design: str | None = None) -> list[Failure]:
    """Failed checks of a whole fleet: IEEE 519, conductors, designs out of regulation."""
    out = []
    for r in fleet.compliance:
        if r["verdict"] == "fail":
            where = r.get("phase") or ""
            f = _row_failure(r, f"{where} " if where else "")
            text = f"IEEE 519 {r['quantity']}" + (f" on {where}" if where else "")
            out.append(replace(f, key="fleet " + f.key, text=text))
    out += [Failure(f"conductor {c['conductor']}",
                    f"{c['conductor']} conductor {c['used_pct']:.0f} %",
                    f"{c['conductor']} conductor at most 100 % of its rating "
                    f"(now {c['used_pct']:.0f} %)")
            for c in fleet.conductors if c["verdict"] == "over"]
    out += [Failure(f["check"], f["text"], f["need"], collapse=True)
            for f in fleet.failures if f["design"] != skip_design]
    return out


@dataclass(frozen=True)
class Candidate:
    """One candidate design evaluated on the fleet."""

    label: str
    path: Path
    design: Design
    unit: UnitAnalysis
    unit_compliance: list[dict]
    fleet: FleetResult
    replaced_units: int
    purchase_cost: float
    annual_cost: float
    lifetime: pd.DataFrame  # economics.lifetime_cost table
    driver: str

    @property
    def lifetime_cost(self) -> float:
        return float(self.lifetime["cost_cumulative_discounted"].iloc[-1])

    failures: list = field(default_factory=list)  # this candidate's own failed checks

    @property
    def collapsed(self) -> bool:
        """The candidate cannot power its load in some state (its energy and cost are
        those of a supply out of regulation)."""
        return any(f.collapse for f in self.failures)

    @property
    def collapsed_states(self) -> list[str]:
        return [f.key.split()[-1] for f in self.failures if f.collapse]


@dataclass(frozen=True)
class Comparison:
    fleet_name: str
    fleet_file: str
    currency: str
    years: int
    rate: float
    escalation: float
    candidates: list[Candidate]
    paybacks: list[dict]
    recommendation: str
    #: what the designs enter as: None for their nominals, else e.g. "P95 of its own spread"
    basis: str | None = None
    shared_failures: list = field(default_factory=list)  # every candidate's, not deciding
    baseline: str | None = None  # the payback baseline (cheapest to buy that holds its load)


def replace_role(spec: FleetSpec, path: Path, design: Design) -> tuple[FleetSpec, int]:
    """The fleet with every group whose design has ``design.role`` switched to ``design``.

    Returns the new spec and the number of units replaced.
    """
    if not design.role:
        raise InputError(design.source, "role", "a candidate design needs a role naming "
                         "which of the fleet's designs it replaces")
    on_site = design.on_mains(spec.site.v_ln_v, spec.site.f_hz)
    groups, replaced = [], 0
    new_states = tuple(design.states)
    for g in spec.groups:
        if spec.designs[g.design_path].role == design.role:
            used = [s for j, s in enumerate(g.states) if np.any(g.occupancy[:, j] > 0)]
            missing = [s for s in used if s not in new_states]
            if missing:
                raise InputError(design.source, "states",
                                 f"lacks state(s) {', '.join(missing)} that group "
                                 f"'{g.name}' of the fleet uses")
            # the group's occupancy columns follow its design's state order: carried over to
            # the candidate's order (a candidate listing its states otherwise, or with more
            # of them, must describe the same day)
            occ = np.zeros((g.occupancy.shape[0], len(new_states)))
            for j, s in enumerate(g.states):
                if s in new_states:
                    occ[:, new_states.index(s)] = g.occupancy[:, j]
            groups.append(replace(g, design_path=path, states=new_states, occupancy=occ))
            replaced += g.count
        else:
            groups.append(g)
    if not replaced:
        roles = sorted({d.role for d in spec.designs.values() if d.role})
        raise InputError(design.source, "role", f"role {design.role!r} matches no group of "
                         f"the fleet (its roles: {', '.join(roles) or 'none'})")
    used = {g.design_path for g in groups}
    designs = {p: d for p, d in spec.designs.items() if p in used and p != path}
    designs[path] = on_site
    nominal = dict(spec.nominal_mains)
    nominal[path] = design.mains
    return replace(spec, groups=groups, designs=designs, nominal_mains=nominal), replaced


def _driver(unit: UnitAnalysis) -> str:
    """The largest loss of the standby state (named, else the lightest), as a sentence."""
    light = unit.design.standby_state or lightest_state(unit.design)
    res = next((r for r in unit.states if r.state == light), unit.states[0])
    if not res.circuit_known:
        return f"{res.pq.p_w:.2f} W per unit at {res.state}; where it goes is {res.unknown_note}"
    name, watts = max(res.losses_w.items(), key=lambda kv: kv[1])
    return (f"{name} at {res.state}: {watts:.2f} W of {res.pq.p_w:.2f} W per unit")


def compare(
    fleet_path: str | Path,
    design_paths: list[str | Path],
    years: int | None = None,
    rate: float | None = None,
    escalation: float | None = None,
    progress=None,
    at: float | None = None,
    at_samples: int = 100,
    at_seed: int = 0,
) -> Comparison:
    """Evaluate each candidate design on the same fleet and over the same life.

    Parameters
    ----------
    fleet_path : path
        Fleet file.
    design_paths : list of path
        Candidate design files (at least one); each must have a ``role``.
    years, rate, escalation : optional
        Service life [year], discount rate [1/year] and energy-price escalation
        [1/year]; defaults 10, 5 % and 2 % (or the fleet file's ``[economics]``).

    Notes
    -----
    Purchase cost is the candidate's ``unit_price`` times the units it replaces (other
    groups are the same for every candidate and are left out of the purchase). Running
    cost is the whole fleet's annual energy, demand and reactive-energy cost. Lifetime
    cost = purchase + Σ_k running·(1+g)^(k−1)/(1+r)^k over the life
    (:func:`fleetpower.economics.lifetime_cost`).
    """
    if not design_paths:
        raise InputError(str(fleet_path), "--design", "name at least one candidate design")
    spec = load_fleet(fleet_path)
    econ = spec.economics
    for option, value, why in (("--years", years, life_problem),
                               ("--rate", rate, rate_problem),
                               ("--escalation", escalation, rate_problem)):
        if value is not None and why(value):
            raise InputError("compare", option, why(value))
    rate_given = rate is not None
    years = int(econ.get("service_life_years", DEFAULT_YEARS) if years is None else years)
    rate = float(econ.get("discount_rate", DEFAULT_RATE) if rate is None else rate)
    esc = float(econ.get("energy_escalation", DEFAULT_ESCALATION)
                if escalation is None else escalation)
    why = horizon_problem(rate, esc, years)
    if why:  # named after where the rate came from: the command line or the fleet file
        raise (InputError("compare", "--rate", why) if rate_given else
               InputError(str(fleet_path), "economics.discount_rate", why))
    candidates = []
    seen = set()
    for k, dp in enumerate(design_paths):
        path = Path(check_path(dp, "--design")).resolve()
        if path in seen:
            raise InputError(str(dp), "--design", "named twice")
        seen.add(path)
        design = load_design(path)
        new_spec, replaced = replace_role(spec, path, design)
        if at is not None:
            from .spread.study import fleet_at_percentile

            new_spec, _ = fleet_at_percentile(new_spec, at, samples=at_samples, seed=at_seed)
        on_site = new_spec.designs[path]
        if progress:
            progress(k + 1, len(design_paths), design.name)
        unit = analyse_unit(on_site)
        uc = list(unit.compliance)
        result = evaluate_fleet(new_spec, unit_catalogue(new_spec.designs))
        price = design.unit_price
        if price is None:
            raise InputError(design.source, "unit_price", "a candidate needs a unit_price to "
                             "be compared over its life")
        purchase = price * replaced
        annual = result.total_cost_per_year
        life = E.lifetime_cost(purchase, annual, rate, years, esc)
        candidates.append(Candidate(
            label=path.stem, path=path, design=on_site, unit=unit, unit_compliance=uc,
            fleet=result, replaced_units=replaced, purchase_cost=purchase,
            annual_cost=annual, lifetime=life, driver=_driver(unit),
            failures=candidate_failures(uc, unit, result, on_site.name)))
    shared = shared_failures(spec, candidates)
    keys = {f.key for f in shared}
    candidates = [replace(c, failures=[f for f in c.failures if f.key not in keys])
                  for c in candidates]
    paybacks = []
    holding = [c for c in candidates if not c.collapsed]
    cheapest = min(holding, key=lambda c: (c.purchase_cost, c.label)) if holding else None
    for c in holding:
        if c is cheapest:
            continue
        pb = E.payback_year(c.lifetime["cost_cumulative_discounted"].to_numpy(),
                            cheapest.lifetime["cost_cumulative_discounted"].to_numpy())
        reason = pb.reason.replace("design a", c.label).replace("design b", cheapest.label)
        if pb.year is not None:
            reason += f" against {cheapest.label}, the cheapest to buy that powers its load"
        paybacks.append({"design": c.label, "against": cheapest.label,
                         "payback_year": pb.year, "reason": reason})
    return Comparison(
        fleet_name=spec.name, fleet_file=spec.file, currency=spec.site.currency,
        years=years, rate=rate, escalation=esc, candidates=candidates, paybacks=paybacks,
        recommendation=recommend(candidates, years, spec.site.currency),
        basis=None if at is None else (f"each design at P{at:g} of its own spread of input "
                                       f"power ({at_samples} units, seed {at_seed})"),
        shared_failures=shared, baseline=None if cheapest is None else cheapest.label,
    )


def shared_failures(spec: FleetSpec, candidates: list[Candidate]) -> list[Failure]:
    """Failures of the groups no candidate replaces, which every candidate therefore shares.

    The fleet is evaluated without the replaced groups; its failed checks (IEEE 519,
    conductors, a design out of regulation) are every candidate's and decide nothing.
    """
    role = candidates[0].design.role
    rest = [g for g in spec.groups if spec.designs[g.design_path].role != role]
    if not rest:
        return []
    used = {g.design_path for g in rest}
    designs = {p: d for p, d in spec.designs.items() if p in used}
    rest_spec = replace(spec, groups=rest, designs=designs)
    return fleet_failures(evaluate_fleet(rest_spec, unit_catalogue(designs)))


def _why_out(c: Candidate) -> str:
    first = next((f for f in c.failures if f.collapse), c.failures[0])
    return f"{c.label} {first.text}" if first.collapse else f"{c.label} fails {first.text}"


def recommend(candidates: list[Candidate], years: int, currency: str) -> str:
    """One line: the lowest lifetime cost among candidates with no failed check of their own.

    A candidate that cannot power its load counts as failing (whatever its cost). Failures
    every candidate shares (groups they do not replace) are not theirs and decide nothing.
    When none passes, the line says so and what each would need; it names no choice.
    """
    clean = [c for c in candidates if not c.failures]
    if not clean:
        needs = "; ".join(f"{c.label} needs {', '.join(f.need for f in c.failures)}"
                          for c in candidates)
        return f"No candidate passes its own checks: {needs}."
    best = min(clean, key=lambda c: (c.lifetime_cost, c.label))
    why = (f"lowest {years}-year cost of ownership ({best.lifetime_cost:,.0f} {currency}) "
           "among the candidates that pass their own checks")
    cheaper = sorted((c for c in candidates if c.failures
                      and c.lifetime_cost < best.lifetime_cost),
                     key=lambda c: (c.lifetime_cost, c.label))
    if cheaper:
        why += "; cheaper " + "; ".join(_why_out(c) for c in cheaper)
    iso = ("isolated" if best.design.is_isolated else "NOT isolated: enclose it fully"
           if best.design.is_isolated is False else "isolation not known: check it")
    return f"Choose {best.label} ({best.design.name}): {why}; {iso}."


def comparison_table(cmp: Comparison) -> pd.DataFrame:
    """Per-design table (one row per candidate, units in column names)."""
    rows = []
    for c in cmp.candidates:
        d = c.design
        by = {r.state: r for r in c.unit.states}
        light = by[d.standby_state or lightest_state(d)]
        heavy = by[max(d.states, key=d.load_rank)]
        rated = by[rated_state(d)]
        rows.append({
            "design": c.label,
            "name": d.name,
            "topology": d.topology,
            "isolated": d.is_isolated,
            "unit_price": d.unit_price,
            "standby_p_w": light.pq.p_w,
            "active_p_w": heavy.pq.p_w,
            "s_va": max(r.pq.s_va for r in c.unit.states),
            "pf": rated.pq.pf,
            "thd_i_pct": rated.pq.thd_i_pct,
            "replaced_units": c.replaced_units,
            "fleet_p_kw": c.fleet.p_kw,
            "fleet_s_kva": c.fleet.s_kva,
            "fleet_q1_kvar": c.fleet.q1_kvar,
            "phase_i_rms_a": c.fleet.worst_phase["i_rms_a"],
            "neutral_i_rms_a": c.fleet.neutral_max["i_rms_a"],
            "e_kwh_per_year": c.fleet.e_kwh_per_year,
            "running_cost_per_year": c.annual_cost,
            "co2_kg_per_year": c.fleet.co2_kg_per_year,
            "purchase_cost": c.purchase_cost,
            "lifetime_cost": c.lifetime_cost,
            "failed_checks": len(c.failures),
            "collapsed": c.collapsed,
            "driver": c.driver,
        })
    return pd.DataFrame(rows)
