"""Which published limits apply to one supply, evaluated on its simulated figures.

This joins the engine's metrics (:mod:`fleetpower.unit`) with the limit tables and
rules (:mod:`fleetpower.limits.tables`, :mod:`fleetpower.limits.rules`). The tool reports
margins against the tables it ships; it does not certify anything, and defers to the
standards' own texts, local codes and licensed practice.

Owns: the choice of limit sets for a unit and the figures they are evaluated on. May import
the rest of ``limits``, ``io`` and the unit analysis; nothing of fleet, compare or report.
"""

from __future__ import annotations

from dataclasses import asdict
from typing import TYPE_CHECKING

import numpy as np

from .. import limits as L
from ..io.design_file import ConverterOutput, Design
from ..simulate import simulate_cases

if TYPE_CHECKING:  # pragma: no cover
    from ..unit import UnitAnalysis

#: load fractions of the average-active-efficiency test (EU 2019/1782, US Level VI)
EPS_LOAD_FRACTIONS = (0.25, 0.50, 0.75, 1.00)


def _rows(rows: list[L.ComplianceRow]) -> list[dict]:
    return [asdict(r) for r in rows]


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
    light = by.get(lightest_state(design))
    if light is not None:
        vals["standby_p_w"] = light.pq.p_w
    for h in range(1, len(q.i_h_a)):
        vals[f"i_h{h}_a"] = float(abs(q.i_h_a[h]))
    for s in analysis.stresses:
        key = s.item.replace(" ", "_").replace("-", "_")
        vals[f"{key}_{s.unit.lower()}"] = s.value
    return vals


def unit_compliance(design: Design, analysis: UnitAnalysis, limits_file=None) -> list[dict]:
    """Compliance rows of one supply against every applicable shipped limit set.

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
        Keys: set, quantity, value, limit, unit, used_pct, headroom, verdict, clause,
        edition, provenance, reason.
    """
    rows: list[dict] = []
    by = {r.state: r for r in analysis.states}
    rated = rated_state(design)
    rs = by.get(rated)
    # 1. harmonic emissions, IEC 61000-3-2, at the rated state
    if design.equipment_class is None:
        rows.append(asdict(L.ComplianceRow(
            "iec61000-3-2", "i_h_a", None, None, "A", None, None, "not applicable",
            "", "IEC 61000-3-2", "", "not evaluated: the design names no equipment_class")))
    elif rs is None:
        rows.append(asdict(L.ComplianceRow(
            "iec61000-3-2", "i_h_a", None, None, "A", None, None, "not applicable", "",
            "IEC 61000-3-2", "", f"rated state '{rated}' was not analysed")))
    else:
        rows += _rows(L.evaluate_harmonic_emissions(
            np.abs(rs.pq.i_h_a), rs.pq.p_w, rs.pq.pf, design.equipment_class,
            is_lighting=design.lighting))
    # 2. standby: the lightest state taken as the low-power mode
    light = by.get(lightest_state(design))
    if light is not None:
        for r in L.evaluate_standby(light.pq.p_w, "standby"):
            d = asdict(r)
            d["reason"] = (d["reason"] + "; " if d["reason"] else "") + \
                f"state '{light.state}' taken as standby"
            rows.append(d)
    # 3. external power supplies
    if isinstance(design.output, ConverterOutput):
        no_load, avg, _ = analysis.eps if analysis.eps is not None else eps_figures(design)
        low_v = design.output.voltage < 6.0
        for region in ("eu", "us"):
            rows += _rows(L.evaluate_eps(no_load, avg, design.output.rated_power,
                                         low_voltage=low_v, region=region))
    # 4. plug-pin discharge after unplugging
    dis = design.topology_impl.discharge(design, analysis.stresses)
    if dis is not None:
        for rule in ("iec60335-1", "iec62368-1"):
            rows += _rows(L.evaluate_discharge(dis.v0_v, dis.r_bleeder_ohm, dis.c_f, rule=rule))
    # 5. the user's own file
    if limits_file is not None:
        df = L.load_limit_set(limits_file)
        rows += _rows(L.evaluate_user_set(df, unit_values(design, analysis)))
    return rows
