"""Which published limits apply to one supply, evaluated on its simulated figures.

This joins the engine's metrics (:mod:`fleetpower.unit`) with the limit tables and
rules (:mod:`fleetpower.limits.tables`, :mod:`fleetpower.limits.rules`). The tool reports
margins against the tables it ships; it does not certify anything, and defers to the
standards' own texts, local codes and licensed practice.

Owns: the choice of limit sets for a unit and the figures they are evaluated on. May import
the rest of ``limits``, ``io`` and the unit analysis; nothing of fleet, compare or report.
"""

from __future__ import annotations

import math
from dataclasses import fields
from typing import TYPE_CHECKING

import numpy as np

from .. import limits as L
from ..io.design_file import ConverterOutput, Design
from ..simulate import simulate_cases

if TYPE_CHECKING:  # pragma: no cover
    from ..unit import UnitAnalysis

#: a row the design is outside of: verdict words that are neither pass nor fail
IN_SCOPE = "in scope"
#: load fractions of the average-active-efficiency test (EU 2019/1782, US Level VI)
EPS_LOAD_FRACTIONS = (0.25, 0.50, 0.75, 1.00)
#: low-voltage EPS: nameplate output below 6 V and at least 550 mA
#: (EU 2019/1782 Article 2; 10 CFR 430.2; from memory)
LOW_VOLTAGE_EPS_V = 6.0
LOW_VOLTAGE_EPS_A = 0.550
#: IEC 61000-3-2: no limits for equipment (other than lighting) of rated power <= 75 W
IEC_EXEMPT_W = 75.0
#: the set evaluated for the standby state (2025 tier)
STANDBY_SET = "eu-2023-826-standby"
_EPS_SETS = {
    ("eu", False): "eu-2019-1782-eps-basic",
    ("eu", True): "eu-2019-1782-eps-low-voltage",
    ("us", False): "us-doe-level-vi-eps-basic",
    ("us", True): "us-doe-level-vi-eps-low-voltage",
}


def low_voltage_eps(v_out_v: float, p_out_w: float) -> bool:
    """Whether an external power supply is of the low-voltage class.

    Parameters
    ----------
    v_out_v : float
        Nameplate output voltage [V].
    p_out_w : float
        Nameplate output power [W]; the nameplate current is ``p_out_w / v_out_v``.

    Returns
    -------
    bool
        True when the output is below 6 V *and* its current at least 550 mA.

    Notes
    -----
    The current is compared after rounding to a nanoampere so that a nameplate of
    exactly 550 mA (e.g. 2.75 W at 5 V, whose quotient is not exact in binary) counts.

    References
    ----------
    Commission Regulation (EU) 2019/1782, Article 2 (definition of low-voltage external
    power supply); US DOE 10 CFR 430.2 (from memory).
    """
    i_out_a = round(float(p_out_w) / float(v_out_v), 9)
    return float(v_out_v) < LOW_VOLTAGE_EPS_V and i_out_a >= LOW_VOLTAGE_EPS_A


def _scope_rec(set_id: str) -> dict:
    return L.scope_record(set_id)


def mains_scope(set_id: str, design: Design) -> str:
    """``"in scope"`` or ``"out of scope: <reason>"`` for the design's mains."""
    rec = _scope_rec(set_id)
    if not rec:
        return IN_SCOPE
    v, f = design.mains.voltage, design.mains.frequency
    lo, hi, fz = rec["v_ln_min_v"], rec["v_ln_max_v"], rec["frequency_hz"]
    ok = ((math.isnan(lo) or v >= lo - 1e-9) and (math.isnan(hi) or v <= hi + 1e-9)
          and (math.isnan(fz) or abs(f - fz) <= 0.5))
    if ok:
        return IN_SCOPE
    span = (f"{lo:g}-{hi:g} V" if not (math.isnan(lo) or math.isnan(hi))
            else f"up to {hi:g} V" if not math.isnan(hi) else f"from {lo:g} V")
    span += "" if math.isnan(fz) else f" {fz:g} Hz"
    market = rec["market"]
    who = (f"{market} rule" if market in ("EU", "US")
           else f"{rec['edition'].split(':')[0]} limits are")
    verb = "for" if market in ("EU", "US") else "written for"
    return (f"out of scope: {who} {verb} {span} line-to-neutral mains; this design is on "
            f"{v:g} V {f:g} Hz")


