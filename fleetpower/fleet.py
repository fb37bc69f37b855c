"""Fleets: many units of several designs on a site's phases, over a day, and their cost.

Data flow: fleet file -> :class:`~fleetpower.io.fleet_file.FleetSpec` (validated groups, site, tariff) ->
each distinct (design, state) solved once on the site's mains (:func:`unit_catalogue`, through the
content-keyed cache of :mod:`fleetpower.simulate`)
-> hourly occupancy tensor ``W[hour, phase, design-state]`` (units in each state per hour)
-> per-phase spectra ``W @ I[design-state, h]`` -> neutral, totals, energy, cost, limits.

The cost of evaluation grows with the number of distinct design-states and phases, not
with the number of units: a million units in a thousand groups is one small tensor product.

Conventions as in :mod:`fleetpower.pq.ieee1459` and :mod:`fleetpower.pq.polyphase`: consumer
sign, line-to-neutral voltages, complex rms phasors with a cosine reference, each phase's
spectrum referred to its own voltage and rotated into L1's frame for the neutral.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from itertools import repeat
from operator import attrgetter
from pathlib import Path

import numpy as np
import pandas as pd

from . import economics as E
from . import limits as L
from .gadget_range import unique
from .io.design_file import Design
from .io.fleet_file import HOURS, FleetSpec
from .pq.derating import conductor_loading, harmonic_loss_factor, k_factor_to_order, tdd_pct
from .pq.ieee1459 import power_totals
from .pq.polyphase import neutral_current, rms_from_spectrum, sum_iec61000_3_6, to_common_frame
from .pq.spectrum import H_MAX, thd_pct
from .simulate import Case, StateResult, run
from .ties import first_largest, first_smallest

DAYS_PER_YEAR = 365.0
MONTHS_PER_YEAR = 12


# ----------------------------------------------------------------------------------
# unit catalogue: every distinct (design, state) simulated once
# ----------------------------------------------------------------------------------
def unit_catalogue(designs: dict[Path, Design], progress=None) -> dict[Path, dict[str, StateResult]]:
    """Every state of every design on the site's mains, solved in one batch.

    Through :func:`fleetpower.simulate.run`, so a design already solved (same validated
    content, same mains) is taken from its cache instead of being solved again.
    """
    items = list(designs.items())
    results = run([Case(d, s) for _, d in items for s in d.states])
    out: dict[Path, dict[str, StateResult]] = {}
    k = 0
    for n, (path, d) in enumerate(items):
        out[path] = {s: results[k + j] for j, s in enumerate(d.states)}
        k += len(d.states)
        if progress:
            progress(n + 1, len(items), d.name)
    return out


def regulation_failures(spec: FleetSpec, catalogue: dict, _columns=None) -> list[dict]:
    """A design that cannot power its load in a state some group uses: one failure each.

    The largest load the design holds in regulation is searched only for designs that
    fail (:func:`fleetpower.unit.max_deliverable_current_a`, whose solves are cached).
    """
    from .unit import max_deliverable_current_a

    cols = _columns if _columns is not None else _group_columns(spec.groups)
    out = []
    for path, d in spec.designs.items():
        if path not in cols["by_design"]:
            continue
        used = _states_used(cols, *cols["by_design"][path])
        for s, members in used.items():
            res = catalogue[path][s]
            # held, or not known (a measured gadget, a hand-made catalogue)
            if getattr(res, "in_regulation", None) is not False:
                continue
            names = [cols["name"][j] for j in members]
            held = max_deliverable_current_a(d)
            if d.states[s][0] == "power":
                amounts = (f"{held * d.output.voltage:.2f} W",
                           f"{res.load_a * d.output.voltage:.2f} W")
            else:
                amounts = (f"{held * 1e3:.1f} mA", f"{res.load_a * 1e3:.1f} mA")
            text = (f"design '{d.name}' (group {', '.join(repr(n) for n in names)}) cannot "
                    f"power its load in state '{s}': holds {amounts[0]} of {amounts[1]}")
            out.append({"check": f"regulation {path.name} {s}", "text": text,
                        "need": f"'{d.name}' to hold {amounts[1]} in state '{s}'",
                        "design": d.name, "state": s, "groups": names})
    return out


def _states_used(cols: dict, sel: np.ndarray, occ: np.ndarray, states) -> dict[str, list[int]]:
    """Each state some of the groups ``sel`` (one design's) is ever in: those groups.

    States in the order the groups first use them (by group, then by the group's states);
    ``states`` is the groups' common state order, None when they differ.
    """
    used: dict[str, list[int]] = {}
    if states is None:  # not one state order: group by group
        for j in sel.tolist():
            for k, s in enumerate(cols["states"][j]):
                if cols["occupancy"][j][:, k].any():
                    used.setdefault(s, []).append(j)
        return used
    in_state = occ.any(axis=1)  # (groups, states): ever in that state
    ever = in_state.any(axis=0)
    first_group = np.where(ever, in_state.argmax(axis=0), sel.size)
    for k in sorted(np.flatnonzero(ever).tolist(), key=lambda k: (first_group[k], k)):
        used[states[k]] = sel[in_state[:, k]].tolist()
    return used


_FIELDS = ("design_path", "count", "phase", "name", "coincident_share", "states", "occupancy")


def _group_columns(groups) -> dict:
    """The groups' fields as lists (``name``, ``count``, ``phase``, ...), and ``by_design``.

    ``by_design`` maps each design file to (indices of its groups in order, their
    occupancies stacked ``(groups, hours, states)``, their common state order or None).
    """
    cols = {f: list(map(attrgetter(f), groups)) for f in _FIELDS}
    # the same few path objects over and over: told apart by identity, then by value
    paths = cols["design_path"]
    first: dict[int, Path] = dict(zip(map(id, paths), paths, strict=True))
    order: dict[Path, int] = {}
    code = {i: order.setdefault(p, len(order)) for i, p in first.items()}
    gcode = np.fromiter(map(code.__getitem__, map(id, paths)), dtype=np.int64,
                        count=len(groups))
    members = np.argsort(gcode, kind="stable")
    bounds = np.cumsum(np.bincount(gcode, minlength=len(order)))
    state_ids = np.fromiter(map(id, cols["states"]), dtype=np.int64, count=len(groups))
    occ = cols["occupancy"]
    by_design = {}
    for path, n in order.items():
        sel = members[(bounds[n - 1] if n else 0):bounds[n]]
        _, first_of = np.unique(state_ids[sel], return_index=True)
        distinct = [cols["states"][j] for j in sel[first_of].tolist()]
        states = distinct[0] if all(x == distinct[0] for x in distinct) else None
        by_design[path] = (sel, np.stack(list(map(occ.__getitem__, sel.tolist()))), states)
    cols["by_design"] = by_design
    return cols


# ----------------------------------------------------------------------------------
# evaluation
# ----------------------------------------------------------------------------------
@dataclass(frozen=True)
class PhaseFigures:
    phase: str
    p_w: float
    q1_var: float
    s_va: float
    i_rms_a: float
    i1_a: float
    thd_i_pct: float
    k_factor: float
    f_hl: float
    i_h_a: np.ndarray  # h = 0..H_MAX, own-phase frame
    k_factor_h_max: int = H_MAX  # highest order the K-factor sums
    i_rms_max_a: float = 0.0  # largest rms over every hour and peak case [A]
    i_rms_max_case: str = ""


@dataclass(frozen=True)
class FleetResult:
    """Everything ``fleetpower fleet`` reports."""

    spec: FleetSpec
    summation_label: str
    units: int
    peak_hour: int
    peak_coincident: bool
    phases: list[PhaseFigures]
    neutral_i_rms_a: float
    neutral_i1_a: float
    neutral_i_h_a: np.ndarray
    p_kw: float
    q1_kvar: float
    s_kva: float
    s_e_kva: float | None
    pf: float
    dpf: float
    hourly: pd.DataFrame
    e_kwh_per_year: float
    energy_cost: float
    demand_cost: float
    reactive_cost: float
    co2_kg_per_year: float
    i_l_a: float
    i_l_source: str
    tdd_pct: float
    compliance: list[dict]
    conductors: list[dict]
    groups: pd.DataFrame
    warnings: list[str]
    pf_basis: str = ""
    pf_arith: float = float("nan")
    peak_case: str = ""  # the demand peak (basis of the demand charge and the phase table)
    worst_phase: dict = field(default_factory=dict)  # largest phase rms, any case
    neutral_max: dict = field(default_factory=dict)  # largest neutral rms, any case
    assumptions: dict = field(default_factory=dict)
    #: design-states whose figures are not simulated (measured gadgets): design, state,
    #: basis (file, window, voltage-scaling model used on this site)
    measured: list[dict] = field(default_factory=list)
    #: failed checks of the fleet's own: a design that cannot power its load in a state a
    #: group uses (dicts: check, text, need, design, state, groups)
    failures: list[dict] = field(default_factory=list)
    #: designs' inputs and results outside the range of small mains gadgets (on this
    #: site's mains; their messages are also in ``warnings``)
    range_warnings: list = field(default_factory=list)

    @property
    def total_cost_per_year(self) -> float:
        return self.energy_cost + self.demand_cost + self.reactive_cost


def _phase_split(count: int, phase: str, phases: list[str]) -> dict[str, int]:
    if phase != "balanced":
        return {phase: count}
    n = len(phases)
    base, extra = divmod(count, n)
    return {p: base + (1 if k < extra else 0) for k, p in enumerate(phases)}


def _units_on_phases(groups, phases: list[str], cols: dict | None = None) -> np.ndarray:
    """(groups, phases) array of units: a balanced group split as evenly as whole units go.

    All groups at once (``cols``: their :func:`_group_columns`); the per-group loop
    (:func:`_units_on_phases_loop`) takes counts that are no 64-bit integers and phases
    that are not the site's.
    """
    cols = cols if cols is not None else _group_columns(groups)
    n_p = len(phases)
    where = {p: k for k, p in enumerate(phases)}
    where["balanced"] = n_p
    counts = cols["count"]
    code = np.fromiter(map(where.get, cols["phase"], repeat(-1)), dtype=np.int64,
                       count=len(groups))
    if (code < 0).any() or not all(type(c) is int and abs(c) < 2**62 for c in counts):
        return _units_on_phases_loop(groups, phases)
    count = np.array(counts, dtype=np.int64)
    out = np.zeros((len(groups), n_p))
    one = np.flatnonzero(code < n_p)
    out[one, code[one]] = count[one]
    both = np.flatnonzero(code == n_p)
    base, extra = np.divmod(count[both], n_p)
    out[both] = base[:, None] + (np.arange(n_p)[None, :] < extra[:, None])
    return out


def _units_on_phases_loop(groups, phases: list[str]) -> np.ndarray:
    out = np.zeros((len(groups), len(phases)))
    where = {p: k for k, p in enumerate(phases)}
    for k, g in enumerate(groups):
        if g.phase != "balanced":
            out[k, where[g.phase]] = g.count
        else:
            for p, n in _phase_split(g.count, g.phase, phases).items():
                out[k, where[p]] = n
    return out


def _accumulate(w, on_phase, cols, sel, addend) -> None:
    """``w[t, p, cols] += units(g, p) * addend[g, t]`` for the groups ``sel``, in order.

    ``addend`` is a (groups, hours, states) array such as the groups' occupancies, all of
    one design (whose design-states are the columns ``cols`` of ``w``). The additions into
    each element of ``w`` happen one group after the other in the groups' order (numpy
    reduces along the first, slow axis of a C-ordered array element by element, without
    pairwise summation; ``tests/test_fleet.py`` checks it), so the sums are the same, bit
    for bit, as a loop over the groups; a phase a group has no units on adds nothing.
    """
    for p in range(w.shape[1]):
        n = on_phase[sel, p]
        nz = n != 0
        terms = n[nz][:, None, None] * addend[nz]
        w[:, p, cols] = np.add.reduce(np.concatenate([w[None, :, p, cols], terms]), axis=0)


def _coincident_occupancy_all(occ: np.ndarray, share: np.ndarray, values) -> np.ndarray:
    """:func:`_coincident_occupancy` of many groups of one design at once: (groups, states).

    Each group's share in the state of the largest ``values`` among those it spends any
    hours in (the first such state on a tie), the rest in the one of the smallest.
    """
    vals = np.asarray(values, dtype=float)[None, :]
    possible = occ[:, 0, :] > 0
    top = first_largest(np.where(possible, vals, -np.inf), axis=1)
    low = first_smallest(np.where(possible, vals, np.inf), axis=1)
    rows = np.arange(len(occ))
    out = np.zeros(possible.shape)
    out[rows, top] += share
    out[rows, low] += 1.0 - share
    return out


def _group_rows(spec, cat, cols, gid, tariff) -> dict:
    """The per-group table's columns (energy, cost, mean and peak figures per unit)."""
    paths = list(spec.designs)
    p_d = [np.array([cat[pa][s].pq.p_w for s in spec.designs[pa].states]) for pa in paths]
    q_d = [np.array([cat[pa][s].pq.q1_var for s in spec.designs[pa].states]) for pa in paths]
    s_max = [float(max(cat[pa][s].pq.s_va for s in spec.designs[pa].states)) for pa in paths]
    count = cols["count"]
    counts = np.array(count, dtype=float)
    p_unit = np.empty((len(count), HOURS))
    q_mean = np.empty(len(count))
    for d, pa in enumerate(paths):
        if pa not in cols["by_design"]:
            continue
        sel, occ, _ = cols["by_design"][pa]  # (g, 24, states)
        p_unit[sel] = occ @ p_d[d]
        q_mean[sel] = (occ @ q_d[d]).mean(axis=1)
    e_day_kwh = counts * p_unit.sum(axis=1) / 1e3
    cost_day = counts * ((p_unit / 1e3) @ tariff.energy_price_by_hour)
    names = np.array([spec.designs[pa].name for pa in paths], dtype=object)
    files = np.array([str(pa.name) for pa in paths], dtype=object)
    return {
        "group": cols["name"], "design": names[gid].tolist(),
        "design_file": files[gid].tolist(), "count": count, "phase": cols["phase"],
        "p_unit_mean_w": p_unit.mean(axis=1), "q1_unit_mean_var": q_mean,
        "s_unit_max_va": np.array(s_max)[gid].tolist(),
        "e_kwh_per_year": e_day_kwh * DAYS_PER_YEAR,
        "energy_cost_per_year": cost_day * DAYS_PER_YEAR,
    }


def evaluate_fleet(spec: FleetSpec, catalogue: dict | None = None, progress=None) -> FleetResult:
    """Evaluate a fleet: per-phase and neutral currents, powers, energy, cost, limits.

    Notes
    -----
    Let ``W[t, p, k]`` be the number of units on phase ``p`` in design-state ``k`` during
    hour ``t`` (group count × occupancy). Real and reactive power add:
    ``P[t, p] = Σ_k W P_k``. Currents add as phasors per harmonic in each phase's own
    frame, ``I[t, p, h] = Σ_k W I_k,h`` (identical units coherently, different designs with
    their own angles), or — on request — by the IEC 61000-3-6 summation law between
    design-states. The neutral is the time-domain sum of the phase currents, computed per
    harmonic in the common frame (:func:`fleetpower.pq.polyphase.neutral_current`); it is
    always from phasors. Energy integrates P over the 24 hours × 365 days; demand, S and
    currents are reported at the peak hour (largest kW, or kVA with a kVA demand tariff).
    """
    site, tariff = spec.site, spec.tariff
    cat = catalogue if catalogue is not None else unit_catalogue(spec.designs, progress)
    phases = site.phases
    keys: list[tuple[Path, str]] = []
    for path, d in spec.designs.items():
        for s in d.states:
            keys.append((path, s))
    kidx = {k: n for n, k in enumerate(keys)}
    n_k, n_p = len(keys), len(phases)
    groups = spec.groups
    columns = _group_columns(groups)  # each field of every group, once
    by_design = columns["by_design"]
    on_phase = _units_on_phases(groups, phases, columns)  # (groups, phases) whole units
    # per design: its columns in the design-state axis, its groups and their occupancies
    design_ids = {path: n for n, path in enumerate(spec.designs)}
    cols_d = [np.array([kidx[(path, s)] for s in d.states]) for path, d in spec.designs.items()]
    gid = np.zeros(len(groups), dtype=np.int64)
    for path, (sel, _, _) in by_design.items():
        gid[sel] = design_ids[path]
    w = np.zeros((HOURS, n_p, n_k))
    for path, (sel, occ, _) in by_design.items():
        _accumulate(w, on_phase, cols_d[design_ids[path]], sel, occ)
    rows = _group_rows(spec, cat, columns, gid, tariff)
    share = np.array([np.nan if x is None else x for x in columns["coincident_share"]])
    hours_groups = np.flatnonzero(~np.isnan(share)).tolist()
    p_k = np.array([cat[pa][s].pq.p_w for pa, s in keys])
    q_k = np.array([cat[pa][s].pq.q1_var for pa, s in keys])
    spectra_k = {key: cat[key[0]][key[1]].i_h_vs_v_a for key in keys}
    n_h = min(len(v) for v in spectra_k.values())
    i_k = np.array([spectra_k[key][:n_h] for key in keys])  # (n_k, n_h)

    p_tp = w @ p_k  # (24, n_p)
    q_tp = w @ q_k
    flat = bool(np.all(w == w[:1]))
    hour_label = ("any hour (every hour alike)" if flat else None)
    w_cases = [w[t] for t in range(HOURS)]
    case_labels = [hour_label or f"hour {t:02d}:00-{t + 1:02d}:00" for t in range(HOURS)]
    if hours_groups:
        # hours per day carry no timing: any hour may find every unit of such a group in
        # the same state. Two coincident cases, each with every such group at once in its
        # state of most kW, or of most current (x diversity; the rest in the least one)
        for what, metric in (("kW", "p_w"), ("current", "i_rms_a")):
            wc = w.copy()
            for path, (sel, occ, _) in by_design.items():
                mine = ~np.isnan(share[sel])
                if not mine.any():
                    continue
                sel, occ = sel[mine], occ[mine]
                values = [getattr(cat[path][s].pq, metric) for s in spec.designs[path].states]
                peak_occ = _coincident_occupancy_all(occ, share[sel], values)
                _accumulate(wc, on_phase, cols_d[design_ids[path]], sel,
                            peak_occ[:, None, :] - occ)
            w_cases += list(wc)
            case_labels += [f"{case_labels[t]}, coincident: {_HEAVIEST} of most {what} at "
                            "once" for t in range(HOURS)]
    w_all = np.array(w_cases)
    spectra = np.einsum("cpk,kh->cph", w_all, i_k)  # (cases, n_p, n_h)
    phasor_spectra = spectra  # the neutral is always built from these
    if spec.summation == "iec61000-3-6":
        mags = np.empty(spectra.shape)
        for c in range(spectra.shape[0]):
            for p in range(n_p):
                mags[c, p] = sum_iec61000_3_6(i_k, w_all[c, p]).i_h_a
        # keep the phasor angles, take the law's magnitudes
        spectra = mags * np.exp(1j * np.angle(spectra))
        label = sum_iec61000_3_6(i_k[:1], [1]).method
    else:
        label = "phasor sum (identical units coherent; designs with their own angles)"
    i_rms_cp = np.sqrt(np.sum(np.abs(spectra) ** 2, axis=-1))  # (cases, n_p)
    s_cp = site.v_ln_v * i_rms_cp
    p_cases = w_all @ p_k  # (cases, n_p)
    q_cases = w_all @ q_k
    metric = s_cp.sum(axis=1) if tariff.demand_basis == "kVA" else p_cases.sum(axis=1)
    peak = int(first_largest(metric))
    peak_label = peak % HOURS
    coincident = peak >= HOURS
    # the neutral of every case, from the phasors in the common frame
    neutral_ch = sum(to_common_frame(phasor_spectra[:, k], p, site.system)
                     for k, p in enumerate(phases))
    neutral_rms_c = rms_from_spectrum(neutral_ch)

    hourly = pd.DataFrame({
        "hour": np.arange(HOURS),
        "p_kw": p_tp.sum(axis=1) / 1e3,
        "q1_kvar": q_tp.sum(axis=1) / 1e3,
        "s_kva": s_cp[:HOURS].sum(axis=1) / 1e3,
        "price_per_kwh": tariff.energy_price_by_hour,
    })
    for k, p in enumerate(phases):
        hourly[f"i_rms_{p.lower()}_a"] = i_rms_cp[:HOURS, k]

    # peak-case figures per phase (the demand peak), and each phase's largest current
    figs = []
    warnings: list[str] = []
    for k, p in enumerate(phases):
        ih = spectra[peak, k]
        i1 = float(abs(ih[1]))
        kf = k_factor_to_order(ih, H_MAX)
        if kf.material:
            warnings.append(
                f"phase {p}: the K-factor sums orders 1-{kf.h_max}; the orders above carry "
                f"{kf.above_energy_pct:.2g} % of the squared current and would raise K by "
                f"{kf.above_k_pct:.0f} % (to order {kf.h_available})")
        c_max = int(first_largest(i_rms_cp[:, k]))
        figs.append(PhaseFigures(
            phase=p, p_w=float(p_cases[peak, k]), q1_var=float(q_cases[peak, k]),
            s_va=float(s_cp[peak, k]), i_rms_a=float(i_rms_cp[peak, k]), i1_a=i1,
            thd_i_pct=float(thd_pct(ih[: H_MAX + 1])) if i1 > 0 else 0.0,
            k_factor=kf.k_factor if i_rms_cp[peak, k] > 0 else 0.0,
            f_hl=float(harmonic_loss_factor(ih[: H_MAX + 1])) if i1 > 0 else 0.0,
            i_h_a=ih[: H_MAX + 1].copy(), k_factor_h_max=kf.h_max,
            i_rms_max_a=float(i_rms_cp[c_max, k]), i_rms_max_case=case_labels[c_max],
        ))
    neutral = neutral_current({f.phase: phasor_spectra[peak, k] for k, f in enumerate(figs)},
                                site.system)
    totals = power_totals(
        {f.phase: f.p_w for f in figs}, {f.phase: f.q1_var for f in figs},
        {f.phase: site.v_ln_v for f in figs}, {f.phase: f.i_rms_a for f in figs},
        i_n_rms_a=neutral.i_rms_a, system=site.system)
    if totals.s_e_va is not None:
        pf, pf_basis = totals.pf_e, "P / S_e (IEEE 1459 effective apparent power)"
    else:
        pf, pf_basis = totals.pf_arith, ("arithmetic: P / sum of phase S (IEEE 1459 S_e "
                                         f"not formed for a {site.system_label} supply)")

    # energy and cost
    p_t_kw = p_tp.sum(axis=1) / 1e3
    e_year = float(p_t_kw.sum() * DAYS_PER_YEAR)
    energy_cost = float(E.energy_cost(p_t_kw * 1e3, tariff.energy_price_by_hour, DAYS_PER_YEAR))
    peak_demand = float(metric[peak] / 1e3)
    demand_cost = float(E.demand_cost(peak_demand, tariff.demand_price, MONTHS_PER_YEAR))
    q_t = q_tp.sum(axis=1)
    reactive_cost = float(sum(E.reactive_energy_cost(q, DAYS_PER_YEAR, tariff.reactive_price,
                                                     tariff.reactive_billing) for q in q_t))
    co2 = float(E.co2_kg(e_year, tariff.co2_kg_per_kwh))

    # largest currents over every hour and peak case: phase conductors and neutral
    c_w, k_w = np.unravel_index(int(first_largest(i_rms_cp)), i_rms_cp.shape)
    worst = {"phase": phases[k_w], "i_rms_a": float(i_rms_cp[c_w, k_w]),
             "case": case_labels[c_w]}
    c_n = int(first_largest(neutral_rms_c))
    neutral_max = {"i_rms_a": float(neutral_rms_c[c_n]), "case": case_labels[c_n]}

    # IEEE 519 at the PCC, on every phase conductor, at each phase's worst case
    if site.demand_current_a:
        i_l, i_l_src = site.demand_current_a, "site demand current"
    else:
        i_l = float(np.max(np.abs(spectra[..., 1])))
        i_l_src = ("the fleet's own largest fundamental, any phase and case (no site "
                   "demand_current given)")
    h_top = min(H_MAX, n_h - 1)
    tdd_ck = (tdd_pct(spectra[..., : h_top + 1], i_l) if i_l > 0
              else np.zeros(i_rms_cp.shape))
    tdd = float(np.max(tdd_ck))
    compliance: list[dict] = []
    if site.isc_a and i_l > 0:
        compliance = _ieee519_every_phase(np.abs(spectra[..., : h_top + 1]), tdd_ck, phases,
                                          case_labels, i_l, site.isc_a)
    elif not site.isc_a:
        warnings.append("no short_circuit_current or transformer data: IEEE 519 not evaluated")
    conductors = []
    for name, current, rating, case in (
        (f"phase {worst['phase']} (largest)", worst["i_rms_a"], site.phase_rating_a,
         worst["case"]),
        ("neutral", neutral_max["i_rms_a"], site.neutral_rating_a, neutral_max["case"]),
    ):
        if rating:
            cl = conductor_loading(current, rating)
            conductors.append({"conductor": name, "i_rms_a": current, "rating_a": rating,
                               "used_pct": float(cl.used_pct), "verdict": str(cl.verdict),
                               "case": case})
    if site.phase_rating_a and neutral_max["i_rms_a"] > worst["i_rms_a"]:
        warnings.append(f"the neutral carries more than any phase ({neutral_max['i_rms_a']:.1f}"
                        f" A vs {worst['i_rms_a']:.1f} A): triplen harmonics add there")
    outside = unique(w for pa, s in keys for w in getattr(cat[pa][s], "range_warnings", ()))
    warnings[:0] = [w.message for w in outside]
    measured = []
    for pa, s in keys:
        res = cat[pa][s]  # a StateResult (or any object with its pq figures, in tests)
        if getattr(res, "basis", None) is not None:
            measured.append({"design": spec.designs[pa].name, "state": s,
                             "voltage_scaling": res.voltage_scaling, "basis": res.basis})
        warnings += [f"design '{spec.designs[pa].name}' state '{s}': {n}"
                     for n in getattr(res, "notes", ())]
    for path, d in spec.designs.items():
        nominal = spec.nominal_mains.get(path)
        if nominal is not None and (abs(nominal.voltage - site.v_ln_v) > 0.15 * site.v_ln_v
                                    or abs(nominal.frequency - site.f_hz) > 0.5):
            warnings.append(f"design '{d.name}' is specified for {nominal.voltage:.0f} V "
                            f"{nominal.frequency:.0f} Hz but simulated on this site's "
                            f"{site.v_ln_v:.0f} V {site.f_hz:.0f} Hz")
    failures = regulation_failures(spec, cat, columns)
    warnings += [f["text"] for f in failures]
    return FleetResult(
        spec=spec, summation_label=label, units=sum(columns["count"]),
        peak_hour=peak_label, peak_coincident=coincident, phases=figs, neutral_i_rms_a=neutral.i_rms_a,
        neutral_i1_a=float(abs(neutral.i_h_a[1])), neutral_i_h_a=neutral.i_h_a[: H_MAX + 1],
        p_kw=totals.p_w / 1e3, q1_kvar=totals.q1_var / 1e3, s_kva=totals.s_arith_va / 1e3,
        s_e_kva=None if totals.s_e_va is None else totals.s_e_va / 1e3,
        pf=pf, dpf=totals.dpf, hourly=hourly, e_kwh_per_year=e_year,
        energy_cost=energy_cost, demand_cost=demand_cost, reactive_cost=reactive_cost,
        co2_kg_per_year=co2, i_l_a=i_l, i_l_source=i_l_src, tdd_pct=tdd,
        compliance=compliance, conductors=conductors, groups=pd.DataFrame(rows),
        warnings=warnings, failures=failures, pf_basis=pf_basis, pf_arith=totals.pf_arith,
        peak_case=case_labels[peak], worst_phase=worst, neutral_max=neutral_max,
        assumptions=_assumptions(spec, bool(hours_groups)), measured=measured,
        range_warnings=outside,
    )


#: how the coincident cases name the state they assume
_HEAVIEST = "every group given hours per day (no timing) in its heaviest state"


def _coincident_occupancy(g, values) -> np.ndarray:
    """A group given hours per day, all at once in its state of the largest value.

    The share ``g.coincident_share`` (diversity, default 1) is in the state with the
    largest ``values`` among those it spends any hours in; the rest in the smallest.
    """
    possible = np.flatnonzero(g.occupancy[0] > 0)
    vals = np.asarray(values, dtype=float)[possible]
    occ = np.zeros(len(g.states))
    occ[possible[int(first_largest(vals))]] += g.coincident_share
    occ[possible[int(first_smallest(vals))]] += 1.0 - g.coincident_share
    return occ


def _ieee519_every_phase(mag_cph, tdd_cp, phases, case_labels, i_l, isc) -> list[dict]:
    """IEEE 519 rows of every phase: each harmonic and TDD at that phase's worst case."""
    from dataclasses import asdict

    rows = []
    for k, p in enumerate(phases):
        env = np.zeros(H_MAX + 1)
        env[: mag_cph.shape[-1]] = mag_cph[:, k].max(axis=0)
        c_h = first_largest(mag_cph[:, k], axis=0)
        c_tdd = int(first_largest(tdd_cp[:, k]))
        by_h = [asdict(r) for r in L.evaluate_ieee519(env, i_l, isc)]
        at_tdd = np.zeros(H_MAX + 1)
        at_tdd[: mag_cph.shape[-1]] = mag_cph[c_tdd, k]
        tdd_rows = {r.quantity: asdict(r) for r in L.evaluate_ieee519(at_tdd, i_l, isc)}
        for r in by_h:
            if r["quantity"] == "tdd_pct":
                r = tdd_rows["tdd_pct"]
                case = case_labels[c_tdd]
            else:
                h = int(r["quantity"][3:-4])
                case = case_labels[int(c_h[h])] if h < len(c_h) else case_labels[0]
            r["reason"] = (r["reason"] + "; " if r["reason"] else "") + f"phase {p}, {case}"
            r["phase"] = p
            r["case"] = case
            rows.append(r)
    return rows


def _assumptions(spec: FleetSpec, any_hours: bool) -> dict[str, str]:
    """What each family of figures rests on, in words."""
    energy = ("integrates each hour of the day: 24-hour profiles as given, hours per day "
              "as a constant share of the units in each state")
    if any_hours:
        peak = ("the largest of every hour, and of coincident cases in which every group "
                "given hours per day (no timing) is at once in its heaviest state (the one "
                "of most kW for demand, of most current for currents; x diversity where "
                "given, the rest in the lightest)")
    else:
        peak = "the largest of every hour of the 24-hour profiles"
    return {
        "energy": energy,
        "demand": f"demand (and the per-phase table): the case of most "
                  f"{spec.tariff.demand_basis}: {peak}",
        "currents": f"conductor loading, worst phase and neutral current, IEEE 519: {peak}",
    }


__all__ = ["evaluate_fleet", "unit_catalogue", "FleetResult"]
