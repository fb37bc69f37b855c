"""The report model: JSON-ready dictionaries of a unit, a fleet and a comparison.

Every figure shown on the terminal or in Markdown is taken from these dictionaries (the
same that ``--json`` prints), so the renderings can never disagree beyond the displayed
digits. Keys carry their units (``p_w``, ``s_va``, ``i_rms_a``).

Owns: the JSON shape, the refusal of NaN/infinite figures, (the number format :func:`fmt` lives in ``report.format``)
and the rows of the comparison summary shared by the terminal and Markdown renderings.
May import anything of fleetpower below it; nothing imports it but ``report`` and ``cli``.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from ..errors import FleetpowerError
from ..gadget_range import unique
from ..pq.spectrum import harmonic_columns
from ..simulate import StateResult
from ..unit import UnitAnalysis
from .format import fmt


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
    table = harmonic_columns(q.i_h_a)
    out = {
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
            {"h": int(h), "i_rms_a": i_a, "pct_of_fundamental": pct,
             # an order at rounding level has no phase (pq.spectrum.PHASE_FLOOR_OF_I1)
             "phase_deg": None if math.isnan(deg) else deg}
            for h, i_a, pct, deg in zip(table["h"], table["i_rms_a"],
                                        table["pct_of_fundamental"], table["phase_deg"],
                                        strict=True)
        ],
    }
    if not r.circuit_known:
        # a measured gadget: what only a circuit tells is not known (never 0 or NaN)
        out.update({"losses_w": None, "delivered_w": None, "balance": None, "output": None,
                    "circuit_figures": r.unknown_note, "basis": r.basis,
                    "voltage_scaling": r.voltage_scaling, "notes": list(r.notes)})
        return out
    out.update({
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
    })
    return out


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
        "range_warnings": [w.to_dict() for w in u.range_warnings],
    }
    unknown = next((r.unknown_note for r in u.states if not r.circuit_known), None)
    if unknown is not None:
        out["circuit_figures"] = unknown
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
    if u.compliance:
        out["compliance"] = list(u.compliance)
    if len(u.states) == 1:
        for k, v in out["states"][0].items():
            out.setdefault(k, v)
    return _clean(out)


# ----------------------------------------------------------------------------------
# terminal
# ----------------------------------------------------------------------------------
# ----------------------------------------------------------------------------------
# fleets
# ----------------------------------------------------------------------------------
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
        "peak_case": r.peak_case,
        "assumptions": dict(r.assumptions),
        "p_kw": r.p_kw,
        "q1_kvar": r.q1_kvar,
        "q1_sense": "leading (capacitive)" if r.q1_kvar < 0 else "lagging (inductive)",
        "s_kva": r.s_kva,
        "s_e_kva": r.s_e_kva,
        "pf": r.pf,
        "pf_basis": r.pf_basis,
        "pf_arith": r.pf_arith,
        "dpf": r.dpf,
        "worst_phase": dict(r.worst_phase),
        "phases": [
            {"phase": f.phase, "p_kw": f.p_w / 1e3, "q1_kvar": f.q1_var / 1e3,
             "s_kva": f.s_va / 1e3, "i_rms_a": f.i_rms_a, "i1_a": f.i1_a,
             "thd_i_pct": f.thd_i_pct, "k_factor": f.k_factor,
             "k_factor_h_max": f.k_factor_h_max, "f_hl": f.f_hl,
             "i_rms_max_a": f.i_rms_max_a, "i_rms_max_case": f.i_rms_max_case,
             "harmonics_a": [abs(x) for x in f.i_h_a[1:]]}
            for f in r.phases
        ],
        "neutral": {"i_rms_a": r.neutral_i_rms_a, "i1_a": r.neutral_i1_a,
                    "i3_a": float(abs(r.neutral_i_h_a[3])),
                    "i_rms_max_a": r.neutral_max["i_rms_a"],
                    "i_rms_max_case": r.neutral_max["case"],
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
        "range_warnings": [w.to_dict() for w in r.range_warnings],
        "failures": list(r.failures),
    }
    if r.measured:
        out["measured"] = list(r.measured)
    return _clean(out)


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
    ("worst phase I (any hour)", "phase_i_rms_a", 3, "A"),
    ("neutral I (any hour)", "neutral_i_rms_a", 3, "A"),
    ("energy per year", "e_kwh_per_year", 4, "kWh"),
    ("running cost/year", "running_cost_per_year", 4, "$"),
    ("CO2 per year", "co2_kg_per_year", 4, "kg"),
    ("over the life", None, 0, ""),
    ("purchase", "purchase_cost", 4, "$"),
    ("lifetime cost", "lifetime_cost", 4, "$"),
)


def compare_to_dict(cmp) -> dict:
    """JSON-ready report of a :class:`fleetpower.compare.Comparison`."""
    from ..compare import comparison_table

    table = comparison_table(cmp)
    designs = []
    for c, row in zip(cmp.candidates, table.to_dict("records"), strict=True):
        d = dict(row)
        d["letter"] = chr(ord("A") + len(designs))
        d["file"] = str(c.path)
        d["safety"] = safety_label(c.design.is_isolated)
        d["failures"] = [f.text for f in c.failures]
        d["needs"] = [f.need for f in c.failures]
        d["collapsed_states"] = c.collapsed_states
        d["unit_compliance"] = c.unit_compliance
        d["fleet_compliance"] = c.fleet.compliance
        d["conductors"] = c.fleet.conductors
        d["lifetime_by_year"] = [
            {"year": int(y), "cost": r.cost, "cost_cumulative_discounted":
             r.cost_cumulative_discounted}
            for y, r in c.lifetime.iterrows()
        ]
        d["groups"] = c.fleet.groups.to_dict("records")
        d["range_warnings"] = [w.to_dict() for w in unique(
            [*c.unit.range_warnings, *c.fleet.range_warnings])]
        designs.append(d)
    outside = unique(w for c in cmp.candidates
                     for w in (*c.unit.range_warnings, *c.fleet.range_warnings))
    return _clean({
        "fleet": cmp.fleet_name,
        "file": cmp.fleet_file,
        "currency": cmp.currency,
        "service_life_years": cmp.years,
        "discount_rate": cmp.rate,
        "energy_escalation": cmp.escalation,
        "designs": designs,
        "paybacks": cmp.paybacks,
        "payback_baseline": cmp.baseline,
        "shared_failures": [f.text for f in cmp.shared_failures],
        "recommendation": cmp.recommendation,
        **({"basis": cmp.basis} if getattr(cmp, "basis", None) else {}),
        "caution": _compare_caution([c.design.is_isolated for c in cmp.candidates]),
        "warnings": [w.message for w in outside],
        "range_warnings": [w.to_dict() for w in outside],
    })


def _compare_caution(isolated: list[bool | None]) -> str | None:
    if any(x is False for x in isolated):
        return ("Non-isolated candidates put everything on their output at mains "
                "potential; enclose them fully and follow local codes and licensed "
                "practice.")
    if any(x is None for x in isolated):
        return ("Some candidates do not declare whether their output is isolated; treat "
                "it as possibly at mains potential until their documentation says so.")
    return None


def safety_label(isolated: bool | None) -> str:
    """How a design's isolation is stated in reports (None: the file does not say)."""
    if isolated is None:
        return "isolation not known (not declared)"
    return "isolated" if isolated else "NOT isolated: output at mains potential"