#: verdicts that count as a check; every other verdict (out of scope, for information,
#: exempt, not evaluated, not applicable) is neither a pass nor a failure
COUNTED = ("pass", "fail")


def market_scope(set_id: str, market: str, market_sets, source: str = "") -> str:
    """``"in scope"`` or ``"out of scope: <reason>"`` for a shipped set in one market.

    Parameters
    ----------
    set_id : str
        A shipped limit set (a row of ``data/limits/scope.csv``).
    market : str
        The market's id (``data/markets.csv``).
    market_sets : collection of str
        The market's ``limit_sets``: the shipped rules that are law or practice there.
    source : str
        Where the market was read from (named in the reason).

    Notes
    -----
    The scope table says which products and which mains a set covers; a rule's market
    is a further dimension the mains alone cannot decide (China, India and Australia run
    the same 230 V 50 Hz as the EU and have not adopted its standby regulation), so the
    market file's ``limit_sets`` decides it. This is the one place that applies it.
    """
    if set_id in set(market_sets):
        return IN_SCOPE
    rec = _scope_rec(set_id)
    where = f" ({source})" if source else ""
    who = f"; the set is a rule of: {rec['market']}" if rec else ""
    return f"out of scope: not a rule of the {market} market{where}{who}"


def rows_in_market(rows, market: str, market_sets, source: str = "") -> list[dict]:
    """A unit's compliance rows (on the market's mains) as they stand in that market.

    A shipped set that is not one of the market's rules (:func:`market_scope`) is out of
    scope there whatever its verdict on the mains alone (its figures, when shown for
    information, stay for information); every other row — its scope from the products,
    mains and declarations of :func:`unit_compliance`, the output-regulation check, a
    user's set — is kept as it is. Only in-scope rows keep ``pass`` or ``fail``.
    """
    shipped = L.scope_set_ids()
    out = []
    for r in rows:
        d = dict(r)
        d.setdefault("scope", IN_SCOPE)
        if d["set"] in shipped and d["scope"] == IN_SCOPE:
            scope = market_scope(d["set"], market, market_sets, source)
            if scope != IN_SCOPE:
                d["scope"] = scope
                if d["verdict"] != "for information":
                    d["verdict"] = "out of scope"
                d["used_pct"] = d["headroom"] = None
        if d["scope"] != IN_SCOPE and d["verdict"] in COUNTED:  # never a pass or fail
            d["verdict"] = "out of scope"
            d["used_pct"] = d["headroom"] = None
        out.append(d)
    return out


def required_declaration(set_id: str) -> str | None:
    """The design declaration a shipped set needs (``standby_state``, ...) or None."""
    req = _scope_rec(set_id).get("requires")
    return req if isinstance(req, str) and req else None


def _as_dict(row: L.ComplianceRow) -> dict:
    """A compliance row's fields by name (all scalars and strings: a shallow copy is
    :func:`dataclasses.asdict`'s result without its recursive deep copy)."""
    return {f.name: getattr(row, f.name) for f in fields(row)}


def _scoped(row, scope: str = IN_SCOPE, verdict: str | None = None,
            reason: str | None = None) -> dict:
    d = _as_dict(row) if not isinstance(row, dict) else dict(row)
    d["scope"] = scope
    if verdict is not None:
        d["verdict"] = verdict
    if reason is not None:
        d["reason"] = reason
    return d


