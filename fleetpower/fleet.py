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

from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from . import economics as E
from . import limits as L
from .io.design_file import Design
from .io.fleet_file import HOURS, FleetSpec
from .pq.derating import conductor_loading, harmonic_loss_factor, k_factor, tdd_pct
from .pq.ieee1459 import power_totals
from .pq.polyphase import neutral_current, sum_iec61000_3_6
from .pq.spectrum import H_MAX, thd_pct
from .simulate import Case, StateResult, run

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

    @property
    def total_cost_per_year(self) -> float:
        return self.energy_cost + self.demand_cost + self.reactive_cost


def _phase_split(count: int, phase: str, phases: list[str]) -> dict[str, int]:
    if phase != "balanced":
        return {phase: count}
    n = len(phases)
    base, extra = divmod(count, n)
    return {p: base + (1 if k < extra else 0) for k, p in enumerate(phases)}


def _units_on_phases(groups, phases: list[str]) -> np.ndarray:
    """(groups, phases) array of units: a balanced group split as evenly as whole units go."""
    out = np.zeros((len(groups), len(phases)))
    where = {p: k for k, p in enumerate(phases)}
    for k, g in enumerate(groups):
        if g.phase != "balanced":
            out[k, where[g.phase]] = g.count
        else:
            for p, n in _phase_split(g.count, g.phase, phases).items():
                out[k, where[p]] = n
    return out


_CHUNK = 20_000  # groups per accumulation step (bounds the index arrays' memory)


def _accumulate(w, groups, on_phase, cols_d, gid, addend) -> None:
    """``w[t, p, cols(g)] += units(g, p) * addend(g)[t]`` for every group, in order.

    ``addend(g)`` is an (hours, states) array such as the group's occupancy. The additions
    into each element of ``w`` happen in the groups' order (``np.add.at`` is sequential), so
    the sums are the same, bit for bit, as a loop over the groups.
    """
    n_t, n_p, n_k = w.shape
    flat = w.reshape(-1)
    t_idx = np.arange(n_t)[:, None] * (n_p * n_k)
    templates = [(t_idx + c[None, :]).ravel() for c in cols_d]
    for lo in range(0, len(groups), _CHUNK):
        chunk = groups[lo:lo + _CHUNK]
        values = [addend(g).ravel() for g in chunk]
        seg = np.array([len(x) for x in values])
        values = np.concatenate(values)
        idx = np.concatenate([templates[d] for d in gid[lo:lo + _CHUNK]])
        for p in range(n_p):
            n = np.repeat(on_phase[lo:lo + _CHUNK, p], seg)
            nz = n != 0  # a phase a group has no units on adds nothing
            np.add.at(flat, idx[nz] + p * n_k, n[nz] * values[nz])