def compare_cell(d: dict, key: str, digits: int, unit: str, currency: str) -> str:
    v = d[key]
    if key == "replaced_units":
        return f"{int(v):,}"
    unit = currency if unit == "$" else unit
    return fmt(v, digits, unit)


#: figures marked on a candidate that cannot power its load (those of a collapsed supply)
COLLAPSE_MARKED = ("e_kwh_per_year", "running_cost_per_year", "co2_kg_per_year",
                   "lifetime_cost")
COLLAPSE_NOTE = ("* {who}: cannot power its load ({states}); its energy and cost are those "
                 "of a supply that has collapsed, not of one doing its job.")


def marked_cell(d: dict, key: str, digits: int, unit: str, currency: str) -> str:
    """:func:`compare_cell`, with `` *`` on the energy and cost of a collapsed supply."""
    text = compare_cell(d, key, digits, unit, currency)
    return text + " *" if d.get("collapsed") and key in COLLAPSE_MARKED else text


def collapse_notes(d: dict) -> list[str]:
    """One footnote per collapsed candidate of a comparison report dict."""
    return [COLLAPSE_NOTE.format(who=f"{x['letter']} ({x['design']})",
                                 states=", ".join(f"state '{s}'" for s in x["collapsed_states"]))
            for x in d["designs"] if x.get("collapsed")]


__all__ = ["state_to_dict", "unit_to_dict", "fleet_to_dict", "compare_to_dict", "fmt",
           "COMPARE_ROWS", "compare_cell", "marked_cell", "collapse_notes"]