def _set_row(set_id: str, quantity: str, unit: str, verdict: str, scope: str,
             reason: str) -> dict:
    """One row standing for a whole set that is not evaluated or not in scope."""
    first = L.limit_records(set_id)[0]
    row = L.ComplianceRow(set_id, quantity, None, None, unit, None, None, verdict,
                          str(first["clause"]), str(first["edition"]),
                          str(first["provenance"]), reason)
    return _scoped(row, scope)


def _rows(rows: list[L.ComplianceRow]) -> list[dict]:
    return [_as_dict(r) for r in rows]


def rated_state(design: Design) -> str:
    """State at which emissions are assessed: ``rated_state`` or the heaviest load."""
    if design.rated_state:
        return design.rated_state
    return max(design.states, key=design.load_rank)


def lightest_state(design: Design) -> str:
    return min(design.states, key=design.load_rank)


def eps_figures(design: Design) -> tuple[float, float, list[float]]:
    """No-load input power [W], average active efficiency [-] and the four efficiencies.

    The supply is simulated at no load and at 25/50/75/100 % of its rated output in one
    batch; efficiency is output power over mains input power at each.
    """
    out = design.output
    assert isinstance(out, ConverterOutput)
    state = next(iter(design.states))
    loads = [0.0] + [f * out.rated_power / out.voltage for f in EPS_LOAD_FRACTIONS]
    res = simulate_cases(design, [(state, 1.0, a) for a in loads])
    no_load = res[0].pq.p_w
    effs = [r.balance.delivered_w / r.pq.p_w for r in res[1:]]
    return no_load, L.average_active_efficiency(effs), effs


def unit_values(design: Design, analysis: UnitAnalysis) -> dict[str, float]:
    """Named figures a user limit file may refer to (rated state unless stated)."""
    by = {r.state: r for r in analysis.states}
    rs = by.get(rated_state(design)) or analysis.states[0]
    q = rs.pq
    vals = {
        "p_w": q.p_w, "s_va": q.s_va, "q1_var": q.q1_var, "pf": q.pf, "dpf": q.dpf,
        "thd_i_pct": q.thd_i_pct, "i_rms_a": q.i_rms_a, "i_peak_a": q.i_peak_a,
        "crest_factor": q.crest_factor,
    }
    if design.standby_state is not None and design.standby_state in by:
        vals["standby_p_w"] = by[design.standby_state].pq.p_w
    for h in range(1, len(q.i_h_a)):
        vals[f"i_h{h}_a"] = float(abs(q.i_h_a[h]))
    for s in analysis.stresses:
        key = s.item.replace(" ", "_").replace("-", "_")
        vals[f"{key}_{s.unit.lower()}"] = s.value
    return vals


def _load_text(design: Design, state: str, amount_a: float) -> str:
    """A load in the unit the design gives it: mA for a current, W for a power."""
    kind, _ = design.states[state]
    if kind == "power":
        return f"{amount_a * design.output.voltage:.2f} W"
    return f"{amount_a * 1e3:.1f} mA"