def _group_rows(spec, cat, groups, gid, tariff) -> dict:
    """The per-group table's columns (energy, cost, mean and peak figures per unit)."""
    paths = list(spec.designs)
    p_d = [np.array([cat[pa][s].pq.p_w for s in spec.designs[pa].states]) for pa in paths]
    q_d = [np.array([cat[pa][s].pq.q1_var for s in spec.designs[pa].states]) for pa in paths]
    s_max = [float(max(cat[pa][s].pq.s_va for s in spec.designs[pa].states)) for pa in paths]
    counts = np.array([g.count for g in groups], dtype=float)
    p_unit = np.empty((len(groups), HOURS))
    q_mean = np.empty(len(groups))
    for d in range(len(paths)):
        sel = np.flatnonzero(gid == d)
        if not sel.size:
            continue
        occ = np.stack([groups[k].occupancy for k in sel])  # (g, 24, states)
        p_unit[sel] = occ @ p_d[d]
        q_mean[sel] = (occ @ q_d[d]).mean(axis=1)
    e_day_kwh = counts * p_unit.sum(axis=1) / 1e3
    cost_day = counts * ((p_unit / 1e3) @ tariff.energy_price_by_hour)
    names = [spec.designs[pa].name for pa in paths]
    files = [str(pa.name) for pa in paths]
    return {
        "group": [g.name for g in groups], "design": [names[d] for d in gid],
        "design_file": [files[d] for d in gid], "count": [g.count for g in groups],
        "phase": [g.phase for g in groups],
        "p_unit_mean_w": p_unit.mean(axis=1), "q1_unit_mean_var": q_mean,
        "s_unit_max_va": [s_max[d] for d in gid],
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
    on_phase = _units_on_phases(groups, phases)  # (groups, phases) whole units
    # per design: its columns in the design-state axis and its per-unit figures
    design_ids = {path: n for n, path in enumerate(spec.designs)}
    cols_d = [np.array([kidx[(path, s)] for s in d.states]) for path, d in spec.designs.items()]
    gid = np.array([design_ids[g.design_path] for g in groups], dtype=np.int64)
    w = np.zeros((HOURS, n_p, n_k))
    _accumulate(w, groups, on_phase, cols_d, gid, lambda g: g.occupancy)
    rows = _group_rows(spec, cat, groups, gid, tariff)
    w_peak_extra = [k for k, g in enumerate(groups) if g.peak_occupancy is not None]
    p_k = np.array([cat[pa][s].pq.p_w for pa, s in keys])
    q_k = np.array([cat[pa][s].pq.q1_var for pa, s in keys])
    spectra_k = {key: cat[key[0]][key[1]].i_h_vs_v_a for key in keys}
    n_h = min(len(v) for v in spectra_k.values())
    i_k = np.array([spectra_k[key][:n_h] for key in keys])  # (n_k, n_h)

    p_tp = w @ p_k  # (24, n_p)
    q_tp = w @ q_k
    # the peak case: the hourly profile, or a coincident case where diversity is given
    w_cases = [w[t] for t in range(HOURS)]
    if w_peak_extra:
        # coincident cases: every hour again, with the groups that give a diversity (and
        # hours per day) at their coincident occupancy instead of their daily mean
        wc = w.copy()
        _accumulate(wc, [groups[k] for k in w_peak_extra], on_phase[w_peak_extra], cols_d,
                    gid[w_peak_extra], lambda g: g.peak_occupancy[None, :] - g.occupancy)
        w_cases += list(wc)
    spectra = np.einsum("cpk,kh->cph", np.array(w_cases), i_k)  # (cases, n_p, n_h)
    phasor_spectra = spectra  # the neutral is always built from these
    if spec.summation == "iec61000-3-6":
        w_all_ = np.array(w_cases)
        mags = np.empty(spectra.shape)
        for c in range(spectra.shape[0]):
            for p in range(n_p):
                mags[c, p] = sum_iec61000_3_6(i_k, w_all_[c, p]).i_h_a
        # keep the phasor angles, take the law's magnitudes
        spectra = mags * np.exp(1j * np.angle(spectra))
        label = sum_iec61000_3_6(i_k[:1], [1]).method
    else:
        label = "phasor sum (identical units coherent; designs with their own angles)"
    i_rms_cp = np.sqrt(np.sum(np.abs(spectra[..., 1:]) ** 2, axis=-1)
                       + np.abs(spectra[..., 0]) ** 2)
    s_cp = site.v_ln_v * i_rms_cp
    w_all = np.array(w_cases)
    p_cases = w_all @ p_k  # (cases, n_p)
    q_cases = w_all @ q_k
    metric = s_cp.sum(axis=1) if tariff.demand_basis == "kVA" else p_cases.sum(axis=1)
    peak = int(np.argmax(metric))
    peak_label = peak % HOURS
    coincident = peak >= HOURS

    hourly = pd.DataFrame({
        "hour": np.arange(HOURS),
        "p_kw": p_tp.sum(axis=1) / 1e3,
        "q1_kvar": q_tp.sum(axis=1) / 1e3,
        "s_kva": s_cp[:HOURS].sum(axis=1) / 1e3,
        "price_per_kwh": tariff.energy_price_by_hour,
    })
    for k, p in enumerate(phases):
        hourly[f"i_rms_{p.lower()}_a"] = i_rms_cp[:HOURS, k]

    # peak-case figures per phase
    figs = []
    for k, p in enumerate(phases):
        ih = spectra[peak, k]
        i1 = float(abs(ih[1]))
        figs.append(PhaseFigures(
            phase=p, p_w=float(p_cases[peak, k]), q1_var=float(q_cases[peak, k]),
            s_va=float(s_cp[peak, k]), i_rms_a=float(i_rms_cp[peak, k]), i1_a=i1,
            thd_i_pct=float(thd_pct(ih[: H_MAX + 1])) if i1 > 0 else 0.0,
            k_factor=float(k_factor(ih[: H_MAX + 1])) if i_rms_cp[peak, k] > 0 else 0.0,
            f_hl=float(harmonic_loss_factor(ih[: H_MAX + 1])) if i1 > 0 else 0.0,
            i_h_a=ih[: H_MAX + 1].copy(),
        ))
    neutral = neutral_current({f.phase: phasor_spectra[peak, k] for k, f in enumerate(figs)},
                                site.system)
    totals = power_totals(
        {f.phase: f.p_w for f in figs}, {f.phase: f.q1_var for f in figs},
        {f.phase: site.v_ln_v for f in figs}, {f.phase: f.i_rms_a for f in figs},
        i_n_rms_a=neutral.i_rms_a, system=site.system)

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

    # IEEE 519 at the PCC, worst phase
    worst = max(figs, key=lambda f: f.i_rms_a)
    if site.demand_current_a:
        i_l, i_l_src = site.demand_current_a, "site demand current"
    else:
        i_l = max(f.i1_a for f in figs)
        i_l_src = "the fleet's own peak fundamental (no site demand_current given)"
    tdd = float(tdd_pct(worst.i_h_a, i_l)) if i_l > 0 else 0.0
    compliance: list[dict] = []
    warnings: list[str] = []
    if site.isc_a:
        from dataclasses import asdict

        compliance = [asdict(r) for r in L.evaluate_ieee519(np.abs(worst.i_h_a), i_l, site.isc_a)]
        for r in compliance:
            r["reason"] = (r["reason"] + "; " if r["reason"] else "") + f"phase {worst.phase}"
    else:
        warnings.append("no short_circuit_current or transformer data: IEEE 519 not evaluated")
    conductors = []
    for name, current, rating in (
        ("phase (worst)", worst.i_rms_a, site.phase_rating_a),
        ("neutral", neutral.i_rms_a, site.neutral_rating_a),
    ):
        if rating:
            cl = conductor_loading(current, rating)
            conductors.append({"conductor": name, "i_rms_a": current, "rating_a": rating,
                               "used_pct": float(cl.used_pct), "verdict": str(cl.verdict)})
    if site.phase_rating_a and neutral.i_rms_a > worst.i_rms_a:
        warnings.append(f"the neutral carries more than any phase ({neutral.i_rms_a:.1f} A vs "
                        f"{worst.i_rms_a:.1f} A): triplen harmonics add there")
    for path, d in spec.designs.items():
        nominal = spec.nominal_mains.get(path)
        if nominal is not None and (abs(nominal.voltage - site.v_ln_v) > 0.15 * site.v_ln_v
                                    or abs(nominal.frequency - site.f_hz) > 0.5):
            warnings.append(f"design '{d.name}' is specified for {nominal.voltage:.0f} V "
                            f"{nominal.frequency:.0f} Hz but simulated on this site's "
                            f"{site.v_ln_v:.0f} V {site.f_hz:.0f} Hz")
    return FleetResult(
        spec=spec, summation_label=label, units=sum(g.count for g in spec.groups),
        peak_hour=peak_label, peak_coincident=coincident, phases=figs, neutral_i_rms_a=neutral.i_rms_a,
        neutral_i1_a=float(abs(neutral.i_h_a[1])), neutral_i_h_a=neutral.i_h_a[: H_MAX + 1],
        p_kw=totals.p_w / 1e3, q1_kvar=totals.q1_var / 1e3, s_kva=totals.s_arith_va / 1e3,
        s_e_kva=None if totals.s_e_va is None else totals.s_e_va / 1e3,
        pf=totals.pf_arith, dpf=totals.dpf, hourly=hourly, e_kwh_per_year=e_year,
        energy_cost=energy_cost, demand_cost=demand_cost, reactive_cost=reactive_cost,
        co2_kg_per_year=co2, i_l_a=i_l, i_l_source=i_l_src, tdd_pct=tdd,
        compliance=compliance, conductors=conductors, groups=pd.DataFrame(rows),
        warnings=warnings,
    )


__all__ = ["evaluate_fleet", "unit_catalogue", "FleetResult"]