def regulation_rows(design: Design, analysis: UnitAnalysis) -> list[dict]:
    """One row per analysed state: does the supply hold its output at that load?

    The physical test is the reservoir's minimum voltage against what the output stage
    needs: output + dropout for a linear regulator, the undervoltage lockout for a
    converter. A state below it cannot power its load; the row says how much load the
    supply holds (the largest load it sustains in regulation) of how much is asked.

    References
    ----------
    Linear regulator dropout: the input must stay at least V_out + V_dropout (regulator
    datasheet definition; common practice, no source).
    """
    if all(r.in_regulation is None for r in analysis.states):
        return []
    if design.has_linear_regulator:
        need = design.output.voltage + design.output.dropout
        what = "output + dropout"
    else:
        need = design.output.undervoltage_lockout
        what = "the converter's undervoltage lockout"
    rows = []
    for r in analysis.states:
        if r.in_regulation is None:  # not known (a measured gadget): no verdict
            continue
        used, head, verdict = L.margin(r.v_dc_min_v, need, "min")
        if r.in_regulation:
            verdict = "pass"
            reason = (f"state '{r.state}': the reservoir stays at or above {need:.2f} V "
                      f"({what})")
        else:
            verdict = "fail"
            held = analysis.max_deliverable_a
            holds = ("" if held is None else
                     f"holds {_load_text(design, r.state, held)} of ")
            reason = (f"cannot power its load in state '{r.state}': {holds}"
                      f"{_load_text(design, r.state, r.load_a)} (the reservoir falls to "
                      f"{r.v_dc_min_v:.2f} V, below {need:.2f} V, {what})")
        rows.append({
            "set": "output-regulation", "quantity": "v_reservoir_min_v",
            "value": r.v_dc_min_v, "limit": need, "unit": "V", "used_pct": used,
            "headroom": head, "verdict": verdict, "scope": IN_SCOPE,
            "clause": what, "edition": "fleetpower: the supply must power its load",
            "provenance": "simulated periodic steady state", "reason": reason,
        })
    return rows


def _harmonic_rows(design: Design, rs) -> list[dict]:
    """IEC 61000-3-2 at the rated state, by product and mains (see the scope table)."""
    lighting = design.lighting
    cls = design.equipment_class or ("C" if lighting else None)
    set_id = f"iec61000-3-2-class-{(cls or 'A').lower()}"
    if rs is None:
        return [_set_row(set_id, "i_h_a", "A", "not evaluated", IN_SCOPE,
                         f"rated state '{rated_state(design)}' was not analysed")]
    scope = mains_scope(set_id, design)
    p_w = rs.pq.p_w
    if not lighting and p_w <= IEC_EXEMPT_W:
        return [_set_row(set_id, "i_h_a", "A", "exempt", scope,
                         f"no limits for equipment other than lighting of {IEC_EXEMPT_W:g} W "
                         f"or less (clause 7); {p_w:.3g} W at state '{rs.state}'")
                if scope == IN_SCOPE else
                _set_row(set_id, "i_h_a", "A", "out of scope", scope,
                         f"{p_w:.3g} W, not lighting: exempt on the mains it covers too")]
    if cls is None:
        return [_set_row(set_id, "i_h_a", "A", "not evaluated", scope,
                         f"{p_w:.3g} W and the design names no equipment_class (A, B or D)")]
    rows = L.evaluate_harmonic_emissions(np.abs(rs.pq.i_h_a), p_w, rs.pq.pf, cls,
                                         is_lighting=lighting)
    if scope == IN_SCOPE:
        return [_scoped(r) for r in rows]
    return [_scoped(r, scope, verdict="for information") for r in rows]


def _standby_rows(design: Design, by: dict) -> list[dict]:
    """EU standby on the state the design names as its standby, on EU mains."""
    scope = mains_scope(STANDBY_SET, design)
    name = design.standby_state
    if scope != IN_SCOPE:
        return [_set_row(STANDBY_SET, "standby_p_w", "W", "out of scope", scope, "")]
    if name is None:
        return [_set_row(STANDBY_SET, "standby_p_w", "W", "not evaluated", scope,
                         "the design names no standby_state: which state is standby is "
                         "not guessed")]
    r = by.get(name)
    if r is None:
        return [_set_row(STANDBY_SET, "standby_p_w", "W", "not evaluated", scope,
                         f"standby state '{name}' was not analysed")]
    return [_scoped(x, reason=f"state '{name}', named standby_state")
            for x in L.evaluate_standby(r.pq.p_w, "standby", STANDBY_SET)]


def _eps_rows(design: Design, analysis: UnitAnalysis) -> list[dict]:
    """EU 2019/1782 and US DOE rules, for a declared external power supply on their mains."""
    out = design.output
    low = (isinstance(out, ConverterOutput) and low_voltage_eps(out.voltage, out.rated_power))
    rows: list[dict] = []
    regions = [(reg, _EPS_SETS[(reg, low)]) for reg in ("eu", "us")]
    if not design.external_power_supply:
        for _, set_id in regions:
            rows.append(_set_row(set_id, "no_load_p_w", "W", "out of scope",
                                 "out of scope: the design is not declared an external power "
                                 "supply (external_power_supply = true)", ""))
        return rows
    figures = None
    for reg, set_id in regions:
        scope = mains_scope(set_id, design)
        if scope != IN_SCOPE:
            rows.append(_set_row(set_id, "no_load_p_w", "W", "out of scope", scope, ""))
            continue
        if not isinstance(out, ConverterOutput):
            rows.append(_set_row(set_id, "no_load_p_w", "W", "not evaluated", scope,
                                 "the EPS rules need a nameplate output power "
                                 "(output.rated_power of a converter)"))
            continue
        if figures is None:
            figures = analysis.eps if analysis.eps is not None else eps_figures(design)
        no_load, avg, _ = figures
        cls = "low-voltage" if low else "basic-voltage"
        note = (f"{cls}: {out.voltage:g} V, {1e3 * out.rated_power / out.voltage:.0f} mA "
                "nameplate")
        rows += [_scoped(r, reason=(r.reason + "; " if r.reason else "") + note)
                 for r in L.evaluate_eps(no_load, avg, out.rated_power, low_voltage=low,
                                         region=reg)]
    return rows


def _discharge_rows(design: Design, analysis: UnitAnalysis) -> list[dict]:
    """The plug-pin discharge: one check against every rule that covers the capacitor."""
    dis = design.topology_impl.discharge(design, analysis.stresses)
    if dis is None:
        return []
    return [_scoped(L.evaluate_discharge_rules(dis.v0_v, dis.r_bleeder_ohm, dis.c_f))]


def unit_compliance(design: Design, analysis: UnitAnalysis, limits_file=None) -> list[dict]:
    """Compliance rows of one supply: whether it powers its load, then every shipped rule
    applied by product, market (mains) and state.

    Parameters
    ----------
    design : Design
    analysis : UnitAnalysis
        Result of :func:`fleetpower.unit.analyse_unit`.
    limits_file : str or Path, optional
        A user limit file (same format as ``data/limits/``) evaluated in addition.

    Returns
    -------
    list of dict
        Keys: set, quantity, value, limit, unit, used_pct, headroom, verdict, scope,
        clause, edition, provenance, reason. ``scope`` is ``"in scope"`` or
        ``"out of scope: <reason>"``; only in-scope rows pass or fail. Other verdicts:
        ``exempt`` (the rule exempts the design), ``not evaluated`` (the design does not
        say what the rule needs), ``for information`` (IEC 61000-3-2 figures on mains its
        limits are not written for), ``out of scope``, ``not applicable`` (a row of a
        table that does not apply at the design's power or capacitance).

    Notes
    -----
    The scope of each shipped set (products, market, mains) is ``data/limits/scope.csv``.
    IEC 61000-3-2: lighting with no class named is Class C; equipment other than lighting
    of 75 W or less is exempt whatever class is named; on mains outside 220-240 V
    line-to-neutral the figures are shown for information. EU standby applies to the
    state named ``standby_state``; EPS rules to a design declared
    ``external_power_supply = true``; regional rules on their market's mains.
    """
    by = {r.state: r for r in analysis.states}
    rows: list[dict] = regulation_rows(design, analysis)
    rows += _harmonic_rows(design, by.get(rated_state(design)))
    rows += _standby_rows(design, by)
    rows += _eps_rows(design, analysis)
    rows += _discharge_rows(design, analysis)
    if limits_file is not None:
        recs = L.limit_records(limits_file)
        rows += [_scoped(r) for r in L.evaluate_user_set(recs, unit_values(design, analysis))]
    return rows
